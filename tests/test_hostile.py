"""Hostile and broken input: the cases of the hardening issue, each with the outcome it must have.

The contract (symgain.cli): exit 0 ok, 1 a check failed, 2 bad input with one bounded line
on stderr; never 3, never an abort, never a traceback, never code run from user text.
Reference for the ill-conditioned chain: the closed loop of an exact gain has the target's
characteristic polynomial, whatever scipy's place_poles returns (common practice).
"""
from __future__ import annotations

import os
import stat
import subprocess
import sys
import time
from pathlib import Path

import pytest
import sympy as sp

import symgain
from symgain.errors import SymgainError
from symgain.model import Model, Parameter, TargetSpec

from hostile_helpers import MARK, cart_text, one_bounded_line, run_cli, toml_string

ROOT = Path(__file__).resolve().parent.parent
PAYLOAD = f"__import__('os').system('touch {MARK}')"


def write(tmp_path: Path, text: str, name: str = "m.toml") -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def no_marker(*folders: Path) -> bool:
    return not any((f / MARK).exists() for f in (*folders, Path.cwd()))


# -- model files that must be refused with exit 2 and one line -----------------------------------
def _nested_toml(depth: int) -> str:
    return cart_text(extra="x = " + "[" * depth + "]" * depth)


REFUSED_FILES = {
    "name with a trailing newline": cart_text(name="cart\n"),
    "name with a lookalike letter": cart_text(name="c\u0430rt"),
    "parameter with a lookalike letter": cart_text(params='"m\u0430" = { sign = "positive", range = [1, 2] }'),
    "fullwidth letter in an expression": cart_text().replace('"1/m"', '"1/\uff4d"'),
    "LaTeX power tower": cart_text().replace('A = [["0", "1"], ["0", "0"]]',
                                             'A = "\\\\begin{bmatrix} {{9^{999}}^{999}}^{999} & 1 \\\\\\\\ 0 & 0 '
                                             '\\\\end{bmatrix}"'),
    "LaTeX braces 1000 deep": cart_text().replace('A = [["0", "1"], ["0", "0"]]',
                                                  'A = "\\\\begin{bmatrix} ' + "{" * 1000 + "1" + "}" * 1000
                                                  + ' & 1 \\\\\\\\ 0 & 0 \\\\end{bmatrix}"'),
    "LaTeX sqrt 2000 deep": cart_text().replace('A = [["0", "1"], ["0", "0"]]',
                                                'A = "\\\\begin{bmatrix} ' + "\\\\sqrt{" * 2000 + "1"
                                                + "}" * 2000 + ' & 1 \\\\\\\\ 0 & 0 \\\\end{bmatrix}"'),
    "number of 4400 digits": cart_text().replace('"1/m"', '"(10^399)^11/m"'),
    "TOML nested 5000 deep": _nested_toml(5000),
    "zero denominator in disguise": cart_text().replace('"1/m"', '"1/(m*(sin(1)^2 + cos(1)^2 - 1))"'),
    "symbolic zero denominator": cart_text().replace('"1/m"', '"1/((m+1)^2 - m^2 - 2*m - 1)"'),
    "settling time 0": cart_text(target='settling_time = "0"\novershoot = 0.05'),
    "overshoot 0": cart_text(target='settling_time = 2\novershoot = "0"'),
    "overshoot 1.5": cart_text(target="settling_time = 2\novershoot = 1.5"),
    "damping -1": cart_text(target="damping = -1\nnatural_frequency = 2"),
    "damping 0": cart_text(target="damping = 0\nnatural_frequency = 2"),
    "bandwidth -3": cart_text(target='prototype = "bessel"\nbandwidth = -3'),
    "range to infinity": cart_text(params='m = { sign = "positive", range = [1, inf] }'),
    "range given as text": cart_text(params='m = { sign = "positive", range = "12" }'),
    "range of strings": cart_text(params='m = { sign = "positive", range = ["1", "2"] }'),
    "range of booleans": cart_text(params='m = { sign = "positive", range = [true, true] }'),
    "nominal given as text": cart_text(params='m = { sign = "positive", nominal = "2" }'),
    "nominal true": cart_text(params='m = { sign = "positive", nominal = true }'),
    "nominal nan": cart_text(params='m = { sign = "positive", nominal = nan }'),
    "nonzero with nominal 0": cart_text(params='m = { sign = "nonzero", nominal = 0 }'),
    "unit that is not text": cart_text(params='m = { sign = "positive", range = [1, 2], unit = 3 }'),
    "title that is not text": cart_text().replace('title = ""', "title = [1, 2]"),
    "key with newline and NUL": cart_text(extra='"bad\\nkey\\u0000" = 1'),
    "very long unknown key": cart_text(extra=f'{"k" * 5000} = 1'),
    "matrix entry runs code": cart_text().replace('"1/m"', toml_string(PAYLOAD)),
    "pole runs code": cart_text(poles=f'[{toml_string(PAYLOAD)}, "-3"]'),
}


@pytest.mark.parametrize("label", list(REFUSED_FILES))
def test_refused_model_file(label, tmp_path):
    path = write(tmp_path, REFUSED_FILES[label])
    start = time.perf_counter()
    code, out, err = run_cli(["check", path], cwd=tmp_path)
    took = time.perf_counter() - start
    assert code == 2, (label, code, err)
    assert one_bounded_line(err), (label, err)
    assert "\x00" not in err
    assert no_marker(tmp_path)
    print(f"{label}: refused in {took:.2f} s: {err.strip()[:120]}")  # timings printed, never asserted


# -- files that are not model files -------------------------------------------------------------------
def test_devices_fifos_and_large_files_are_refused(tmp_path):
    fifo = tmp_path / "pipe.toml"
    os.mkfifo(fifo)
    big = tmp_path / "big.toml"
    big.write_bytes(b"#" * 2_000_001)
    for path in ("/dev/zero", "/dev/urandom", fifo, tmp_path, big):
        code, _, err = run_cli(["derive", path])
        assert code == 2 and one_bounded_line(err), (path, err)
    assert "FIFO" in run_cli(["derive", fifo])[2]


# -- command options ---------------------------------------------------------------------------------
OPTION_CASES = [
    ["check", "{m}", "--points", "100000000"],
    ["check", "{m}", "--points", "0"],
    ["check", "{m}", "--points", "-5"],
    ["check", "{m}", "--points", "9" * 20],
    ["check", "{m}", "--tolerance", "nan"],
    ["check", "{m}", "--tolerance", "inf"],
    ["check", "{m}", "--tolerance", "-1"],
    ["check", "{m}", "--tolerance", "0"],
    ["check", "{m}", "--seed", "-1"],
    ["check", "{m}", "--seed", "9" * 40],
    ["schedule", "{m}", "--over", "m=1:2:100000000", "--quiet", "-o", "{o}"],
    ["schedule", "{m}", "--over", "m=1:2:" + "9" * 20, "--quiet", "-o", "{o}"],
    ["schedule", "{m}", "--over", "m=1:2:1", "--quiet", "-o", "{o}"],
    ["schedule", "{m}", "--over", "m=1:inf:3", "--quiet", "-o", "{o}"],
    ["schedule", "{m}", "--over", "m=1:1e400:3", "--quiet", "-o", "{o}"],
    ["schedule", "{m}", "--over", "q\n\x00=1:2", "--quiet", "-o", "{o}"],
    ["robust", "{m}", "--mismatch", "m", "--points", "10000000", "--quiet", "-o", "{o}"],
    ["robust", "{m}", "--mismatch", *[f"p{i}" for i in range(21)], "--quiet", "-o", "{o}"],
    ["robust", "{m}", "--mismatch", "m", "--seed", "-1", "--quiet", "-o", "{o}"],
    ["emit", "{m}", "--to", "python", "--name", "cart\n", "-o", "{o}"],
    ["emit", "{m}", "--to", "python", "--name", "class", "-o", "{o}"],
    ["emit", "{m}", "--to", "python", "-o", "/dev/full"],
    ["--time-limit", "nan", "derive", "{m}"],
    ["--memory-limit", "-1", "derive", "{m}"],
]


@pytest.mark.parametrize("args", OPTION_CASES, ids=[" ".join(a)[:60] for a in OPTION_CASES])
def test_refused_option(args, tmp_path):
    model = write(tmp_path, cart_text())
    filled = [a.replace("{m}", str(model)).replace("{o}", str(tmp_path / "out")) for a in args]
    code, _, err = run_cli(filled)
    assert code == 2, (args, code, err)
    assert one_bounded_line(err), err


def test_stdout_to_a_full_disk_is_one_line_exit_2(tmp_path):
    model = write(tmp_path, cart_text())
    with open("/dev/full", "w") as full:
        proc = subprocess.run([sys.executable, "-m", "symgain", "derive", str(model)], stdout=full,
                              stderr=subprocess.PIPE, text=True, cwd=ROOT,
                              env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert proc.returncode == 2, proc.stderr
    assert one_bounded_line(proc.stderr) and "No space left" in proc.stderr


# -- honest results ------------------------------------------------------------------------------------
def test_parameter_e_beside_the_constant_E(tmp_path):
    text = cart_text(params='e = { sign = "positive", range = [1, 2] }\nm = { sign = "positive", range = [1, 2] }')
    text = text.replace('"1/m"', '"E/(m*e)"')
    code, out, err = run_cli(["check", write(tmp_path, text)])
    assert code == 0 and "check passed" in out, out + err


def test_every_point_skipped_is_not_a_pass(tmp_path):
    text = cart_text(params='m = { sign = "real", range = [0, 0] }')
    code, out, err = run_cli(["check", write(tmp_path, text)])
    assert code == 2 and "skipped" in err, out + err


def test_pole_at_zero_is_a_warning_on_stderr_and_in_json(tmp_path):
    path = write(tmp_path, cart_text(poles='["0", "-3"]'))
    code, out, err = run_cli(["derive", path, "--json"])
    assert code == 0
    assert "warning" in err and "real part >= 0" in err
    import json

    assert any("target pole 0" in w for w in json.loads(out)["warnings"])


def test_thirty_state_chain_passes_with_an_honest_note(tmp_path):
    n = 30
    rows = [[("1" if j == i + 1 else "0") for j in range(n)] for i in range(n)]
    b = [["0"]] * (n - 1) + [["1/m"]]
    poles = [f"-{1 + k / 10:g}" for k in range(n)]
    text = ('name = "chain"\n[parameters]\nm = { sign = "positive", range = [1, 2] }\n[plant]\n'
            f'states = {[f"x{i}" for i in range(n)]}\ninputs = ["u"]\nA = {rows}\nB = {b}\n'
            f"[feedback]\npoles = {poles}\n").replace("'", '"')
    code, out, err = run_cli(["check", write(tmp_path, text), "--points", "3"])
    assert code == 0, out[-2000:] + err
    assert "gain not compared: ill-conditioned placement" in out


def test_emitted_code_refuses_values_outside_the_declared_signs(tmp_path):
    design = symgain.derive(symgain.model_from_text(cart_text(), "m.toml"))
    symgain_emit = __import__("symgain.emit", fromlist=["emit"])
    symgain_emit.emit(design, ["python"], tmp_path, name="signs_mod")
    sys.path.insert(0, str(tmp_path))
    try:
        module = __import__("signs_mod")
    finally:
        sys.path.remove(str(tmp_path))
    for bad in (0.0, -1.0, float("nan"), float("inf")):
        with pytest.raises(ValueError, match="m must be a finite positive number"):
            module.feedback_gain(m=bad)
    assert module.feedback_gain(m=1.5).shape == (1, 2)


# -- the Python API --------------------------------------------------------------------------------------
def _cart_parameter():
    return Parameter.declare("m", sign="positive", range=(1, 2))


API_MISUSE = {
    "Model A runs code": lambda: Model(name="cart", parameters=(_cart_parameter(),), states=("p", "v"),
                                       inputs=("F",), A=[[PAYLOAD, "1"], ["0", "0"]], B=[["0"], ["1/m"]]),
    "Model B runs code": lambda: Model(name="cart", parameters=(_cart_parameter(),), states=("p", "v"),
                                       inputs=("F",), A=[["0", "1"], ["0", "0"]], B=[["0"], [PAYLOAD]]),
    "TargetSpec pole runs code": lambda: symgain.derive(Model(
        name="cart", parameters=(_cart_parameter(),), states=("p", "v"), inputs=("F",),
        A=[["0", "1"], ["0", "0"]], B=[["0"], ["1/m"]],
        feedback=TargetSpec("poles", {"poles": [PAYLOAD, "-3"]}))),
    "polynomial text runs code": lambda: symgain.model_from_matrices(
        "cart", [["0", "1"], ["0", "0"]], [["0"], ["1/m"]], parameters={"m": {"sign": "positive"}},
        feedback=TargetSpec("polynomial", {"polynomial": PAYLOAD})),
    "polynomial dict runs code": lambda: symgain.model_from_matrices(
        "cart", [["0", "1"], ["0", "0"]], [["0"], ["1/m"]], parameters={"m": {"sign": "positive"}},
        feedback={"polynomial": PAYLOAD}),
    "derive(None)": lambda: symgain.derive(None),
    "load_model(3)": lambda: symgain.load_model(3),
    "check_design(None)": lambda: symgain.check_design(None),
    "states as a string": lambda: symgain.model_from_matrices(
        "cart", [["0", "1"], ["0", "0"]], [["0"], ["1"]], states="pv", inputs=["F"]),
    "feedforward yes": lambda: symgain.model_from_matrices(
        "cart", [["0", "1"], ["0", "0"]], [["0"], ["1"]], feedforward="yes", feedback={"poles": [-1, -2]}),
    "Model states as a string": lambda: Model(name="cart", parameters=(), states="pv", inputs=("F",),
                                              A=[["0", "1"], ["0", "0"]], B=[["0"], ["1"]]),
    "range of strings": lambda: Parameter.declare("m", range=("1", "2")),
    "nominal bool": lambda: Parameter.declare("m", nominal=True),
    "name with newline": lambda: Parameter.declare("m\n"),
    "unknown sign type": lambda: Parameter.declare("m", sign=["positive"]),
}


@pytest.mark.parametrize("label", list(API_MISUSE))
def test_api_misuse_raises_the_library_error(label, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    with pytest.raises(SymgainError) as info:
        API_MISUSE[label]()
    assert "\n" not in str(info.value) and len(str(info.value)) <= 300
    assert not (tmp_path / MARK).exists()


def test_emit_misuse_raises_the_library_error(tmp_path):
    design = symgain.derive(symgain.model_from_text(cart_text(), "m.toml"))
    from symgain.emit import emit

    for kwargs in ({"precision": "quad"}, {"precision": None}, {"name": "x\n"}, {"name": 3}):
        with pytest.raises(SymgainError):
            emit(design, ["c"], tmp_path, **kwargs)
    with pytest.raises(SymgainError):
        emit(design, ["cobol"], tmp_path)
    assert not list(tmp_path.iterdir())


def test_a_failing_set_leaves_the_old_files(tmp_path):
    """Disk trouble in the middle of a set: the files written before are rolled back."""
    from symgain.emit.files import write_files

    write_files(tmp_path, {"a.txt": "old a", "b.txt": "old b"})
    (tmp_path / "c.txt").mkdir()  # c.txt cannot be replaced: the set must fail as a whole
    with pytest.raises(SymgainError):
        write_files(tmp_path, {"a.txt": "new a", "b.txt": "new b", "c.txt": "new c", "d.txt": "new d"})
    assert (tmp_path / "a.txt").read_text() == "old a" and (tmp_path / "b.txt").read_text() == "old b"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.txt", "b.txt", "c.txt"]


def test_time_limit_names_the_step(tmp_path):
    """A dense symbolic plant under a tiny time limit stops with one line naming the step."""
    n = 5
    params = "\n".join(f"a{i}{j} = {{ sign = \"real\", range = [1, 2] }}" for i in range(n) for j in range(n))
    rows = [[f"a{i}{j}" for j in range(n)] for i in range(n)]
    text = (f'name = "dense"\n[parameters]\n{params}\n[plant]\nstates = {[f"x{i}" for i in range(n)]}\n'
            f'inputs = ["u"]\nA = {rows}\nB = {[["1"]] * n}\n[feedback]\npoles = {["-1"] * n}\n'
            ).replace("'", '"')
    code, _, err = run_cli(["--time-limit", "0.5", "derive", write(tmp_path, text)])
    assert code == 2 and one_bounded_line(err), err
    assert "time limit of 0.5 s reached in derive" in err and "5 states" in err


def test_a_native_abort_ends_in_one_line(tmp_path):
    """A native library that aborts (as FLINT does when an allocation fails) is reported by the
    supervising parent: one line naming the step, exit code 2; its own message is not shown."""
    script = ("import os, sys\nfrom symgain.guard import stage, supervised\n"
              "def work():\n    stage('derive: feedback gain', '8 states')\n"
              "    os.write(1, b'FLINT exception (General error):\\n    Unable to allocate memory (1).\\n')\n"
              "    os.abort()\nsys.exit(supervised(work, 1500))\n")
    proc = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, cwd=tmp_path,
                          env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert proc.returncode == 2
    assert proc.stdout == ""
    assert one_bounded_line(proc.stderr), proc.stderr
    assert "ran out of memory (limit 1500 MB) in derive: feedback gain (8 states)" in proc.stderr


def test_supervised_command_keeps_output_and_exit_codes(tmp_path):
    model = write(tmp_path, cart_text())
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    ok = subprocess.run([sys.executable, "-m", "symgain", "check", str(model)], capture_output=True, text=True,
                        env=env, cwd=tmp_path)
    assert ok.returncode == 0 and "check passed" in ok.stdout
    bad = subprocess.run([sys.executable, "-m", "symgain", "check", str(model), "--points", "0"],
                         capture_output=True, text=True, env=env, cwd=tmp_path)
    assert bad.returncode == 2 and one_bounded_line(bad.stderr)
