"""The command line: derive, check, demo, help texts, exit codes and one-line errors.

Exit codes (contract of symgain.cli): 0 ok, 1 a check failed, 2 bad input with one line on
stderr and no traceback unless --debug. Reference values: the greenhouse cart's gains
K = [2 m w^2, 3 m w - c] follow by hand from matching s^2 + (c + k2)/m s + k1/m with
(s + w)(s + 2 w) (common practice, coefficient matching).
"""
import json
import subprocess
import sys
from pathlib import Path

import pytest
import sympy as sp

from symgain.cli import build_parser, main
from symgain.design import derive
from symgain.model.toml_file import load_model

ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = sorted((ROOT / "examples").glob("*.toml"))
CART = ROOT / "examples" / "greenhouse_cart.toml"
# derive --json also emits sensitivity tables, which take tens of seconds on the larger
# examples; the read-back test runs on these smaller ones (all examples are derived in
# test_examples.py)
JSON_EXAMPLES = [p for p in EXAMPLES if p.stem in {"greenhouse_cart", "camera_tilt", "overhead_trolley",
                                                   "drone_altitude", "quarter_car_suspension",
                                                   "heated_press_platen"}]

GOOD = '''name = "cart"
[parameters]
m = { sign = "positive", range = [1, 2] }
[plant]
states = ["p", "v"]
inputs = ["F"]
A = [["0", "1"], ["0", "0"]]
B = [["0"], ["1/m"]]
[feedback]
poles = ["-2", "-3"]
'''


def run(argv, capsys):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def write(tmp_path, text, name="cart.toml"):
    path = tmp_path / name
    path.write_text(text)
    return path


# --- good runs ------------------------------------------------------------------------------------
def test_derive_prints_the_gains(capsys):
    code, out, err = run(["derive", CART], capsys)
    assert code == 0 and err == ""
    assert "2*m*w^2" in out and "-c + 3*m*w" in out


def test_derive_json_contract_for_the_cart(capsys):
    code, out, _ = run(["derive", CART, "--json"], capsys)
    assert code == 0
    data = json.loads(out)
    assert data["name"] == "greenhouse_cart"
    assert data["parameters"] == ["m", "c", "w"]
    fb = data["feedback"]
    for key in ("gain", "valid_when", "target_polynomial", "closed_loop_polynomial"):
        assert key in fb
    m, c, w = sp.symbols("m c w")
    gain = [[sp.sympify(e, locals={"m": m, "c": c, "w": w}) for e in row] for row in fb["gain"]]
    assert sp.expand(gain[0][0] - 2 * m * w**2) == 0
    assert sp.expand(gain[0][1] - (3 * m * w - c)) == 0
    assert "estimator" not in data  # a part is present only when the model asks for it


@pytest.mark.parametrize("path", JSON_EXAMPLES, ids=[p.stem for p in JSON_EXAMPLES])
def test_derive_json_gains_read_back_equal(path, capsys):
    code, out, _ = run(["derive", path, "--json"], capsys)
    assert code == 0
    data = json.loads(out)
    design = derive(load_model(path))
    names = design.model.symbols
    assert data["parameters"] == list(names)
    for part in design.parts():
        rows = data[part.part]["gain"]
        assert len(rows) == part.gain.rows and all(len(r) == part.gain.cols for r in rows)
        for i, row in enumerate(rows):
            for j, text in enumerate(row):
                back = sp.sympify(text, locals=dict(names))  # our own JSON output, not user text
                assert back == part.gain[i, j] or sp.cancel(back - part.gain[i, j]) == 0
        for cond in data[part.part]["valid_when"]:
            assert sp.sympify(cond, locals=dict(names)) in part.valid_when


@pytest.mark.parametrize("path", EXAMPLES, ids=[p.stem for p in EXAMPLES])
def test_check_exits_0_on_examples(path, capsys):
    code, out, _ = run(["check", path, "--points", "4"], capsys)
    assert code == 0
    assert "check passed" in out


def test_demo_exits_0(capsys):
    code, out, _ = run(["demo"], capsys)
    assert code == 0
    assert "check passed" in out


def test_check_failure_exits_1(capsys):
    code, out, _ = run(["check", CART, "--points", "10", "--tolerance", "1e-30"], capsys)
    assert code == 1
    assert "FAILED" in out


def command_names():
    parser = build_parser()
    sub = next(a for a in parser._actions if a.__class__.__name__ == "_SubParsersAction")
    return sorted(sub.choices)


@pytest.mark.parametrize("command", command_names())
def test_help_of_each_command_shows_an_example(command, capsys):
    with pytest.raises(SystemExit) as exc:
        main([command, "--help"])
    out = capsys.readouterr().out
    assert exc.value.code == 0
    assert "example" in out.lower() and f"symgain {command}" in out


def test_top_level_help_lists_examples(capsys):
    with pytest.raises(SystemExit):
        main(["--help"])
    out = capsys.readouterr().out
    assert "symgain derive" in out and "symgain check" in out


# --- bad input: exit 2, one line, nothing written ----------------------------------------------------
BAD = {
    "undeclared": (('"1/m"', '"1/q"'), "cart.toml: plant.B[1][0]:", "'q'"),
    "non_square": (('A = [["0", "1"], ["0", "0"]]', 'A = [["0", "1", "0"], ["0", "0", "1"]]'),
                   "cart.toml: plant.A:", "square"),
    "b_rows": (('B = [["0"], ["1/m"]]', 'B = [["0"], ["1/m"], ["0"]]'), "cart.toml: plant.B:", "rows"),
    "injection": (('"1/m"', '''"__import__('os').system('touch PWNED')"'''),
                  "cart.toml: plant.B[1][0]:", "refused"),
    "attribute": (('"1/m"', '"m.__class__"'), "cart.toml: plant.B[1][0]:", "refused"),
    "power_tower": (('"1/m"', '"9**9**9**9"'), "cart.toml: plant.B[1][0]:", ""),
    "pole_count": (('poles = ["-2", "-3"]', 'poles = ["-2", "-3", "-4"]'), "cart.toml: feedback", "3 poles"),
    "unpaired": (('poles = ["-2", "-3"]', 'poles = ["-2 + I", "-3"]'), "cart.toml: feedback", "conjugate"),
    "non_monic": (('poles = ["-2", "-3"]', 'polynomial = "2*s^2 + 3*s + 1"'), "cart.toml: feedback", "monic"),
    "degree": (('poles = ["-2", "-3"]', 'polynomial = "s^3 + 3*s + 1"'), "cart.toml: feedback", "degree"),
    "prototype": (('poles = ["-2", "-3"]', 'prototype = "elliptic"\nbandwidth = "2"'),
                  "cart.toml: feedback.prototype:", "elliptic"),
    "toml_syntax": (("[plant]", "[plant"), "cart.toml:", "line 4"),
    "never_controllable": (('A = [["0", "1"], ["0", "0"]]\nB = [["0"], ["1/m"]]',
                            'A = [["0", "0"], ["0", "0"]]\nB = [["1/m"], ["1/m"]]'),
                           "cart.toml: feedback", "not controllable"),
}


@pytest.mark.parametrize("case", sorted(BAD))
def test_bad_input_exits_2_with_one_line(case, tmp_path, monkeypatch, capsys):
    (old, new), prefix, fragment = BAD[case]
    assert old in GOOD
    monkeypatch.chdir(tmp_path)
    write(tmp_path, GOOD.replace(old, new))
    for command in ("derive", "check"):
        code, out, err = run([command, "cart.toml"], capsys)
        assert code == 2
        assert out == ""
        lines = err.strip().splitlines()
        assert len(lines) == 1, err
        assert lines[0].startswith("symgain: " + prefix), lines[0]
        assert fragment in lines[0]
        assert "Traceback" not in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["cart.toml"]  # nothing written


def test_missing_file_exits_2(tmp_path, capsys):
    code, out, err = run(["derive", tmp_path / "absent.toml"], capsys)
    assert code == 2 and out == ""
    assert "absent.toml" in err and len(err.strip().splitlines()) == 1


def test_debug_shows_the_exception(tmp_path):
    path = write(tmp_path, GOOD.replace('"1/m"', '"1/q"'))
    with pytest.raises(ValueError, match="undeclared symbol 'q'"):
        main(["--debug", "derive", str(path)])


def test_unknown_option_exits_2(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["derive", str(CART), "--no-such-option"])
    assert exc.value.code == 2


def test_injection_through_a_real_process(tmp_path):
    """End to end: `python -m symgain` in a fresh process does not run the text."""
    write(tmp_path, GOOD.replace('"1/m"', '''"__import__('os').system('touch PWNED')"'''))
    done = subprocess.run([sys.executable, "-m", "symgain", "derive", "cart.toml"], cwd=tmp_path,
                          capture_output=True, text=True, timeout=300)
    assert done.returncode == 2
    assert done.stdout == ""
    assert done.stderr.startswith("symgain: cart.toml: plant.B[1][0]: refused")
    assert "Traceback" not in done.stderr
    assert not (tmp_path / "PWNED").exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["cart.toml"]
