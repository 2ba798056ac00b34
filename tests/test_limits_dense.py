"""The real memory guard on a model whose symbolic algebra explodes (issue: a dense 8 x 8 plant with
72 parameters filled 2.7 GB and ended in SIGABRT with no message).

The command runs as a user runs it (``python -m symgain``, supervised child process) with a small
``--memory-limit`` so that the limit is reached within seconds; the refusal must be one bounded
line naming the step and the model's size, with exit code 2. The time limit is generous: the
test checks the memory guard, and asserts nothing on wall-clock time.
"""
from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

from hostile_helpers import one_bounded_line

ROOT = Path(__file__).resolve().parent.parent
LIMIT_MB = 300


def dense_model(n: int = 8) -> str:
    """Every entry of A (n x n) and B (n x 1) its own parameter: n^2 + n = 72 parameters for n = 8."""
    params = [f'a{i}_{j} = {{ sign = "real", range = [1, 2] }}' for i in range(n) for j in range(n)]
    params += [f'b{i} = {{ sign = "real", range = [1, 2] }}' for i in range(n)]
    A = ", ".join("[" + ", ".join(f'"a{i}_{j}"' for j in range(n)) + "]" for i in range(n))
    B = ", ".join(f'["b{i}"]' for i in range(n))
    states = ", ".join(f'"x{i}"' for i in range(n))
    poles = ", ".join(['"-1"'] * n)
    return (f'name = "dense"\n[parameters]\n' + "\n".join(params) + f'\n[plant]\nstates = [{states}]\n'
            f'inputs = ["u"]\nA = [{A}]\nB = [{B}]\n[feedback]\npoles = [{poles}]\n')


def test_dense_model_has_72_parameters():
    import tomllib

    data = tomllib.loads(dense_model())
    assert len(data["parameters"]) == 72 and len(data["plant"]["A"]) == 8


@pytest.mark.parametrize("command", [["derive"], ["check", "--points", "3"]])
def test_dense_8x8_is_refused_by_the_memory_guard(command, tmp_path):
    model = tmp_path / "dense.toml"
    model.write_text(dense_model())
    args = [sys.executable, "-m", "symgain", "--memory-limit", str(LIMIT_MB), "--time-limit", "120",
            command[0], str(model), *command[1:]]
    proc = subprocess.run(args, capture_output=True, text=True, cwd=tmp_path, timeout=300,
                          env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert proc.returncode == 2, proc.stderr[-500:]
    assert one_bounded_line(proc.stderr), proc.stderr[-500:]
    err = proc.stderr
    assert f"ran out of memory (limit {LIMIT_MB} MB)" in err or f"memory limit of {LIMIT_MB} MB reached" in err, err
    assert "derive" in err and "8 states, 1 input, 72 parameters" in err, err
    assert "--memory-limit" in err  # says how to raise it
    assert "Traceback" not in proc.stdout + err and "FLINT" not in proc.stdout + err
