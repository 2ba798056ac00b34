"""The C lookup table: interpolation error bounds, and the compiled table against the exact formulas."""
import shutil
import subprocess

import numpy as np
import pytest
import sympy as sp

from symgain.design import derive
from symgain.model import Model, Parameter, TargetSpec
from symgain.model.toml_file import load_model
from symgain.analysis.evaluate import GainEvaluator
from symgain.emit.lookup_c import interpolate, interpolation_errors, lookup_table_c
from symgain.analysis.schedule import compute_schedule, parse_axis

DEMO = "symgain/data/demo_conveyor.toml"
CC = shutil.which("cc") or shutil.which("gcc")


def _cart():
    m = Parameter.declare("m", sign="positive", range=(1, 5), nominal=2)
    w = Parameter.declare("w", sign="positive", range=(1, 5), nominal=2, role="design")
    return Model(name="cart", parameters=(m, w), states=("p", "v"), inputs=("F",),
                 A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]),
                 feedback=TargetSpec("poles", {"poles": (-w.symbol, -w.symbol)}))  # K = [m w^2, 2 m w]


def test_linear_interpolation_error_of_a_quadratic_is_h2_over_8_times_f2():
    # Linear interpolation error bound |f - p| <= h^2/8 max|f''| (Burden & Faires, "Numerical
    # Analysis", interpolation error theorem, from memory); for a quadratic it is reached at
    # every cell midpoint. K_p = m w^2 is quadratic in w: f'' = 2 m, so the error is h^2 m / 4.
    model = _cart()
    sched = compute_schedule(derive(model), [parse_axis("w=1:5:5", model)])
    err = interpolation_errors(sched)
    h, m = 1.0, 2.0
    assert err["K_F_p"].absolute == pytest.approx(h**2 * m / 4, rel=1e-9)
    assert err["K_F_v"].absolute < 1e-12  # 2 m w is linear in w: interpolation is exact


def test_bilinear_error_of_a_product():
    # bilinear interpolation is exact in m (linear); in w the quadratic gives h^2 m / 4, largest at m = 5
    model = _cart()
    sched = compute_schedule(derive(model), [parse_axis("m=1:5:3", model), parse_axis("w=1:5:3", model)])
    err = interpolation_errors(sched)
    h = 2.0
    assert err["K_F_p"].absolute == pytest.approx(h**2 * 5 / 4, rel=1e-9)
    assert err["K_F_p"].where["m"] == 5.0 and err["K_F_p"].where["w"] in (2.0, 4.0)  # cell midpoints


def test_measured_error_within_the_second_derivative_bound():
    model = load_model(DEMO)
    design = derive(model)
    sched = compute_schedule(design, [parse_axis("m=5:40:8", model)])
    err = interpolation_errors(sched)
    nominal = {p.symbol: sp.nsimplify(model.nominal_values()[p.name]) for p in model.parameters if p.name != "m"}
    m = model.parameter("m").symbol
    h = 5.0
    fine = np.linspace(5, 40, 2001)
    for entry in sched.entries:
        f2 = sp.lambdify(m, sp.diff(entry.expr, m, 2).subs(nominal), "numpy")
        bound = h**2 / 8 * float(np.max(np.abs(np.broadcast_to(f2(fine), fine.shape))))
        assert err[entry.identifier].absolute <= bound * (1 + 1e-6) + 1e-12


_MAIN_1D = r"""
#include <stdio.h>
int main(void) {
    double q, g[%(N)s];
    while (scanf("%%lf", &q) == 1) {
        int status = %(name)s_schedule(q, g), k;
        printf("%%d", status);
        for (k = 0; k < %(N)s; k++) printf(" %%.17g", g[k]);
        printf("\n");
    }
    return 0;
}
"""

_MAIN_2D = r"""
#include <stdio.h>
int main(void) {
    double q1, q2, g[%(N)s];
    while (scanf("%%lf %%lf", &q1, &q2) == 2) {
        int status = %(name)s_schedule(q1, q2, g), k;
        printf("%%d", status);
        for (k = 0; k < %(N)s; k++) printf(" %%.17g", g[k]);
        printf("\n");
    }
    return 0;
}
"""


def _compile_and_run(tmp_path, source: str, main: str, queries: list, flags=()) -> list:
    (tmp_path / "table.c").write_text(source + main)
    exe = tmp_path / "table"
    subprocess.run([CC, "-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic", *flags, str(tmp_path / "table.c"),
                    "-o", str(exe), "-lm"], check=True, capture_output=True, text=True)
    text = "\n".join(" ".join(repr(float(v)) for v in q) for q in queries) + "\n"
    out = subprocess.run([str(exe)], input=text, check=True, capture_output=True, text=True).stdout
    return [[float(x) for x in line.split()] for line in out.splitlines()]


@pytest.mark.skipif(CC is None, reason="no C compiler")
def test_compiled_1d_table_against_exact_formulas(tmp_path):
    model = load_model(DEMO)
    design = derive(model)
    sched = compute_schedule(design, [parse_axis("m=5:40:8", model)])
    err = interpolation_errors(sched)
    source = lookup_table_c(sched, err)
    rng = np.random.default_rng(0)
    queries = [[x] for x in rng.uniform(5, 40, 200)]
    rows = _compile_and_run(tmp_path, source, _MAIN_1D % {"N": 3, "name": "sorting_conveyor"}, queries)
    nominal = model.nominal_values()
    for q, row in zip(queries, rows):
        assert row[0] == 0
        subs = {p.symbol: (q[0] if p.name == "m" else nominal[p.name]) for p in model.parameters}
        exact = [float(e.expr.evalf(20, subs=subs)) for e in sched.entries]  # sympy, not the table
        for k, e in enumerate(sched.entries):
            assert abs(row[1 + k] - exact[k]) <= err[e.identifier].absolute * 1.05 + 1e-12
    # outside the declared range of m, [5, 40] (the design envelope): -2 and NaN gains
    main = _MAIN_1D % {"N": 3, "name": "sorting_conveyor"}
    for row in _compile_and_run(tmp_path, source, main, [[100.0], [4.0], [-1.0]]):
        assert row[0] == -2 and np.isnan(row[1:]).all()
    # compiled without the range test: outside the grid, clamped to the edge and status 1
    edge = _compile_and_run(tmp_path, source, main, [[100.0]], flags=["-DSORTING_CONVEYOR_NO_RANGE_CHECKS"])[0]
    assert edge[0] == 1 and np.allclose(edge[1:], sched.gains[:, -1], rtol=1e-14)
    # inside the range but past a grid that stops short of it: clamped too
    short = parse_axis("m=5:30:6", model)
    clamp = _compile_and_run(tmp_path, lookup_table_c(compute_schedule(design, [short])), main, [[35.0]])[0]
    assert clamp[0] == 1


@pytest.mark.skipif(CC is None, reason="no C compiler")
def test_compiled_2d_table_matches_numpy_interpolation(tmp_path):
    model = load_model(DEMO)
    design = derive(model)
    sched = compute_schedule(design, [parse_axis("m=5:40:8", model), parse_axis("c=0.5:8:4", model)])
    source = lookup_table_c(sched)
    assert "Worst interpolation error" in source
    rng = np.random.default_rng(1)
    queries = [[a, b] for a, b in zip(rng.uniform(5, 40, 100), rng.uniform(0.5, 8, 100))]
    rows = _compile_and_run(tmp_path, source, _MAIN_2D % {"N": 3, "name": "sorting_conveyor"}, queries)
    q = np.array(queries)
    approx, ok = interpolate(sched, {"m": q[:, 0], "c": q[:, 1]})
    exact, _ = GainEvaluator(design)({"m": q[:, 0], "c": q[:, 1]})
    err = interpolation_errors(sched)
    for n, row in enumerate(rows):
        assert row[0] == 0
        assert np.allclose(row[1:], approx[:, n], rtol=1e-13, atol=1e-13)
        for k, e in enumerate(sched.entries):
            assert abs(row[1 + k] - exact[k, n]) <= err[e.identifier].absolute * 1.05 + 1e-12


@pytest.mark.skipif(CC is None, reason="no C compiler")
def test_compiled_table_refuses_cells_with_invalid_points(tmp_path):
    b = Parameter.declare("b", sign="real", range=(-1, 1), nominal=0.5)
    model = Model(name="signed_input", parameters=(b,), states=("p", "v"), inputs=("u",),
                  A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [b.symbol]]),
                  feedback=TargetSpec("poles", {"poles": (-1, -2)}))
    sched = compute_schedule(derive(model), [parse_axis("b=-1:1:5", model)])
    source = lookup_table_c(sched)
    rows = _compile_and_run(tmp_path, source, _MAIN_1D % {"N": 2, "name": "signed_input"},
                            [[-0.25], [0.75], [-1.0]])
    assert rows[0][0] == -1 and np.isnan(rows[0][1])  # the cell touches b = 0
    # K_p = 2/b: nodes b = 0.5 (K_p = 4) and b = 1 (K_p = 2), so the midpoint interpolates to 3
    assert rows[1][0] == 0 and rows[1][1] == pytest.approx(3.0, rel=1e-12)
    assert rows[2][0] == 0 and rows[2][1] == pytest.approx(-2.0)  # grid node b = -1 exactly
