"""Polynomial coefficient equations solved in closed form, branch by branch.

When two rows of a structured gain meet in a product, matching the
closed-loop coefficients gives polynomial equations in the unknown gains.
They are solved here by a triangular decomposition:

1. a lexicographic Groebner basis eliminates every unknown but the last one,
   x, leaving one *eliminating polynomial* g(x) with coefficients in the
   parameters' field;
2. g is factored over that field (sympy ``factor_list``, which factors over
   the polynomial ring of the parameters, hence, by Gauss's lemma, over their
   fraction field) and each distinct irreducible factor is a component;
3. a factor of degree 1 gives a rational root, which is substituted and the
   rest solved again (recursively); a factor of degree 2 gives the two roots
   of the quadratic formula, real where the discriminant is nonnegative; a
   factor of degree 3 or 4 is solved by radicals when they stay short;
4. anything else (a higher-degree factor, a nonlinear remainder under an
   irrational root) is a :class:`~symgain.errors.ClosedFormLimitation` that
   names the factor.

Every branch carries the conditions under which it is real (discriminants
>= 0, with factors the declared signs prove positive dropped); branches that
are complex for every parameter value are counted and left out.

>>> k1, k2 = sp.symbols("k1 k2")
>>> found = solve_branches([k1 + k2 - 3, k1*k2 - 2], [k1, k2])
>>> sorted((b.values[k1], b.values[k2]) for b in found.branches)
[(1, 2), (2, 1)]
>>> z = sp.Symbol("z", positive=True)
>>> found = solve_branches([k1**2 - 2*z*k1 + 1], [k1])
>>> [b.real_when for b in found.branches]
[(z >= 1,), (z >= 1,)]
"""
from __future__ import annotations

from dataclasses import dataclass, field

import sympy as sp

from ..errors import ClosedFormLimitation, DesignError
from ..mathtext import math_text

__all__ = ["BranchSolution", "SolvedSystem", "solve_branches", "real_conditions"]

READABLE_OPS = 250  # radicals of a cubic or quartic longer than this are not offered as formulas


@dataclass(frozen=True)
class BranchSolution:
    """One branch: unknown -> closed form, and the conditions under which it is real."""

    values: dict
    real_when: tuple = ()
    note: str = ""


@dataclass(frozen=True)
class SolvedSystem:
    branches: tuple[BranchSolution, ...]
    complex_only: int = 0  # branches dropped because they are complex for every parameter value
    factors: tuple = field(default_factory=tuple)  # (unknown, factored eliminating polynomial)


def real_conditions(radicand: sp.Expr) -> tuple:
    """``(r >= 0,)`` for the part of ``radicand`` the signs cannot prove nonnegative; ``()`` if none.

    ``None`` when the radicand is negative for every parameter value.

    >>> m, z = sp.symbols("m z", positive=True)
    >>> real_conditions(16*m**2*(z**2 - 1))  # z + 1 > 0 is dropped
    (z >= 1,)
    >>> real_conditions(4*m**2), real_conditions(-m**2) is None
    ((), True)
    """
    r = sp.factor(radicand)
    if r.is_nonnegative:
        return ()
    if r.is_negative:
        return None
    sign, rest = 1, []
    for f in sp.Mul.make_args(r):
        base, exp = (f.base, f.exp) if f.is_Pow and f.exp.is_Integer else (f, 1)
        if exp % 2 == 0 and base.is_real:
            continue  # even power of a real factor
        if base.is_positive:
            continue
        if base.is_negative:
            sign = -sign
            continue
        if base.is_number:
            sign *= 1 if base > 0 else -1
            continue
        rest.append(base if exp % 2 else base ** exp)
    expr = sp.Mul(*rest) * sign
    if expr == 1:
        return ()
    if expr == -1:
        return None
    expr = sp.expand(expr) if len(rest) == 1 else expr
    x = list(expr.free_symbols)
    if len(x) == 1 and sp.degree(expr, x[0]) == 1:  # a x + b >= 0 read as a bound on x
        a, b = sp.Poly(expr, x[0]).all_coeffs()
        return (sp.Ge(x[0], -b / a) if a > 0 else sp.Le(x[0], -b / a),)
    return (sp.Ge(expr, 0),)


def _roots(f: sp.Poly, x: sp.Symbol):
    """[(root, real_when, note)] of an irreducible factor f(x), or None when closed form is refused."""
    deg = f.degree()
    if deg == 1:
        a, b = f.all_coeffs()
        return [(sp.factor(-b / a), (), "")]
    if deg == 2:
        a, b, c = f.all_coeffs()
        disc = sp.factor(b**2 - 4 * a * c)
        cond = real_conditions(disc)
        if cond is None:
            return []
        root = _square_root(disc) if cond else sp.sqrt(disc)
        return [(_tidy((-b + sgn * root) / (2 * a)), cond, "") for sgn in (1, -1)]
    if deg in (3, 4):
        found = sp.roots(f, x, cubics=True, quartics=True)
        if sum(found.values()) != deg or any(sp.count_ops(r) > READABLE_OPS for r in found):
            return None
        note = (f"a root of a degree-{deg} factor by radicals; real where its value is real "
                "(not decided in closed form: the numeric check evaluates it)")
        return [(r, (), note) for r in found]
    return None


def _square_root(disc: sp.Expr) -> sp.Expr:
    """sqrt(disc) with monomial factors taken out and the rest kept whole (sqrt(z**2 - 1))."""
    mono, poly = [], []
    for f in sp.Mul.make_args(sp.factor(disc)):
        (poly if (f.base if f.is_Pow else f).is_Add else mono).append(f)
    mono_e, poly_e = sp.Mul(*mono), sp.expand(sp.Mul(*poly))
    if mono_e.could_extract_minus_sign():
        mono_e, poly_e = -mono_e, sp.expand(-poly_e)
    if poly_e == 1:
        return sp.sqrt(disc)
    return sp.sqrt(mono_e) * sp.Pow(poly_e, sp.Rational(1, 2), evaluate=False)


def _tidy(expr: sp.Expr) -> sp.Expr:
    """Factor a closed form, keeping each square root as one opaque symbol while factoring."""
    roots = {p: sp.Dummy(f"r{i}") for i, p in enumerate(expr.atoms(sp.Pow)) if p.exp == sp.Rational(1, 2)}
    if not roots:
        return sp.factor(expr)
    out = sp.factor(sp.expand(expr.xreplace(roots)))
    return out.xreplace({d: p for p, d in roots.items()})


def _numerators(polys, unknowns) -> list[sp.Expr]:
    out = []
    for p in polys:
        num = sp.numer(sp.together(sp.expand(p)))
        num = sp.expand(num)
        if num != 0:
            out.append(num)
    return out


def _linear(polys, xs) -> bool:
    try:
        return all(sp.Poly(p, *xs).total_degree() <= 1 for p in polys)
    except sp.PolynomialError:
        return False


def _solve(polys, unknowns, factors_seen) -> tuple[list[BranchSolution], int]:
    polys = _numerators(polys, unknowns)
    if not unknowns:
        return ([BranchSolution({})] if not polys else []), 0
    if not polys:
        raise ClosedFormLimitation("the coefficient equations leave " + ", ".join(map(str, unknowns))
                                   + " undetermined after a branch was chosen")
    if any(not (p.free_symbols & set(unknowns)) for p in polys):
        return [], 0  # a nonzero constant: this component is empty
    basis = sp.groebner(polys, *unknowns, order="lex")
    if list(basis.exprs) == [1]:
        return [], 0
    x, others = unknowns[-1], set(unknowns[:-1])
    uni = [g for g in basis.exprs if not (g.free_symbols & others) and x in g.free_symbols]
    if not uni:
        raise ClosedFormLimitation(f"the coefficient equations do not fix {x} (no eliminating polynomial "
                                   "in it); free more entries or give fewer")
    g = min(uni, key=lambda e: sp.degree(e, x))
    _, facs = sp.factor_list(g, x)
    factors_seen.append((x, sp.factor(g)))
    branches, dropped = [], 0
    for f_expr, _ in facs:
        f = sp.Poly(f_expr, x)
        if f.degree() < 1:
            continue
        roots = _roots(f, x)
        if roots is None:
            whole = sp.expand(f_expr - g) == 0 or sp.expand(f_expr + g) == 0 or len(facs) == 1
            where_from = ("the eliminating polynomial, irreducible over the parameters' field" if whole
                          else f"the irreducible factor {math_text(f_expr)} of the eliminating polynomial "
                          f"{math_text(sp.factor(g))}")
            raise ClosedFormLimitation(
                f"the gain {x} is a root of {where_from}, of degree {f.degree()}"
                + (f": {math_text(f_expr)}" if whole else "") + "; no readable closed form; "
                "change the pattern, use method = \"canonical\", or give an input_direction")
        if not roots:
            dropped += f.degree()
            continue
        component = sp.groebner([*basis.exprs, f_expr], *unknowns, order="lex").exprs \
            if f.degree() > 1 else basis.exprs
        rest = unknowns[:-1]
        for root, cond, note in roots:
            subbed = _numerators([h.subs(x, root) for h in component if h != f_expr], rest)
            subbed = [h for h in subbed if sp.simplify(h) != 0]
            if f.degree() == 1:
                sub_branches, sub_dropped = _solve(subbed, rest, factors_seen)
            elif not subbed and not rest:
                sub_branches, sub_dropped = [BranchSolution({})], 0
            elif _linear(subbed, rest):
                sol = sp.linsolve(subbed, rest)
                if sol == sp.EmptySet:
                    continue
                (vals,) = tuple(sol)
                if set().union(*[sp.sympify(v).free_symbols for v in vals]) & set(rest):
                    raise ClosedFormLimitation(f"under the root {math_text(root)} of {math_text(f_expr)} the other "
                                               "gains stay undetermined")
                sub_branches, sub_dropped = [BranchSolution(dict(zip(rest, vals)))], 0
            else:
                raise ClosedFormLimitation(
                    f"under the irrational root {math_text(root)} of {math_text(f_expr)} the remaining coefficient "
                    "equations are not linear: nested radicals are not attempted")
            dropped += sub_dropped
            for sb in sub_branches:
                values = {k: _tidy(sp.radsimp(v.subs(x, root))) for k, v in sb.values.items()}
                values[x] = root
                branches.append(BranchSolution(values, tuple(dict.fromkeys((*cond, *sb.real_when))),
                                               "; ".join(n for n in (note, sb.note) if n)))
    return branches, dropped


def solve_branches(polys, unknowns) -> SolvedSystem:
    """Every branch of a zero-dimensional polynomial system in ``unknowns`` (see the module text).

    Branches that are always real come first; duplicates (from repeated factors) are merged.
    Raises :class:`~symgain.errors.DesignError` when no branch exists (inconsistent equations).
    """
    seen: list = []
    branches, dropped = _solve(list(polys), list(unknowns), seen)
    unique: dict = {}
    for b in branches:
        key = tuple(sp.simplify(b.values[u]) for u in unknowns)
        unique.setdefault(key, b)
    ordered = sorted(unique.values(), key=lambda b: len(b.real_when) > 0 or bool(b.note))
    if not ordered:
        if dropped:
            raise DesignError(f"every solution of the coefficient equations is complex ({dropped} branch"
                              f"{'es' if dropped > 1 else ''}): no real gain of this pattern reaches the target")
        raise DesignError("no gain of this pattern reaches the target: the coefficient equations are "
                          "inconsistent (their Groebner basis is {1}); free more entries of the pattern")
    return SolvedSystem(tuple(ordered), dropped, tuple(seen))
