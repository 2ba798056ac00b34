"""Benchmark: what the emitted code costs, on the carriage chain of benchmarks/chain.py.

For N carriages (2N states, every feedback pole at -w) this prints

* the arithmetic operations of the emitted C (sympy ``count_ops``) without and
  with common-subexpression elimination, and their ratio;
* the time per parameter point of the emitted Python's vectorized call over
  ``--points`` points (evaluated in chunks of ``--chunk`` points), against
  ``scipy.signal.place_poles`` called point by point on a subset of ``--subset``
  points in the same run; the place_poles time for all points is that per-point
  time times the number of points (a linear extrapolation, stated in the table).

place_poles needs distinct poles, so the numeric reference places the poles
-w (1 + 0.05 j), j = 0 .. 2N-1 (numerically the same work as a repeated pole).
This is a script, not a test:

    python benchmarks/emit.py --carriages 4 --points 1000000
"""
from __future__ import annotations

import argparse
import importlib.util
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np
import scipy.signal

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from chain import chain_model  # noqa: E402

from symgain.design import derive  # noqa: E402
from symgain.emit import emit  # noqa: E402
from symgain.emit.c import c_operation_counts  # noqa: E402


def emitted_module(design, folder):
    (path,) = emit(design, ["python"], folder, name=f"bench_{design.model.name}")
    spec = importlib.util.spec_from_file_location(path.stem, path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def points(model, n, seed=0):
    rng = np.random.default_rng(seed)
    return {p.name: rng.uniform(*p.range, size=n) for p in model.parameters}


def time_vectorized(fn, values, n, chunk):
    start = time.perf_counter()
    for lo in range(0, n, chunk):
        fn(**{k: v[lo:lo + chunk] for k, v in values.items()})
    return (time.perf_counter() - start) / n


def time_place_poles(model, values, subset):
    import sympy as sp
    syms = [p.symbol for p in model.parameters]
    f_A = sp.lambdify(syms, model.A, "numpy")
    f_B = sp.lambdify(syms, model.B, "numpy")
    names = [p.name for p in model.parameters]
    n = model.n_states
    start = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for i in range(subset):
            args = [values[k][i] for k in names]
            A = np.array(f_A(*args), dtype=float)
            B = np.array(f_B(*args), dtype=float)
            w = values["w"][i]
            poles = -w * (1 + 0.05 * np.arange(n))
            try:
                scipy.signal.place_poles(A, B, poles).gain_matrix
            except (ValueError, np.linalg.LinAlgError):
                pass  # an ill-conditioned point: its time still counts
    return (time.perf_counter() - start) / subset


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--carriages", type=int, nargs="+", default=[1, 2, 3, 4])
    parser.add_argument("--points", type=int, default=1_000_000)
    parser.add_argument("--chunk", type=int, default=10_000)
    parser.add_argument("--subset", type=int, default=2000)
    args = parser.parse_args(argv)
    head = ["N", "states", "C ops plain", "C ops CSE", "ratio", "python s/point", "place_poles s/point",
            "speed-up", "emit s"]
    print(" | ".join(head))
    folder = Path(tempfile.mkdtemp())
    for n in args.carriages:
        model = chain_model(n)
        design = derive(model)
        start = time.perf_counter()
        module = emitted_module(design, folder)
        emit_time = time.perf_counter() - start
        plain, shared = c_operation_counts(design)["feedback_gain"]
        values = points(model, args.points)
        py = time_vectorized(module.feedback_gain, values, args.points, args.chunk)
        ref = time_place_poles(model, values, min(args.subset, args.points))
        print(" | ".join([str(n), str(2 * n), str(plain), str(shared), f"{plain / shared:.2f}", f"{py:.2e}",
                          f"{ref:.2e}", f"{ref / py:.0f}x", f"{emit_time:.1f}"]), flush=True)
    print(f"python: vectorized feedback_gain over {args.points} points in chunks of {args.chunk}; "
          f"place_poles: timed on {args.subset} points, per-point time extrapolated linearly to "
          f"{args.points} points (total = per-point time x {args.points}).")


if __name__ == "__main__":
    main()
