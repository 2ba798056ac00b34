"""Counts for the hostile-input corpus: cases tried, refused cleanly, crashed, slow, executed.

Runs every case of tests/test_hostile.py (model files, command options, API misuse), every
text of the injection corpus through the Python emitter (imported and called) and the C
emitter (compiled strictly and run, when a compiler is present), hostile argument values
into the emitted Python and C (negative, out of range, nan, inf, text), the dense 8 x 8
model of 72 parameters under the memory guard (``python -m symgain``, small limit), and a
number of random mutations of a valid model file, then prints one table. "slow" counts
cases over 2 s (reported, never asserted; the dense model's seconds are printed below the
table, its limit being 300 MB);
"executed" counts cases after which the marker file exists. For emitted code "refused"
means the function raised ValueError/TypeError (Python) or returned a nonzero code with its
matrix untouched (C).

    PYTHONPATH=. python benchmarks/hostile_counts.py [N_RANDOM]
"""
from __future__ import annotations

import importlib.util
import math
import os
import random
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "tests"))

from hostile_helpers import ALL_PAYLOADS, MARK, cart_text, one_bounded_line, run_cli  # noqa: E402
import test_hostile as cases  # noqa: E402

from symgain.emit import emit  # noqa: E402
from symgain.errors import SymgainError  # noqa: E402
from symgain.model.toml_file import model_from_text  # noqa: E402
import symgain  # noqa: E402

SLOW = 2.0
CC = shutil.which("gcc") or shutil.which("cc")
C_FLAGS = ["-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic"]
# m is declared positive with range [1, 2]: the two ends are accepted (controls), the rest refused
HOSTILE_VALUES = [1.0, 2.0, -1.5, 0.0, 0.5, 2.5, 1e300, -1e-300, math.nan, math.inf, -math.inf]
C_DRIVER = r"""
#include <stdio.h>
#include "payload.h"
int main(void)
{
    double m, K[1][2];
    while (scanf("%lf", &m) == 1) {
        int code;
        K[0][0] = K[0][1] = -12345.0;
        code = payload_feedback_gain(m, K);
        printf("%d %d\n", code, K[0][0] == -12345.0 && K[0][1] == -12345.0);
    }
    return 0;
}
"""


def _compile_and_run(folder: Path, values) -> list[tuple[int, bool]]:
    """Build the emitted C with a driver and feed it the values: (return code, matrix untouched)."""
    (folder / "driver.c").write_text(C_DRIVER)
    subprocess.run([CC, *C_FLAGS, "-o", str(folder / "prog"), str(folder / "driver.c"), str(folder / "payload.c"),
                    "-lm"], check=True, capture_output=True, cwd=folder)
    text = "\n".join(repr(float(v)) for v in values) + "\n"
    out = subprocess.run([str(folder / "prog")], input=text, check=True, capture_output=True, text=True,
                         cwd=folder.parent).stdout
    return [(int(a), b == "1") for a, b in (line.split() for line in out.splitlines())]


def _dense_model(n: int = 8) -> str:
    params = [f'a{i}_{j} = {{ sign = "real", range = [1, 2] }}' for i in range(n) for j in range(n)]
    params += [f'b{i} = {{ sign = "real", range = [1, 2] }}' for i in range(n)]
    A = ", ".join("[" + ", ".join(f'"a{i}_{j}"' for j in range(n)) + "]" for i in range(n))
    B = ", ".join(f'["b{i}"]' for i in range(n))
    states = ", ".join(f'"x{i}"' for i in range(n))
    poles = ", ".join(['"-1"'] * n)
    return ('name = "dense"\n[parameters]\n' + "\n".join(params) + f'\n[plant]\nstates = [{states}]\n'
            f'inputs = ["u"]\nA = [{A}]\nB = [{B}]\n[feedback]\npoles = [{poles}]\n')


def main(n_random: int = 300) -> None:
    work = Path(tempfile.mkdtemp())
    os.chdir(work)
    rows = {}

    def record(group, outcome, seconds):
        tally = rows.setdefault(group, {"tried": 0, "refused": 0, "accepted": 0, "crashed": 0,
                                        "slow": 0, "executed": 0})
        tally["tried"] += 1
        tally[outcome] += 1
        tally["slow"] += seconds > SLOW
        if (work / MARK).exists():
            tally["executed"] += 1
            (work / MARK).unlink()

    def cli(group, args):
        start = time.perf_counter()
        code, _, err = run_cli(args, cwd=work)
        outcome = ("refused" if code == 2 and one_bounded_line(err) else "accepted" if code in (0, 1)
                   else "crashed")
        record(group, outcome, time.perf_counter() - start)

    for label, text in cases.REFUSED_FILES.items():
        path = work / "case.toml"
        path.write_text(text, encoding="utf-8")
        cli("model files (issue cases)", ["check", path])
    model = work / "cart.toml"
    model.write_text(cart_text(), encoding="utf-8")
    for args in cases.OPTION_CASES:
        cli("command options", [a.replace("{m}", str(model)).replace("{o}", str(work / "out")) for a in args])
    for label, call in cases.API_MISUSE.items():
        start = time.perf_counter()
        try:
            call()
            outcome = "accepted"
        except SymgainError:
            outcome = "refused"
        except Exception:  # noqa: BLE001 - counted as a crash
            outcome = "crashed"
        record("Python API misuse", outcome, time.perf_counter() - start)
    for k, text in enumerate(ALL_PAYLOADS):
        start = time.perf_counter()
        try:
            design = symgain.derive(model_from_text(cart_text(title=text, meaning=text, unit=text), "p.toml"))
            path = emit(design, ["python", "c", "latex", "json"], work / f"p{k}", name="payload")[0]
            spec = importlib.util.spec_from_file_location(f"payload{k}", path)
            module = importlib.util.module_from_spec(spec)
            spec.loader.exec_module(module)
            module.feedback_gain(m=1.5)
            outcome = "accepted"
        except SymgainError:
            outcome = "refused"
        except Exception:  # noqa: BLE001
            outcome = "crashed"
        record("injection texts (all emitters)", outcome, time.perf_counter() - start)
        if CC is not None and outcome == "accepted":  # the C files: compiled strictly and run
            start = time.perf_counter()
            try:
                ((code, _),) = _compile_and_run(work / f"p{k}", [1.5])
                outcome = "accepted" if code == 0 else "crashed"
            except (subprocess.CalledProcessError, ValueError):
                outcome = "crashed"
            record("injection texts (C compiled, run)", outcome, time.perf_counter() - start)
    # hostile argument values into the emitted code (declared: m positive, range [1, 2])
    design = symgain.derive(model_from_text(cart_text(), "values.toml"))
    folder = work / "values"
    path = emit(design, ["python", "c"], folder, name="payload")[0]
    spec = importlib.util.spec_from_file_location("payload_values", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    for value in [*HOSTILE_VALUES, "1.5", b"1", None, [1.5, -1.0], [[1.5], [math.nan]]]:
        start = time.perf_counter()
        try:
            out = module.feedback_gain(m=value)
            outcome = "accepted" if all(math.isfinite(v) for v in out.ravel()) else "crashed"
        except (ValueError, TypeError):
            outcome = "refused"
        except Exception:  # noqa: BLE001
            outcome = "crashed"
        record("hostile values (emitted Python)", outcome, time.perf_counter() - start)
    if CC is not None:
        start = time.perf_counter()
        results = _compile_and_run(folder, HOSTILE_VALUES)
        seconds = (time.perf_counter() - start) / len(HOSTILE_VALUES)
        for code, untouched in results:
            record("hostile values (emitted C)", "refused" if code != 0 and untouched else
                   "accepted" if code == 0 and not untouched else "crashed", seconds)
    # the dense 8 x 8 model of 72 parameters under the memory guard, as a user runs it
    def fresh(args) -> tuple[subprocess.CompletedProcess, float]:
        start = time.perf_counter()
        proc = subprocess.run([sys.executable, "-m", "symgain", "--memory-limit", "300", "--time-limit", "60", *args],
                              capture_output=True, text=True, cwd=work, env={**os.environ, "PYTHONPATH": str(ROOT)},
                              timeout=600)
        return proc, time.perf_counter() - start

    _, baseline = fresh(["derive", str(model)])  # the small cart: start-up and imports, the baseline
    dense_seconds = []
    dense = work / "dense.toml"
    dense.write_text(_dense_model(), encoding="utf-8")
    for command in (["derive"], ["check", "--points", "3"], ["emit", "--to", "c", "--out", str(work / "dense_out")]):
        proc, seconds = fresh([command[0], str(dense), *command[1:]])
        outcome = ("refused" if proc.returncode == 2 and one_bounded_line(proc.stderr) else
                   "accepted" if proc.returncode in (0, 1) else "crashed")
        dense_seconds.append(seconds)
        record("dense 8x8, 72 parameters (guard)", outcome, seconds)
    rng = random.Random(0)
    from test_hostile_fuzz import SNIPPETS

    base = cart_text()
    for _ in range(n_random):
        position, cut = rng.randrange(len(base)), rng.randrange(20)
        text = base[:position] + rng.choice(SNIPPETS) + base[position + cut:]
        path = work / "fuzz.toml"
        path.write_text(text, encoding="utf-8")
        cli("random mutations (check)", ["check", path, "--points", "3"])
    print(f"{'group':34} {'tried':>6} {'refused':>8} {'accepted':>9} {'crashed':>8} {'slow':>5} {'executed':>9}")
    total = {}
    for group, t in rows.items():
        print(f"{group:34} {t['tried']:6} {t['refused']:8} {t['accepted']:9} {t['crashed']:8} {t['slow']:5} "
              f"{t['executed']:9}")
        for key, value in t.items():
            total[key] = total.get(key, 0) + value
    print(f"{'total':34} {total['tried']:6} {total['refused']:8} {total['accepted']:9} {total['crashed']:8} "
          f"{total['slow']:5} {total['executed']:9}")
    print("dense 8x8 under --memory-limit 300 (derive, check, emit; each a fresh python -m symgain): "
          + ", ".join(f"{t:.1f} s ({t / baseline:.1f} x)" for t in dense_seconds)
          + f"; baseline: derive of the 2-state cart, {baseline:.1f} s")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 300)
