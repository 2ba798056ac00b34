"""Benchmark: closed-form gains of a carriage chain, symgain against the plain sympy route.

For N = 1 .. --max-n carriages (2N states, 3N parameters, every target pole
at -w) this prints how long each route takes to derive the gain K:

* symgain: ``symgain.design.placement.place_single_input`` (or ``derive`` on a
  Model with ``--via-model``), exact arithmetic over the fraction field;
* plain: expand det(sI - A + B K) with symbolic gains, collect the
  coefficients in s and hand the linear equations to ``sympy.solve``. It runs
  in a child process that is stopped after --limit seconds ("> limit").

Both routes' gains are reported with their ``count_ops`` (summed over the
entries); when both finish, the table also says whether the two gains are
equal, exactly, at a fixed rational parameter point. This is a script, not a test: run it as

    python benchmarks/derive.py --max-n 4 --limit 60
"""
from __future__ import annotations

import argparse
import json
import random
import subprocess
import sys
import time
from pathlib import Path

import sympy as sp

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from chain import carriage_chain, chain_model  # noqa: E402

S = sp.Symbol("s")
W = sp.Symbol("w", positive=True)


def target_polynomial(n_states: int) -> sp.Expr:
    return sp.expand((S + W) ** n_states)


def symgain_route(n: int, via_model: bool) -> tuple[float, sp.Matrix]:
    """Time to derive K with symgain (seconds) and the gain."""
    from symgain.design import derive
    from symgain.design.placement import place_single_input

    if via_model:
        model = chain_model(n)
        start = time.perf_counter()
        gain = derive(model).feedback.gain
        return time.perf_counter() - start, sp.Matrix(gain)
    chain = carriage_chain(n)
    start = time.perf_counter()
    gain = place_single_input(chain.A, chain.B, target_polynomial(2 * n)).gain
    return time.perf_counter() - start, gain


def plain_route(n: int) -> tuple[float, sp.Matrix]:
    """det(sI - A + B K) expanded, coefficients in s collected, sympy.solve."""
    chain = carriage_chain(n)
    size = 2 * n
    start = time.perf_counter()
    K = sp.Matrix(1, size, sp.symbols(f"K_1:{size + 1}"))
    closed = S * sp.eye(size) - chain.A + chain.B * K
    char = sp.expand(closed.det())
    num, _ = sp.fraction(sp.together(char))
    # det is a polynomial in s with rational-function coefficients: clear the denominators first
    poly = sp.Poly(sp.expand(num), S)
    lead = poly.LC()
    target = sp.Poly(target_polynomial(size), S)
    equations = [sp.Eq(c, lead * t) for c, t in zip(poly.all_coeffs()[1:], target.all_coeffs()[1:])]
    solution = sp.solve(equations, list(K), dict=True)
    took = time.perf_counter() - start
    if not solution:
        raise RuntimeError("sympy.solve found no solution")
    return took, K.subs(solution[0])


def total_ops(gain: sp.Matrix) -> int:
    return sum(sp.count_ops(e) for e in gain)


def values_at_point(n: int, gain: sp.Matrix) -> list[str]:
    """The gain at a fixed rational point (same point for both routes), as exact fractions."""
    chain = carriage_chain(n)
    rnd = random.Random(n)
    point = {p: sp.Rational(rnd.randint(10, 40), 10) for p in (*chain.parameters, W)}
    return [str(sp.nsimplify(sp.cancel(e.xreplace(point)))) for e in gain]


def run_plain_child(n: int, limit: float):
    """The plain route in a child process; None when it exceeds the limit."""
    cmd = [sys.executable, __file__, "--plain-only", str(n)]
    try:
        done = subprocess.run(cmd, capture_output=True, text=True, timeout=limit)
    except subprocess.TimeoutExpired:
        return None
    if done.returncode != 0:
        raise RuntimeError(f"plain route failed for N={n}: {done.stderr.strip()[-300:]}")
    return json.loads(done.stdout.strip().splitlines()[-1])


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0],
                                     epilog="example:\n  python benchmarks/derive.py --max-n 4 --limit 60",
                                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--max-n", type=int, default=5, help="largest number of carriages (default 5)")
    parser.add_argument("--min-n", type=int, default=1, help="smallest number of carriages (default 1)")
    parser.add_argument("--limit", type=float, default=60.0,
                        help="seconds allowed to the plain sympy route per N (default 60)")
    parser.add_argument("--via-model", action="store_true",
                        help="time symgain.design.derive on a Model instead of place_single_input")
    parser.add_argument("--plain-only", type=int, metavar="N", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)

    if args.plain_only is not None:  # child process of run_plain_child
        took, gain = plain_route(args.plain_only)
        print(json.dumps({"seconds": took, "ops": total_ops(gain),
                          "at_point": values_at_point(args.plain_only, gain)}))
        return 0

    route = "derive(Model)" if args.via_model else "place_single_input"
    print(f"carriage chain, all poles at -w; symgain route: {route}; plain route: "
          f"det + expand + sympy.solve, limit {args.limit:g} s\n")
    header = (f"{'N':>2} {'states':>6} {'params':>6} {'symgain s':>10} {'symgain ops':>12} "
              f"{'plain s':>10} {'plain ops':>10} {'agree':>6}")
    print(header)
    print("-" * len(header))
    for n in range(args.min_n, args.max_n + 1):
        t_sym, gain = symgain_route(n, args.via_model)
        ops_sym = total_ops(gain)
        plain = run_plain_child(n, args.limit)
        if plain is None:
            t_plain, ops_plain, agree = f"> {args.limit:g}", "-", "-"
        else:
            t_plain, ops_plain = f"{plain['seconds']:.2f}", str(plain["ops"])
            agree = "yes" if values_at_point(n, gain) == plain["at_point"] else "NO"
        print(f"{n:>2} {2 * n:>6} {3 * n:>6} {t_sym:>10.2f} {ops_sym:>12} {t_plain:>10} {ops_plain:>10} "
              f"{agree:>6}", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
