"""Counts for the hostile-input corpus: cases tried, refused cleanly, crashed, slow, executed.

Runs every case of tests/test_hostile.py (model files, command options, API misuse), every
text of the injection corpus through the Python emitter (imported and called), and a number
of random mutations of a valid model file, then prints one table. "slow" counts cases over
2 s (reported, never asserted); "executed" counts cases after which the marker file exists.

    PYTHONPATH=. python benchmarks/hostile_counts.py [N_RANDOM]
"""
from __future__ import annotations

import importlib.util
import os
import random
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


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 300)
