"""Benchmark: gains at 10^6 grid points, vectorized formulas against scipy.signal.place_poles.

place_poles is timed per point on a subset in the same run and extrapolated
linearly to 10^6 points (its cost per point does not depend on the point).
Also times the mismatch analysis (symbolic conditions, ratio intervals, grid
scan, eigenvalue cross-check) of each example. Prints one table.

    python benchmarks/sweep.py [--points 1000000] [--subset 300]
"""
from __future__ import annotations

import argparse
import time
import warnings
from pathlib import Path

import numpy as np
import scipy.signal
import sympy as sp

from symgain.design import derive
from symgain.model.toml_file import load_model
from symgain.analysis.robust import analyze_mismatch, cross_check, ratio_ranges
from symgain.analysis.evaluate import GainEvaluator

ROOT = Path(__file__).resolve().parent.parent
MODELS = [ROOT / "symgain/data/demo_conveyor.toml", *sorted((ROOT / "examples").glob("*.toml"))]


def _points(model, n, rng):
    return {p.name: (rng.uniform(*p.range, n) if p.range and p.range[0] < p.range[1]
                     else np.full(n, p.nominal)) for p in model.parameters}


def _place_poles_time(model, design, points, subset):
    args = [p.symbol for p in model.parameters]
    f_A, f_B = sp.lambdify(args, model.A, "numpy"), sp.lambdify(args, model.B, "numpy")
    coeffs = sp.Poly(design.feedback.target.polynomial, sp.Symbol("s")).all_coeffs()
    f_t = sp.lambdify(args, coeffs, "numpy")
    names = [p.name for p in model.parameters]
    prepared = []
    for i in range(subset):
        vals = [points[n][i] for n in names]
        prepared.append((np.array(f_A(*vals), float), np.array(f_B(*vals), float),
                         np.roots(np.array(f_t(*vals), dtype=float))))
    start = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for A, B, poles in prepared:
            scipy.signal.place_poles(A, B, poles)
    return (time.perf_counter() - start) / subset


def _robust_time(model, design):
    plant = [p for p in model.parameters if p.role == "plant" and p.sign == "positive" and p.range
             and p.range[0] < p.range[1]]
    if not plant or design.feedback is None:
        return None, "-"
    name = plant[0].name
    start = time.perf_counter()
    analysis = analyze_mismatch(design, [name])
    ratio_ranges(analysis)
    cross_check(analysis, n_points=100)
    return time.perf_counter() - start, name


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=int, default=1_000_000)
    parser.add_argument("--subset", type=int, default=300)
    parser.add_argument("--no-robust", action="store_true")
    args = parser.parse_args()
    rng = np.random.default_rng(0)
    rows = []
    for path in MODELS:
        try:
            model = load_model(path)
            design = derive(model)
            if design.feedback is None or design.feedback.gain.rows != 1:
                continue
            evaluator = GainEvaluator(design)
        except Exception as exc:  # an example another part of the tool does not support yet
            rows.append([path.stem, "-", f"skipped: {type(exc).__name__}", "", "", "", "", "", ""])
            continue
        points = _points(model, args.points, rng)
        evaluator({k: v[:10] for k, v in points.items()})  # warm-up
        start = time.perf_counter()
        gains, valid = evaluator(points)
        vec = time.perf_counter() - start
        poles_distinct = True
        try:
            per_point = _place_poles_time(model, design, points, args.subset)
        except ValueError:  # repeated poles: place_poles needs distinct ones for a single input
            per_point, poles_distinct = float("nan"), False
        extrapolated = per_point * args.points
        rob, rob_name = (None, "-") if args.no_robust else _robust_time(model, design)
        rows.append([model.name, str(model.n_states), f"{vec:.3f}", f"{vec / args.points * 1e9:.0f}",
                     f"{per_point * 1e6:.0f}" if poles_distinct else "n/a (repeated poles)",
                     f"{extrapolated:.0f}" if poles_distinct else "-",
                     f"{extrapolated / vec:.0f}x" if poles_distinct else "-",
                     rob_name, f"{rob:.2f}" if rob is not None else "-"])
    header = ["model", "n", f"vectorized {args.points:.0e} pts [s]", "ns/pt",
              f"place_poles us/pt ({args.subset} pts)", f"place_poles {args.points:.0e} pts [s] (extrap.)",
              "speed-up", "mismatch", "robust [s]"]
    widths = [max(len(r[i]) for r in [header, *rows]) for i in range(len(header))]
    for r in [header, [("-" * w) for w in widths], *rows]:
        print("  ".join(c.ljust(w) for c, w in zip(r, widths)))
    print(f"\nplace_poles time measured on the first {args.subset} of the same random points and "
          f"multiplied by {args.points} (linear extrapolation; its cost does not depend on the point).")
    print("robust: analyze_mismatch + exact/numeric ratio intervals + grid scan over the declared ranges "
          "+ 100-point eigenvalue cross-check, for the first positive plant parameter.")


if __name__ == "__main__":
    main()
