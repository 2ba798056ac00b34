"""Robustness to parameter mismatch: the controller assumes p_hat, the plant has p.

The feedback gain is designed with estimated values (``m_hat``) while the
plant keeps the true ones. Writing ``m = r_m * m_hat``, the closed loop
``A(m) - B(m) K(m_hat)`` has a characteristic polynomial whose coefficients
depend on the ratio ``r_m``; the Routh-Hurwitz conditions on them are the
stability conditions in closed form. The stable range of the ratio is then
solved exactly (sympy's univariate inequality solver) at nominal values,
numerically over a grid of the declared ranges, and cross-checked against
eigenvalues at sampled points.

>>> import sympy as sp
>>> a = sp.symbols("a0:4", positive=True)
>>> routh_hurwitz([a[3], a[2], a[1], a[0]])[-1]
-a0*a3 + a1*a2
"""
from __future__ import annotations

import itertools
from dataclasses import dataclass, field

import numpy as np
import sympy as sp

from ..design import Design
from ..errors import DesignError, ModelError, Where
from ..model import S
from .loops import closed_loop, loop_kind
from .numeric import lambdify

__all__ = ["routh_hurwitz", "hurwitz_determinants", "positive_part", "MismatchAnalysis",
           "analyze_mismatch", "stable_ratio_set", "RatioRange", "ratio_ranges", "cross_check",
           "pole_migration", "ClosedLoop", "closed_loop_numeric", "grid_size"]


def hurwitz_determinants(coeffs) -> list[sp.Expr]:
    """Leading principal minors Delta_1 .. Delta_n of the Hurwitz matrix.

    ``coeffs`` = [c0, c1, ..., cn] for c0 s^n + c1 s^(n-1) + ... + cn;
    the Hurwitz matrix has entry (i, j) = c_(2j - i + 1) (zero outside 0..n).

    >>> a, b, c = sp.symbols("a b c")
    >>> hurwitz_determinants([1, a, b, c])
    [a, a*b - c, a*b*c - c**2]
    """
    c = [sp.sympify(x, strict=True) for x in coeffs]
    n = len(c) - 1
    def at(k):
        return c[k] if 0 <= k <= n else sp.Integer(0)
    H = sp.Matrix(n, n, lambda i, j: at(2 * j - i + 1))
    return [sp.expand(H[:k, :k].det(method="berkowitz")) for k in range(1, n + 1)]


def routh_hurwitz(coeffs) -> list[sp.Expr]:
    """Expressions that must all be positive for every root to lie in the open left half-plane.

    The Routh-Hurwitz criterion (leading coefficient positive): every
    coefficient positive and the Hurwitz determinants Delta_2 .. Delta_(n-1)
    positive (Delta_1 is a coefficient; Delta_n = c_n Delta_(n-1)).
    ``coeffs`` are highest power first.

    >>> a = sp.symbols("a0:5")
    >>> routh_hurwitz([a[4], a[3], a[2], a[1], a[0]])[5:]
    [-a1*a4 + a2*a3, -a0*a3**2 - a1**2*a4 + a1*a2*a3]
    """
    c = [sp.sympify(x, strict=True) for x in coeffs]
    n = len(c) - 1
    if n < 1:
        raise DesignError("the Routh-Hurwitz criterion needs a polynomial of degree 1 or more")
    return [*c, *hurwitz_determinants(c)[1:n - 1]]


def positive_part(expr: sp.Expr) -> sp.Expr:
    """An expression with the same sign as ``expr``, without factors the assumptions prove positive.

    >>> m, r = sp.symbols("m r", positive=True); k = sp.Symbol("k", real=True)
    >>> positive_part(m * (k - 1) / r**2)
    k - 1
    """
    num, den = sp.fraction(sp.cancel(sp.together(expr)))
    kept = sp.Integer(1)
    for part in (num, den):
        big = sp.count_ops(part) > 400
        factored = part if big else sp.factor(part)
        coeff, factors = (sp.Integer(1), [factored]) if big else factored.as_coeff_mul()
        if coeff.is_negative:
            kept = -kept
        for f in factors:
            if f.is_positive:
                continue
            if f.is_Pow and f.exp.is_Integer and f.exp % 2 == 0 and f.base.is_nonzero:
                continue
            kept *= f
    return sp.expand(kept) if kept.is_Add or kept.is_Mul else kept


@dataclass(frozen=True)
class RatioRange:
    """The stable ratios true/estimate of one parameter (others matched, values at nominal)."""

    name: str
    exact: sp.Set | None  # from sympy's solver, None when it could not decide
    intervals: list  # [(low, high)] numeric, the stable set within (0, inf)
    around_one: tuple[float, float] | None  # the stable interval containing ratio 1
    declared: tuple[float, float] | None  # true value over its declared range, estimate at nominal
    declared_stable: bool | None
    over_ranges: tuple[float, float] | None  # interval around 1 stable at every grid point
    grid_points: int = 0


@dataclass
class MismatchAnalysis:
    design: Design
    mismatched: list[str]
    hats: dict  # name -> estimate symbol
    ratios: dict  # name -> ratio symbol
    closed_loop_polynomial: sp.Expr | None  # None when the loop is too large or not rational
    coefficients: list  # highest power first, polynomial in the ratios
    conditions: list | None  # each must be > 0; None: no closed form, eigenvalues only
    ranges: dict = field(default_factory=dict)  # name -> RatioRange
    crosscheck: dict = field(default_factory=dict)  # points, agree, disagree, marginal
    loop: str = ""  # which loop was analysed (see symgain.loops)

    def substitutions(self, values: dict[str, float], ratios: dict[str, float]) -> dict:
        """Numeric values for every symbol of the conditions (estimates take the parameter values)."""
        model = self.design.model
        out = {p.symbol: values[p.name] for p in model.parameters}
        for name in self.mismatched:
            out[self.hats[name]] = values[name]
            out[self.ratios[name]] = ratios.get(name, 1.0)
        return out


def _fresh(name: str, taken: set[str], **assumptions) -> sp.Symbol:
    while name in taken:
        name += "_"
    taken.add(name)
    return sp.Symbol(name, **assumptions)


def analyze_mismatch(design: Design, mismatched: list[str], *, exact: bool = True) -> MismatchAnalysis:
    """Closed-loop polynomial and Routh-Hurwitz conditions with the ratios true/estimate."""
    model = design.model
    if not loop_kind(design):
        raise DesignError("mismatch analysis needs a loop: [feedback] or [integral] (an estimator alone "
                          "closes none)", where=Where(model.source))
    if any(part.definitions for part in design.parts()):
        raise DesignError("the gains are in compact form (a large plant): the closed-form "
                          "Routh-Hurwitz analysis needs expanded gains and is not affordable here",
                          where=Where(model.source))
    free = sorted({str(g) for part in design.parts() for g in part.free_gains})
    if free:
        raise DesignError("the gains still contain free gains " + ", ".join(free) + " (the target leaves "
                          "them open); fix them in the pattern, or choose method = \"canonical\", before a "
                          "mismatch analysis", where=Where(model.source))
    if not mismatched:
        raise ModelError("name at least one parameter to mismatch")
    taken = {p.name for p in model.parameters} | {"s"}
    hats, ratios, to_true, to_hat = {}, {}, {}, {}
    for name in mismatched:
        try:
            param = model.parameter(name)
        except KeyError:
            raise ModelError(f"unknown parameter {name!r}", where=Where(key="--mismatch")) from None
        if param.role == "design":
            raise ModelError(f"{name!r} is a design knob, not a plant parameter; mismatch applies to the plant",
                             where=Where(key="--mismatch"))
        if param.sign != "positive":
            raise ModelError(f"{name!r} must be declared positive for a ratio true/estimate",
                             where=Where(key="--mismatch"))
        hats[name] = _fresh(f"{name}_hat", taken, positive=True)
        ratios[name] = _fresh(f"r_{name}", taken, positive=True)
        to_hat[param.symbol] = hats[name]
        to_true[param.symbol] = ratios[name] * hats[name]
    loop = closed_loop(design, to_hat)
    closed = loop.matrix.xreplace(to_true)
    conditions, char, coeffs = None, None, []
    if not loop.discrete and _closed_form_feasible(closed, list(ratios.values())):
        poly = closed.charpoly(S)
        coeffs = [sp.cancel(sp.together(c)) for c in poly.all_coeffs()]
        denominators = [sp.fraction(c)[1] for c in coeffs]
        common = sp.lcm(denominators) if len(denominators) > 1 else denominators[0]
        if not common.is_positive:
            common = common**2
        coeffs = [sp.expand(sp.cancel(c * common)) for c in coeffs]
        conditions = []
        for cond in routh_hurwitz(coeffs):
            kept = positive_part(cond) if exact else cond
            if kept.is_positive or (kept.is_number and kept > 0):
                continue
            conditions.append(kept)
        char = sp.Add(*[c * S ** (len(coeffs) - 1 - i) for i, c in enumerate(coeffs)])
        if not all(_polynomial_in(c, list(ratios.values())) for c in conditions):
            conditions = None
    return MismatchAnalysis(design, list(mismatched), hats, ratios, char, coeffs, conditions,
                            loop=loop.description)


CLOSED_FORM_LIMIT = 4  # largest loop whose characteristic polynomial is expanded symbolically


def _closed_form_feasible(matrix: sp.Matrix, ratios) -> bool:
    """Small enough for a symbolic characteristic polynomial, and rational in the ratios."""
    if matrix.rows > CLOSED_FORM_LIMIT or sp.count_ops(matrix) > 400:
        return False
    return all(e.is_rational_function(*ratios) for e in matrix)


def _polynomial_in(expr, ratios) -> bool:
    try:
        sp.Poly(expr, *ratios)
    except sp.PolynomialError:
        return False
    return True


def _union_positive(polys: list[np.ndarray]) -> list[tuple[float, float]]:
    """Where every polynomial (numpy coefficients, highest first) is positive, within (0, inf)."""
    cuts = {0.0}
    for p in polys:
        for root in np.roots(p) if len(p) > 1 else []:
            if abs(root.imag) <= 1e-9 * max(1.0, abs(root.real)) and root.real > 0:
                cuts.add(float(root.real))
    edges = sorted(cuts) + [np.inf]
    out = []
    for lo, hi in zip(edges[:-1], edges[1:]):
        probe = (lo + hi) / 2 if np.isfinite(hi) else max(2 * lo, lo + 1.0)
        if all(np.polyval(p, probe) > 0 for p in polys):
            if out and out[-1][1] == lo:
                out[-1] = (out[-1][0], hi)
            else:
                out.append((lo, hi))
    return out


def _around(intervals, x: float = 1.0):
    for lo, hi in intervals:
        if lo <= x <= hi:
            return (lo, hi)
    return None


class _RatioPolys:
    """The conditions as polynomials in one ratio, coefficients compiled for numpy."""

    def __init__(self, analysis: MismatchAnalysis, name: str):
        self.analysis, self.name = analysis, name
        r = analysis.ratios[name]
        self.symbols = [s for s in analysis.substitutions(
            {p.name: 0 for p in analysis.design.model.parameters}, {}) if s != r]
        self.funcs = []
        for cond in analysis.conditions:
            coeffs = sp.Poly(sp.expand(cond), r).all_coeffs()
            self.funcs.append(lambdify(self.symbols, coeffs, modules="numpy"))

    def __call__(self, values: dict[str, float]) -> list[tuple[float, float]]:
        subs = self.analysis.substitutions(values, {})
        args = [subs[s] for s in self.symbols]
        polys = [np.real(np.array(f(*args), dtype=complex)) for f in self.funcs]
        return _union_positive([np.trim_zeros(p, "f") if np.any(p) else np.zeros(1) for p in polys])


class _RatioEigenvalues:
    """Without a closed form: the stable ratios from eigenvalues of the loop on a ratio grid.

    The ratio runs over 0.001 .. 1000 (log-spaced); every change of verdict
    between neighbours is refined by bisection. Stable beyond the last grid
    point is reported as unbounded.
    """

    def __init__(self, analysis: MismatchAnalysis, name: str, count: int = 121):
        self.name, self.loop = name, ClosedLoop(analysis.design)
        self.ratios = np.logspace(-3, 3, count)

    def _stable(self, values, r) -> bool:
        true = dict(values, **{self.name: values[self.name] * r})
        M = self.loop(true, values)
        if not np.all(np.isfinite(M)):
            return False
        return self.loop.stable(np.linalg.eigvals(M))

    def __call__(self, values: dict[str, float]) -> list[tuple[float, float]]:
        verdicts = [self._stable(values, r) for r in self.ratios]
        edges = []
        for k in range(1, len(self.ratios)):
            if verdicts[k] != verdicts[k - 1]:
                lo, hi = self.ratios[k - 1], self.ratios[k]
                for _ in range(30):
                    mid = np.sqrt(lo * hi)
                    if self._stable(values, mid) == verdicts[k - 1]:
                        lo = mid
                    else:
                        hi = mid
                edges.append(float(np.sqrt(lo * hi)))
        out, start = [], 0.0 if verdicts[0] else None
        for edge in edges:
            if start is None:
                start = edge
            else:
                out.append((start, edge))
                start = None
        if start is not None:
            out.append((start, np.inf))
        return out


def _scanner(analysis: MismatchAnalysis, name: str):
    if analysis.conditions is None:
        return _RatioEigenvalues(analysis, name)
    return _RatioPolys(analysis, name)


def stable_ratio_set(analysis: MismatchAnalysis, name: str, values: dict[str, float]) -> list[tuple[float, float]]:
    """Numeric stable set of the ratio of ``name`` (other ratios 1) at the given parameter values."""
    return _scanner(analysis, name)(values)


def _exact_set(analysis: MismatchAnalysis, name: str, values: dict[str, float]):
    if analysis.conditions is None:
        return None
    r = analysis.ratios[name]
    exact_values = {k: sp.nsimplify(v, rational=True) for k, v in values.items()}
    subs = analysis.substitutions(exact_values, {})
    subs.pop(r)
    subs = {k: (sp.Integer(1) if k in analysis.ratios.values() else v) for k, v in subs.items()}
    result = sp.Interval.open(0, sp.oo)
    try:
        for cond in analysis.conditions:
            expr = sp.expand(cond.xreplace(subs))
            if expr.free_symbols - {r}:
                return None
            result = result.intersect(sp.solve_univariate_inequality(
                expr > 0, r, relational=False, domain=sp.Interval.open(0, sp.oo)))
    except (NotImplementedError, sp.PolynomialError, ValueError, TypeError):
        return None
    return result


def _grid_values(model, skip: str, levels: int = 5, cap: int = 4000) -> list[dict[str, float]]:
    """Grid over the declared ranges of all parameters (the estimate of ``skip`` included)."""
    axes = []
    for p in model.parameters:
        if p.range is not None and p.range[0] < p.range[1]:
            axes.append((p.name, np.linspace(p.range[0], p.range[1], levels)))
        else:
            axes.append((p.name, np.array([p.nominal])))
    while np.prod([len(v) for _, v in axes]) > cap and levels > 2:
        levels -= 1
        axes = [(n, np.linspace(v[0], v[-1], levels) if len(v) > 1 else v) for n, v in axes]
    return [dict(zip([n for n, _ in axes], combo)) for combo in itertools.product(*[v for _, v in axes])]


def grid_size(model, name: str, closed_form: bool = True) -> int:
    """Number of grid points :func:`ratio_ranges` scans for ``name``."""
    return len(_grid_values(model, name, cap=4000 if closed_form else 60))


def ratio_ranges(analysis: MismatchAnalysis, *, progress=None, exact: bool = True) -> dict[str, RatioRange]:
    """For each mismatched parameter: exact and numeric stable ratios, declared range, worst case over the grid."""
    model = analysis.design.model
    nominal = model.nominal_values()
    out = {}
    for name in analysis.mismatched:
        exact_set = _exact_set(analysis, name, nominal) if exact else None
        scan = _scanner(analysis, name)
        intervals = scan(nominal)
        p = model.parameter(name)
        declared = (p.range[0] / p.nominal, p.range[1] / p.nominal) if p.range else None
        around = _around(intervals)
        declared_ok = None
        if declared is not None:
            declared_ok = any(lo < declared[0] and declared[1] < hi for lo, hi in intervals)
        grid = _grid_values(model, name, cap=4000 if analysis.conditions is not None else 60)
        low, high = 0.0, np.inf
        for point in grid:
            here = _around(scan(point))
            if here is None:
                low, high = np.nan, np.nan
            else:
                low, high = max(low, here[0]), min(high, here[1])
            if progress is not None:
                progress(1)
        over = None if np.isnan(low) else (low, high)
        out[name] = RatioRange(name, exact_set, intervals, around, declared, declared_ok, over, len(grid))
    analysis.ranges = out
    return out


class ClosedLoop:
    """The loop of every designed part (see :mod:`symgain.analysis.loops`), compiled: true plant,
    estimated controller. The gains are evaluated by the emitted module's arithmetic
    (:class:`symgain.analysis.evaluate.GainEvaluator`: short-period forms at short sample periods)
    at the estimated values, then put into the loop."""

    def __init__(self, design: Design):
        from .evaluate import GainEvaluator

        model = design.model
        self.names = [p.name for p in model.parameters]
        true = [p.symbol for p in model.parameters]
        hats = [sp.Dummy(f"{p.name}_hat", **p.symbol.assumptions0) for p in model.parameters]
        try:
            self._gains = GainEvaluator(design)
        except (DesignError, ModelError, TypeError, ValueError, KeyError):
            self._gains = None  # a design the emitter cannot evaluate: the formulas go into the loop as written
        loop = closed_loop(design, dict(zip(true, hats)), gain_slots=self._gains is not None)
        self.description = loop.description
        self.discrete = loop.discrete
        self.stable = loop.stable
        self._slot_index, self._cache = [], {}
        if self._gains is not None:
            self._slot_index = self._gains.slot_indices(loop.slots)
        self._M = lambdify(true + hats + [s[0] for s in loop.slots], loop.matrix, modules="numpy")

    def __call__(self, true_values: dict[str, float], estimates: dict[str, float]) -> np.ndarray:
        true = [true_values[n] for n in self.names]
        est = [estimates.get(n, true_values[n]) for n in self.names]
        gains = []
        if self._gains is not None:  # the gains depend on the estimates only: kept per estimate
            key = tuple(float(v) for v in est)
            gains = self._cache.get(key)
            if gains is None:
                values, _ = self._gains(dict(zip(self.names, est)))
                gains = [float(values[k]) for k in self._slot_index]
                if len(self._cache) > 4096:
                    self._cache.clear()
                self._cache[key] = gains
        with np.errstate(all="ignore"):  # complex arguments: sqrt of a negative discriminant stays finite
            return np.real(np.array(self._M(*(complex(v) for v in true), *(complex(v) for v in est), *gains),
                                    dtype=complex))


def closed_loop_numeric(design: Design, true_values: dict[str, float], estimates: dict[str, float]) -> np.ndarray:
    """One-off :class:`ClosedLoop` evaluation."""
    return ClosedLoop(design)(true_values, estimates)


def cross_check(analysis: MismatchAnalysis, n_points: int = 200, seed: int = 0, progress=None) -> dict:
    """Eigenvalue verdicts against the Routh-Hurwitz verdict at sampled points."""
    model = analysis.design.model
    if analysis.conditions is None:  # no closed form: the eigenvalues are the only verdict
        analysis.crosscheck = {"points": 0, "agree": 0, "disagree": 0, "marginal": 0, "stable": 0}
        return analysis.crosscheck
    rng = np.random.default_rng(seed)
    names = [p.name for p in model.parameters]
    funcs = [lambdify(list(analysis.substitutions({n: 0 for n in names}, {}).keys()), c, "numpy")
             for c in analysis.conditions]
    loop = ClosedLoop(analysis.design)
    counts = {"points": 0, "agree": 0, "disagree": 0, "marginal": 0, "stable": 0}
    for _ in range(n_points):
        values = {p.name: float(rng.uniform(*p.range)) if p.range else p.nominal for p in model.parameters}
        ratios = {n: float(np.exp(rng.uniform(np.log(0.05), np.log(20)))) for n in analysis.mismatched}
        true = dict(values)
        for n in analysis.mismatched:
            true[n] = values[n] * ratios[n]
        M = loop(true, values)
        if not np.all(np.isfinite(M)):
            continue  # the loop is not defined there (a gain or the plant is not finite)
        eig = np.linalg.eigvals(M)
        worst = float(np.max(eig.real))
        args = list(analysis.substitutions(values, ratios).values())
        rh = all(float(np.real(f(*args))) > 0 for f in funcs)
        counts["points"] += 1
        if abs(worst) <= 1e-7 * max(1.0, float(np.max(np.abs(eig)))):
            counts["marginal"] += 1
        elif (worst < 0) == rh:
            counts["agree"] += 1
            counts["stable"] += int(rh)
        else:
            counts["disagree"] += 1
        if progress is not None:
            progress(1)
    analysis.crosscheck = counts
    return counts


def pole_migration(design: Design, name: str, count: int = 120) -> tuple[np.ndarray, np.ndarray]:
    """True value of ``name`` over its declared range (estimate at nominal): values and poles."""
    model = design.model
    p = model.parameter(name)
    nominal = model.nominal_values()
    if p.range is None:
        raise ModelError(f"parameter {name!r} has no declared range to sweep", where=Where(key="--mismatch"))
    values = np.linspace(p.range[0], p.range[1], count)
    loop = ClosedLoop(design)
    poles = []
    for v in values:
        true = dict(nominal, **{name: float(v)})
        M = loop(true, nominal)
        poles.append(np.sort_complex(np.linalg.eigvals(M)) if np.all(np.isfinite(M))
                     else np.full(M.shape[0], np.nan + 0j))
    return values, np.array(poles)
