"""The compact closed form equals the expanded one and Ackermann's formula, exactly.

Proof of equality by random evaluation (the Schwartz-Zippel lemma: J. T. Schwartz,
"Fast probabilistic algorithms for verification of polynomial identities", J. ACM 27(4),
701-717, 1980; R. Zippel, "Probabilistic algorithms for sparse polynomials", EUROSAM 1979,
LNCS 72, 216-226): a nonzero polynomial of total degree d vanishes at a point drawn
uniformly from S^n with probability at most d/|S|. The difference of two gain formulas is
a rational function P/Q of the parameters; cleared of denominators, P has degree well below
10^3 for the plants here, and each coordinate is drawn from |S| = 2^31 integers, so a point
where the two forms agree although they differ occurs with probability below 5e-7, and
three independent points all agree by chance with probability below 1.3e-19. All
evaluations below are exact (Python fractions), so agreement means equality at the point.
"""
from __future__ import annotations

import json
import random
import sys
from fractions import Fraction
from pathlib import Path

import numpy as np
import pytest
import scipy.signal
import sympy as sp

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "benchmarks"))

from chain import carriage_chain, chain_model  # noqa: E402

from symgain.analysis.check import check_design  # noqa: E402
from symgain.analysis.sensitivity import sensitivity_table  # noqa: E402
from symgain.design import derive  # noqa: E402
from symgain.design.compact import (compact_single_input, exact_values, forward_derivatives,  # noqa: E402
                                    numeric_function)
from symgain.design.placement import place_single_input  # noqa: E402
from symgain.emit.json import design_to_dict  # noqa: E402
from symgain.model import S  # noqa: E402
from symgain.model.toml_file import load_model  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent
W = sp.Symbol("w", positive=True)


def integer_point(symbols, seed):
    """Each symbol uniform in the integers 1 .. 2^31 (the set S of the lemma)."""
    rnd = random.Random(seed)
    return {s: Fraction(rnd.randint(1, 2**31)) for s in symbols}


def exact(expr, point):
    value = sp.sympify(expr).xreplace({s: sp.Rational(v.numerator, v.denominator) for s, v in point.items()})
    value = sp.nsimplify(sp.cancel(value)) if not value.is_Rational else value
    return Fraction(int(value.p), int(value.q))


def compact_at(form, point):
    from symgain.design.compact import _value

    values = exact_values(form.definitions, point)
    return [_value(e, values) for e in form.gain]


def ackermann_exact(A, B, alpha, point):
    """K = e_n^T Ctrb^-1 alpha(A) with every entry a rational number (sympy Matrix of Rationals)."""
    sub = {s: sp.Rational(v.numerator, v.denominator) for s, v in point.items()}
    An, bn = A.xreplace(sub), B.xreplace(sub)
    n = An.rows
    ctrb = sp.Matrix.hstack(*[An**i * bn for i in range(n)])
    poly = An**n
    for k, a in enumerate(alpha, start=1):
        poly += sp.sympify(a).xreplace(sub) * An ** (n - k)
    K = sp.Matrix([[0] * (n - 1) + [1]]) * ctrb.inv() * poly
    return [Fraction(int(x.p), int(x.q)) for x in K]


def alpha_of(n_states):
    return sp.Poly(sp.expand((S + W) ** n_states), S).all_coeffs()[1:]


@pytest.mark.parametrize("carriages", [1, 2, 3])
def test_compact_equals_expanded_at_random_integer_points(carriages):
    chain = carriage_chain(carriages)
    n = 2 * carriages
    form = compact_single_input(chain.A, chain.B, alpha_of(n), avoid={str(p) for p in chain.parameters} | {"w"})
    expanded = place_single_input(chain.A, chain.B, sp.expand((S + W) ** n)).gain
    for seed in range(3):
        point = integer_point([*chain.parameters, W], seed)
        assert compact_at(form, point) == [exact(e, point) for e in expanded]


@pytest.mark.parametrize("carriages", [2, 4, 6])
def test_compact_equals_ackermann_in_exact_rationals(carriages):
    chain = carriage_chain(carriages)
    alpha = alpha_of(2 * carriages)
    form = compact_single_input(chain.A, chain.B, alpha, avoid={str(p) for p in chain.parameters} | {"w"})
    point = integer_point([*chain.parameters, W], 7)
    assert compact_at(form, point) == ackermann_exact(chain.A, chain.B, alpha, point)


def test_wrong_gain_is_caught():
    """The comparison can fail: perturbing one definition changes the gain at the point."""
    chain = carriage_chain(2)
    alpha = alpha_of(4)
    form = compact_single_input(chain.A, chain.B, alpha, avoid={str(p) for p in chain.parameters} | {"w"})
    sym, expr = form.definitions[-1]
    broken = type(form)(form.definitions[:-1] + ((sym, expr + 1),), form.gain, form.pivots)
    point = integer_point([*chain.parameters, W], 1)
    assert compact_at(broken, point) != ackermann_exact(chain.A, chain.B, alpha, point)


@pytest.mark.parametrize("carriages", [2, 3, 5])
def test_closed_loop_eigenvalues_are_the_target_roots(carriages):
    """Distinct target roots -w, -1.5 w, ...; eigenvalues of A - B K (numpy) against them, and the
    gain against scipy.signal.place_poles (a general reference library)."""
    chain = carriage_chain(carriages)
    n = 2 * carriages
    factors = [1 + sp.Rational(k, 2) for k in range(n)]
    alpha = sp.Poly(sp.expand(sp.Mul(*[S + f * W for f in factors])), S).all_coeffs()[1:]
    form = compact_single_input(chain.A, chain.B, alpha, avoid={str(p) for p in chain.parameters} | {"w"})
    args = [*chain.parameters, W]
    f_K = numeric_function(args, list(form.gain), form.definitions, modules="math")
    f_A, f_B = sp.lambdify(args, chain.A), sp.lambdify(args, chain.B)
    rng = np.random.default_rng(carriages)
    for _ in range(3):
        values = [*rng.uniform(1, 2, size=len(chain.parameters)), rng.uniform(0.5, 1.5)]
        A, B = np.array(f_A(*values), float), np.array(f_B(*values), float)
        K = np.array(f_K(*values), float)[None, :]
        roots = np.array([-float(f) * values[-1] for f in factors])
        eig = np.sort(np.linalg.eigvals(A - B @ K).real)
        # ten close real poles are badly conditioned: rounding the exact gain to double alone
        # moves them by about 1e-7, and a relative gain error of 1e-12 by up to 1e-4 (measured)
        tol = 1e-6 if carriages <= 3 else 1e-3
        assert np.allclose(eig, np.sort(roots), rtol=tol, atol=tol)
        ref = scipy.signal.place_poles(A, B, roots).gain_matrix
        assert np.allclose(K, ref, rtol=1e-5, atol=1e-5 * np.abs(ref).max())
        point = {s: Fraction(v) for s, v in zip(args, values)}  # the exact gain at the same point
        exact_gain = np.array([float(x) for x in compact_at(form, point)])
        assert np.max(np.abs(K[0] - exact_gain)) <= 1e-9 * np.max(np.abs(exact_gain))


def test_auto_keeps_the_examples_expanded_and_compacts_large_chains():
    for path in sorted((ROOT / "examples").glob("*.toml"))[:6]:
        assert all(p.form == "expanded" and not p.definitions for p in derive(load_model(path)).parts())
    assert derive(chain_model(2)).feedback.form == "expanded"
    big = derive(chain_model(4)).feedback
    assert big.form == "compact" and big.definitions
    assert "compact form (chosen because" in " ".join(big.notes)
    forced = derive(chain_model(2), form="compact").feedback
    assert forced.form == "compact" and "as requested" in " ".join(forced.notes)


def test_pivot_conditions_are_named_and_hold_at_nominal():
    part = derive(chain_model(4)).feedback
    named = {s for s, _ in part.definitions}
    assert part.valid_when and all(c.lhs in named for c in part.valid_when)
    report = check_design(derive(chain_model(4)), n_points=6)
    assert report.passed and report.counts("feedback")["ok"] == 6  # nominal point included


def test_forward_derivatives_equal_flint_derivatives():
    """dK/dp on the compact form (forward differentiation) against the expanded gain's
    derivative computed in FLINT, exactly at random integer points."""
    expanded = derive(chain_model(2), form="expanded")
    compact = derive(chain_model(2), form="compact")
    table = sensitivity_table(expanded)["feedback"]
    part = compact.feedback
    params = [p.symbol for p in compact.model.parameters]
    from symgain.design.compact import _value

    for seed, p in enumerate(params[:4] + params[-1:]):
        defs, derivs = forward_derivatives(part.definitions, list(part.gain), p)
        point = integer_point(params, seed)
        values = exact_values((*part.definitions, *defs), point)
        assert [_value(d, values) for d in derivs] == [exact(table[(0, j, str(p))], point) for j in range(4)]


def test_json_definitions_read_back():
    data = design_to_dict(derive(chain_model(3), form="compact"))["feedback"]
    assert data["form"] == "compact" and "sensitivity" not in data  # only when asked
    names = {str(s): s for s in chain_model(3).symbols.values()}
    defs = [(sp.Symbol(n), sp.sympify(t, locals=names)) for n, t in data["definitions"]]
    gain = [sp.sympify(t, locals=names | {str(s): s for s, _ in defs}) for t in data["gain"][0]]
    point = integer_point(list(chain_model(3).symbols.values()), 3)
    from symgain.design.compact import _value

    values = exact_values(defs, point)
    expanded = derive(chain_model(3), form="expanded").feedback.gain
    assert [_value(g, values) for g in gain] == [exact(e, point) for e in expanded]
    asked = design_to_dict(derive(chain_model(2), form="compact"), sensitivity=True)["feedback"]
    assert set(asked["sensitivity"]) == {p.name for p in chain_model(2).parameters}
    json.dumps(asked)


def test_emitted_python_and_c_print_the_definitions_and_agree(tmp_path):
    import importlib.util
    import shutil
    import subprocess

    from symgain.emit import emit

    design = derive(chain_model(4))
    paths = emit(design, ["python", "c"], tmp_path, name="chain4")
    spec = importlib.util.spec_from_file_location("chain4", paths[0])
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    model = design.model
    rng = np.random.default_rng(4)
    values = {p.name: rng.uniform(*p.range, size=5) for p in model.parameters}
    K = module.feedback_gain(**values)  # vectorized over 5 points
    for k in range(5):
        point = {p.symbol: Fraction(float(values[p.name][k])) for p in model.parameters}
        exact_gain = np.array([float(x) for x in compact_at(type("F", (), {
            "definitions": design.feedback.definitions, "gain": design.feedback.gain})(), point)])
        assert np.allclose(K[k, 0], exact_gain, rtol=1e-10, atol=0)
    source = paths[2].read_text()
    first = str(design.feedback.definitions[0][0])
    assert f"const double {first} = " in source and "return 1;" in source
    cc = shutil.which("cc") or shutil.which("gcc")
    if cc is None:
        pytest.skip("no C compiler")
    args = ", ".join(repr(float(values[p.name][0])) for p in model.parameters)
    (tmp_path / "main.c").write_text(f'#include <stdio.h>\n#include "chain4.h"\nint main(void) {{\n'
                                     f"    double K[1][8];\n    int rc = chain4_feedback_gain({args}, K);\n"
                                     '    for (int j = 0; j < 8; j++) printf("%.17g\\n", K[0][j]);\n'
                                     "    return rc;\n}\n")
    exe = tmp_path / "main"
    subprocess.run([cc, "-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic", "-O2", "-o", str(exe),
                    str(tmp_path / "main.c"), str(paths[2]), "-lm"], check=True)
    out = subprocess.run([str(exe)], capture_output=True, text=True, check=True).stdout.split()
    assert np.allclose([float(x) for x in out], K[0, 0], rtol=1e-12, atol=0)
