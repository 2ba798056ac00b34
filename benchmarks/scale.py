"""Benchmark: whole commands on carriage chains, and what the emitted code costs per point.

For N = --min-n .. --max-n carriages (2N states, 3N + 1 parameters, every pole at -w) the
chain of benchmarks/chain.py is written as a model file and three commands are timed as a
user runs them, from process start to exit (``python -m symgain ...`` in a child process):
``derive``, ``derive --json`` and ``emit --to c``. In the same run, two plain routes are
timed in child processes stopped after --limit seconds:

* plain: det(sI - A + B K) expanded, coefficients in s collected, ``sympy.solve``
  (benchmarks/derive.py);
* sympy Ackermann: K = e_n^T Ctrb^-1 alpha(A) with sympy matrices (``LUsolve``), each entry
  brought to one fraction with ``sympy.cancel``.

Per parameter point (the 13 parameters drawn in their ranges) it then times the emitted
Python (vectorized, --points points in calls of CHUNK points), the emitted C (compiled with -O2, a loop
of calls in C) and, as references, ``scipy.signal.place_poles`` on ready-made A and B
(distinct poles -w (1 + 0.05 j), --subset points) and a batched numeric O(n^3) solve
(``numpy.linalg.solve`` of the n x n controllability system, LAPACK, all points at once).
Ratios are against measurements of the same run. This is a script, not a test:

    python benchmarks/scale.py --max-n 6 --limit 30
"""
from __future__ import annotations

import argparse
import importlib.util
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(ROOT))

from chain import carriage_chain, chain_model, chain_toml  # noqa: E402

ENV = {**os.environ, "PYTHONPATH": str(ROOT)}
CHUNK = 2000  # points per call of the emitted vectorized Python


def run_command(args: list[str], cwd: Path, limit: float) -> float | None:
    """Seconds from process start to exit, None past the limit; raises on a nonzero exit."""
    start = time.perf_counter()
    try:
        done = subprocess.run([sys.executable, "-m", "symgain", *args], cwd=cwd, env=ENV,
                              capture_output=True, text=True, timeout=limit)
    except subprocess.TimeoutExpired:
        return None
    took = time.perf_counter() - start
    if done.returncode != 0:
        raise RuntimeError(f"symgain {' '.join(args)} exited {done.returncode}: {done.stderr.strip()[-300:]}")
    return took


def ackermann_route(n: int) -> float:
    """Seconds for K = e_n^T Ctrb^-1 alpha(A) with plain sympy matrices, entries cancelled."""
    import sympy as sp

    chain = carriage_chain(n)
    s, w = sp.Symbol("s"), sp.Symbol("w", positive=True)
    A, b, size = chain.A, chain.B, 2 * n
    start = time.perf_counter()
    ctrb = sp.Matrix.hstack(*[A**i * b for i in range(size)])
    q = ctrb.T.LUsolve(sp.Matrix([0] * (size - 1) + [1])).T
    alpha = sp.Poly(sp.expand((s + w) ** size), s).all_coeffs()[1:]
    row = q
    for a in alpha:
        row = row * A + a * q
    [sp.cancel(e) for e in row]
    return time.perf_counter() - start


def child(kind: str, n: int, limit: float) -> float | None:
    """A plain route in a child process; None past the limit."""
    cmd = ([sys.executable, str(HERE / "derive.py"), "--plain-only", str(n)] if kind == "plain"
           else [sys.executable, __file__, "--ackermann-only", str(n)])
    start = time.perf_counter()
    try:
        done = subprocess.run(cmd, capture_output=True, text=True, timeout=limit, env=ENV)
    except subprocess.TimeoutExpired:
        return None
    if done.returncode != 0:
        raise RuntimeError(f"{kind} route failed for N={n}: {done.stderr.strip()[-300:]}")
    return time.perf_counter() - start  # whole child process, as for the commands


def numeric_inputs(model, count: int, seed: int = 0):
    import sympy as sp

    rng = np.random.default_rng(seed)
    values = {p.name: rng.uniform(*p.range, size=count) for p in model.parameters}
    syms = [p.symbol for p in model.parameters]
    f_A, f_B = sp.lambdify(syms, model.A, "numpy"), sp.lambdify(syms, model.B, "numpy")
    return values, f_A, f_B


def time_python(folder: Path, model, values) -> float:
    spec = importlib.util.spec_from_file_location(model.name, folder / f"{model.name}.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    count = len(values["w"])
    module.feedback_gain(**{k: v[:10] for k, v in values.items()})  # warm up
    start = time.perf_counter()
    for lo in range(0, count, CHUNK):  # chunks that stay in the processor's cache
        module.feedback_gain(**{k: v[lo:lo + CHUNK] for k, v in values.items()})
    return (time.perf_counter() - start) / count


def time_c(folder: Path, model, calls: int) -> float | None:
    """Seconds per call of the emitted C function, measured inside a compiled loop."""
    cc = shutil.which("cc") or shutil.which("gcc")
    if cc is None:
        return None
    params = [p for p in model.parameters]
    n = model.n_states
    decl = "\n".join(f"    volatile double base_{i} = {sum(p.range) / 2!r};" for i, p in enumerate(params))
    args = ", ".join(f"base_{i} * (1.0 + 1e-3 * (double)(k % 97))" for i in range(len(params)))
    main = f"""#include <stdio.h>
#include <time.h>
#include "{model.name}.h"
int main(void)
{{
{decl}
    double K[1][{n}];
    double sink = 0.0;
    clock_t start = clock();
    for (long k = 0; k < {calls}L; k++) {{
        {model.name}_feedback_gain({args}, K);
        sink += K[0][0];
    }}
    double seconds = (double)(clock() - start) / CLOCKS_PER_SEC;
    printf("%.9e %g\\n", seconds / {calls}.0, sink);
    return 0;
}}
"""
    (folder / "bench_main.c").write_text(main)
    exe = folder / "bench_main"
    subprocess.run([cc, "-std=c99", "-O2", "-o", str(exe), str(folder / "bench_main.c"),
                    str(folder / f"{model.name}.c"), "-lm"], check=True, capture_output=True)
    out = subprocess.run([str(exe)], capture_output=True, text=True, check=True).stdout.split()
    return float(out[0])


def time_place_poles(model, values, f_A, f_B, subset: int) -> float:
    import scipy.signal

    names = [p.name for p in model.parameters]
    n = model.n_states
    cases = []
    for i in range(subset):
        args = [values[k][i] for k in names]
        w = values["w"][i]
        cases.append((np.array(f_A(*args), float), np.array(f_B(*args), float), -w * (1 + 0.05 * np.arange(n))))
    start = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for A, B, poles in cases:
            try:
                scipy.signal.place_poles(A, B, poles)
            except (ValueError, np.linalg.LinAlgError):
                pass  # an ill-conditioned point: its time still counts
    return (time.perf_counter() - start) / subset


def time_batched_solve(model, values, f_A, f_B, count: int) -> float:
    """Per point: numpy.linalg.solve of Ctrb^T q = e_n over a stack of points (LAPACK, O(n^3))."""
    names = [p.name for p in model.parameters]
    n = model.n_states
    mats = []
    for i in range(count):
        args = [values[k][i] for k in names]
        A, b = np.array(f_A(*args), float), np.array(f_B(*args), float)[:, 0]
        cols = [b]
        for _ in range(n - 1):
            cols.append(A @ cols[-1])
        mats.append(np.array(cols))  # rows A^j b: Ctrb^T
    stack = np.array(mats)
    rhs = np.zeros((count, n, 1))
    rhs[:, -1, 0] = 1.0
    start = time.perf_counter()
    np.linalg.solve(stack, rhs)
    return (time.perf_counter() - start) / count


def fmt(x, digits=2) -> str:
    return "-" if x is None else f"{x:.{digits}f}"


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0],
                                     epilog="example:\n  python benchmarks/scale.py --max-n 6 --limit 30",
                                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--min-n", type=int, default=1)
    parser.add_argument("--max-n", type=int, default=6)
    parser.add_argument("--limit", type=float, default=30.0, help="seconds allowed to each plain route")
    parser.add_argument("--command-limit", type=float, default=300.0, help="seconds allowed to each command")
    parser.add_argument("--points", type=int, default=100_000, help="points of the vectorized Python call")
    parser.add_argument("--subset", type=int, default=300, help="points for place_poles")
    parser.add_argument("--calls", type=int, default=200_000, help="calls of the C function")
    parser.add_argument("--ackermann-only", type=int, metavar="N", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.ackermann_only is not None:
        print(json.dumps({"seconds": ackermann_route(args.ackermann_only)}))
        return 0

    folder = Path(tempfile.mkdtemp(prefix="symgain-scale-"))
    bare = min(run_time([sys.executable, "-c", "pass"]) for _ in range(3))
    helpt = min(run_command(["--help"], folder, 60) for _ in range(3))
    print(f"start-up: python -c pass {bare:.2f} s; python -m symgain --help {helpt:.2f} s "
          f"(symgain's own part {helpt - bare:+.2f} s)\n")
    head = ["N", "n", "par", "form", "derive", "--json", "emit c", "plain", "ackermann",
            "py us/pt", "C us/pt", "place us/pt", "solve us/pt", "place/py", "place/C", "C/solve"]
    widths = [2, 3, 3, 8, 7, 7, 7, 8, 9, 9, 9, 11, 11, 9, 9, 8]
    print(" ".join(h.rjust(w) for h, w in zip(head, widths)))
    print("-" * (sum(widths) + len(widths)))
    for n in range(args.min_n, args.max_n + 1):
        model = chain_model(n)
        path = folder / f"{model.name}.toml"
        path.write_text(chain_toml(n))
        t_derive = run_command(["derive", str(path)], folder, args.command_limit)
        t_json = run_command(["derive", str(path), "--json"], folder, args.command_limit)
        out = folder / f"out_{n}"
        t_emit = run_command(["emit", str(path), "--to", "c", "--to", "python", "-o", str(out)], folder,
                             args.command_limit)
        form = "-"
        if t_emit is not None:
            form = "compact" if "compact form" in (out / f"{model.name}.h").read_text() else "expanded"
        t_plain = child("plain", n, args.limit)
        t_ack = child("ackermann", n, args.limit)
        values, f_A, f_B = numeric_inputs(model, args.points)
        py = time_python(out, model, values) if t_emit is not None else None
        c = time_c(out, model, args.calls) if t_emit is not None else None
        place = time_place_poles(model, values, f_A, f_B, args.subset)
        solve = time_batched_solve(model, values, f_A, f_B, min(args.points, 20_000))
        row = [str(n), str(2 * n), str(len(model.parameters)), form, fmt(t_derive), fmt(t_json), fmt(t_emit),
               f"> {args.limit:g}" if t_plain is None else fmt(t_plain),
               f"> {args.limit:g}" if t_ack is None else fmt(t_ack),
               fmt(py and py * 1e6, 3), fmt(c and c * 1e6, 3), fmt(place * 1e6, 1), fmt(solve * 1e6, 3),
               f"{place / py:.0f}x" if py else "-", f"{place / c:.0f}x" if c else "-",
               f"{c / solve:.2f}" if c else "-"]
        print(" ".join(v.rjust(w) for v, w in zip(row, widths)), flush=True)
    print(f"\nseconds from process start to exit (derive, derive --json, emit --to c --to python); "
          f"plain and ackermann: whole child process, stopped at {args.limit:g} s.")
    print(f"per point: emitted Python vectorized over {args.points} points in calls of {CHUNK}; emitted C in a compiled "
          f"loop of {args.calls} calls; place_poles on {args.subset} ready-made (A, B); solve: batched "
          "numpy.linalg.solve of the n x n controllability system (a numeric O(n^3) reference).")
    return 0


def run_time(cmd) -> float:
    start = time.perf_counter()
    subprocess.run(cmd, check=True, capture_output=True)
    return time.perf_counter() - start


if __name__ == "__main__":
    sys.exit(main())
