"""Sampled-data benchmark: derive time with T symbolic, and the emitted C controller's step
against the emitted Python (numpy) Controller.step, measured in the same run.

    PYTHONPATH=. python benchmarks/discrete.py
"""
from __future__ import annotations

import importlib.util
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from symgain.design import derive  # noqa: E402
from symgain.emit import emit  # noqa: E402
from symgain.model import load_model  # noqa: E402

STEPS = 200_000


def _c_step_ns(design, folder: Path, T: float) -> float:
    name = design.model.name
    model = design.model
    period = design.sampled.period
    pname = None if period.is_number else str(period)
    args = ", ".join(repr(float(v)) for k, v in model.nominal_values().items() if k != pname)
    width = model.n_outputs if design.estimator is not None else model.n_states
    (folder / "bench.c").write_text(f"""#include <stdio.h>
#include <time.h>
#include "{name}.h"
int main(void)
{{
    {name}_controller_t ctl;
    double y[{width}] = {{0}}, r[{max(model.n_outputs, 1)}] = {{0.001}}, u[{model.n_inputs}], acc = 0;
    struct timespec a, b;
    long k;
    if ({name}_controller_init(&ctl, {T!r}{', ' + args if args else ''}) != 0) return 1;
    clock_gettime(CLOCK_MONOTONIC, &a);
    for (k = 0; k < {STEPS}; ++k) {{
        y[0] = 1e-6 * (double)(k % 100);
        {name}_controller_step(&ctl, y, r, u);
        acc += u[0];
    }}
    clock_gettime(CLOCK_MONOTONIC, &b);
    printf("%.3f %g\\n", ((b.tv_sec - a.tv_sec) * 1e9 + (b.tv_nsec - a.tv_nsec)) / {STEPS}.0, acc);
    return 0;
}}
""")
    cc = shutil.which("gcc") or shutil.which("cc")
    subprocess.run([cc, "-std=c99", "-O2", "-D_POSIX_C_SOURCE=199309L", "-o", str(folder / "bench"),
                    str(folder / "bench.c"), str(folder / f"{name}.c"), "-lm"], check=True)
    out = subprocess.run([str(folder / "bench")], capture_output=True, text=True, check=True).stdout
    return float(out.split()[0])


def _python_step_ns(design, folder: Path, T: float) -> float:
    name = design.model.name
    spec = importlib.util.spec_from_file_location(f"bench_{name}", folder / f"{name}.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    ctl = module.Controller(T=T)
    width = design.model.n_outputs if design.estimator is not None else design.model.n_states
    y = [0.0] * width
    n = 20_000
    start = time.perf_counter()
    for k in range(n):
        y[0] = 1e-6 * (k % 100)
        ctl.step(y, [0.001] * design.model.n_outputs if design.model.n_outputs else None)
    return (time.perf_counter() - start) / n * 1e9


def main() -> None:
    rows = []
    for path in sorted((ROOT / "examples").glob("*.toml")):
        if "[discrete]" not in path.read_text():
            continue
        start = time.perf_counter()
        design = derive(load_model(path))
        took = time.perf_counter() - start
        folder = Path(tempfile.mkdtemp())
        emit(design, ["python", "c"], folder)
        T = float(design.sampled.period) if design.sampled.period.is_number else \
            design.model.nominal_values()[str(design.sampled.period)]
        c_ns, py_ns = _c_step_ns(design, folder, T), _python_step_ns(design, folder, T)
        rows.append((path.stem, took, c_ns, py_ns))
    print(f"{'example':16} {'derive (s)':>10} {'C step (ns)':>12} {'numpy step (ns)':>16} {'ratio':>7}")
    for name, took, c_ns, py_ns in rows:
        print(f"{name:16} {took:10.2f} {c_ns:12.1f} {py_ns:16.0f} {py_ns / c_ns:7.0f}")
    print("derive: wall time of derive() with T symbolic where the model makes it a parameter; the C step is "
          "compiled with -O2; ratio = numpy step / C step, both measured in this run")


if __name__ == "__main__":
    main()
