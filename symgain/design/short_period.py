"""Printing forms without cancellation at short sample periods (for the emitted numeric code).

A sampled-data gain such as ``(T c - m (1 - exp(-T c/m)) ...) / (T (1 - exp(-T c/m))^2)``
is exact but, evaluated as written, loses digits when the sample period T is short:
numerator and denominator are differences of terms of size one whose leading Taylor
terms cancel (here to third order in T), so double precision keeps about
16 - 3 log10(1 / (T c/m)) digits and single precision none at T c/m = 1e-4.

The cure used here is exact algebra: every exponential, cosine and sine of an
argument a proportional to T is written as its Taylor polynomial plus a remainder,

    exp(a) = sum_{j<k} a^j / j!  +  a^k E_k(a),
    E_k(a) = (exp(a) - sum_{j<k} a^j / j!) / a^k = sum_{j>=0} a^j / (j + k)!,

(cos and sin alike, with C_k and S_k), the numerator and the denominator are expanded,
and the Taylor terms that cancel cancel symbolically. The order k is raised until the
lowest surviving power of T carries a nonzero coefficient, so what remains is a sum of
terms of the true leading size. E_1(a) = expm1(a)/a; the remainder functions are the
phi functions of exponential integrators (common practice), evaluated by their series for
|a| < 2 and by the direct formula beyond (where the direct formula loses at most about
one digit). The emitters print them as small helper functions, one per kind and order
(``exprem2_`` ... in C, static; ``_exprem2`` ... in Python; :mod:`symgain.emit.stable_forms`),
and the numeric check evaluates them the same way.

>>> T, c, m = sp.symbols("T c m", positive=True)
>>> stable_form(1 - sp.exp(-T*c/m), T)  # (exp(x) - 1) / exp(x) with x = T c/m
T*c*ExpRemainder(T*c/m, 1)/(m*(T*c*ExpRemainder(T*c/m, 1)/m + 1))
>>> stable_form(T*c/m - 1 + sp.exp(-T*c/m), T)  # second order: every term carries T^2
T**2*c**2*((T*c/m - 1)*ExpRemainder(T*c/m, 2) + 1)/(m*(T*c*ExpRemainder(T*c/m, 1) + m))
"""
from __future__ import annotations

import functools

import sympy as sp

__all__ = ["stable_form", "stable_condition", "ExpRemainder", "CosRemainder", "SinRemainder", "remainders",
           "printed_error", "TWIN_LOSS", "TWIN_SIZE_LIMIT", "rewritable"]

TWIN_SIZE_LIMIT = 4000  # operations of the twin's gains above which the short-period rewrite is not tried
TWIN_LOSS = 1e-10  # relative error of the printed gains at nominal above which a fixed period uses the twin
MAX_ORDER = 6  # highest Taylor order tried before the expression is left as written


class _Remainder(sp.Function):
    """Base: f(x, k) with a series at small |x| and a direct formula beyond."""

    nargs = 2
    _c_name = ""

    def _ccode(self, printer):
        x, k = self.args
        return f"{self._c_name[:-1]}{int(k)}_({printer._print(x)})"

    def _numpycode(self, printer):
        x, k = self.args
        return f"_{self._c_name[:-1]}{int(k)}({printer._print(x)})"

    _pythoncode = _numpycode

    def _mpmathcode(self, printer):  # exact through the direct formula (for references at high precision)
        return printer._print(self.direct())


class ExpRemainder(_Remainder):
    """E_k(x) = (exp(x) - sum_{j<k} x^j/j!) / x^k."""

    _c_name = "exprem_"

    def direct(self):
        x, k = self.args
        return (sp.exp(x) - sum(x**j / sp.factorial(j) for j in range(int(k)))) / x**k

    def _eval_evalf(self, prec):
        return self.direct()._eval_evalf(prec)


class CosRemainder(_Remainder):
    """C_k(x) = (cos(x) - sum_{j<k} (-1)^j x^(2j)/(2j)!) / x^(2k)."""

    _c_name = "cosrem_"

    def direct(self):
        x, k = self.args
        return (sp.cos(x) - sum((-1)**j * x**(2 * j) / sp.factorial(2 * j) for j in range(int(k)))) / x**(2 * k)

    def _eval_evalf(self, prec):
        return self.direct()._eval_evalf(prec)


class SinRemainder(_Remainder):
    """S_k(x) = (sin(x) - sum_{j<k} (-1)^j x^(2j+1)/(2j+1)!) / x^(2k+1)."""

    _c_name = "sinrem_"

    def direct(self):
        x, k = self.args
        return (sp.sin(x) - sum((-1)**j * x**(2 * j + 1) / sp.factorial(2 * j + 1)
                                for j in range(int(k)))) / x**(2 * k + 1)

    def _eval_evalf(self, prec):
        return self.direct()._eval_evalf(prec)


def _expansion(atom, k: int, eps, R):
    """(Taylor part + remainder term in eps, value of the remainder at 0, remainder expression)."""
    a = atom.args[0]
    x = eps * a
    if isinstance(atom, sp.exp):
        poly = sum(x**j / sp.factorial(j) for j in range(k))
        return poly + x**k * R, sp.Rational(1, sp.factorial(k)), ExpRemainder(a, k)
    if isinstance(atom, sp.cos):
        J = (k + 1) // 2
        poly = sum((-1)**j * x**(2 * j) / sp.factorial(2 * j) for j in range(J))
        return poly + x**(2 * J) * R, sp.Rational((-1)**J, sp.factorial(2 * J)), CosRemainder(a, J)
    J = k // 2
    poly = sum((-1)**j * x**(2 * j + 1) / sp.factorial(2 * j + 1) for j in range(J))
    return poly + x**(2 * J + 1) * R, sp.Rational((-1)**J, sp.factorial(2 * J + 1)), SinRemainder(a, J)


def _atoms(expr, T):
    out = []
    for atom in expr.atoms(sp.exp, sp.cos, sp.sin):
        a = atom.args[0]
        if not a.has(T):
            continue
        if sp.simplify(a / T).has(T):
            return None  # not proportional to T: left as written
        out.append(atom)
    return sorted(out, key=sp.default_sort_key)


def _stable_polynomial(P, T):
    """P (a sum of products of exp/cos/sin of multiples of T) with its cancelling Taylor terms removed."""
    atoms = _atoms(P, T)
    if not atoms:
        return P
    eps = sp.Dummy("eps")
    holders = [sp.Dummy(f"X{i}") for i in range(len(atoms))]
    base = P.xreplace(dict(zip(atoms, holders))).xreplace({T: eps * T})
    for k in range(1, MAX_ORDER + 1):
        Rs = [sp.Dummy(f"R{i}") for i in range(len(atoms))]
        parts = [_expansion(atom, k, eps, R) for atom, R in zip(atoms, Rs)]
        Q = sp.expand(base.xreplace({h: p[0] for h, p in zip(holders, parts)}))
        poly = sp.Poly(Q, eps)
        if poly.is_zero:
            return sp.Integer(0)
        terms = sorted(poly.terms(), key=lambda t: t[0][0])
        (d,), lead = terms[0]
        at_zero = sp.expand(lead.xreplace({R: p[1] for R, p in zip(Rs, parts)}))
        if at_zero != 0:
            out = Q.xreplace({eps: sp.Integer(1)}).xreplace({R: p[2] for R, p in zip(Rs, parts)})
            return sp.factor_terms(sp.collect(out, [p[2] for p in parts]))
    return P


@functools.lru_cache(maxsize=4096)
def stable_form(expr: sp.Expr, T: sp.Symbol) -> sp.Expr:
    """``expr`` rewritten so that no Taylor terms in T cancel numerically (the same value).

    >>> T = sp.Symbol("T", positive=True)
    >>> stable_form(sp.cos(T) - 1, T)
    T**2*CosRemainder(T, 1)
    """
    if not isinstance(expr, sp.Expr) or not expr.has(T) or not expr.atoms(sp.exp, sp.cos, sp.sin):
        return expr
    num, den = sp.fraction(sp.together(expr))
    new_num, new_den = _stable_polynomial(num, T), _stable_polynomial(den, T)
    if new_num is num and new_den is den:
        return expr
    return new_num / new_den


@functools.lru_cache(maxsize=4096)
def stable_condition(f: sp.Expr, T: sp.Symbol) -> sp.Expr:
    """A function that vanishes where ``f`` does, in stable form and without its positive factors.

    >>> T, w = sp.symbols("T w", positive=True)
    >>> stable_condition(sp.exp(T*w) - 1, T)
    ExpRemainder(T*w, 1)
    """
    if not isinstance(f, sp.Expr) or not f.has(T) or not f.atoms(sp.exp, sp.cos, sp.sin):
        return f
    num, den = sp.fraction(sp.together(f))
    if not den.is_positive:
        return f
    new = _stable_polynomial(num, T)
    if new is num:
        return f
    kept = [a for a in sp.Mul.make_args(sp.factor_terms(new)) if not (a.is_positive or a.is_number)]
    return sp.Mul(*kept) if kept else f


def remainders(exprs) -> list:
    """The remainder functions (kind, order) that the expressions use, sorted: the helpers to emit.

    >>> x = sp.Symbol("x")
    >>> remainders([ExpRemainder(x, 2) + CosRemainder(x, 1)])
    [(CosRemainder, 1), (ExpRemainder, 2)]
    """
    found = set()
    for e in exprs:
        if isinstance(e, sp.Basic):
            for f in e.atoms(ExpRemainder, CosRemainder, SinRemainder):
                found.add((type(f), int(f.args[1])))
    return sorted(found, key=lambda t: (t[0].__name__, t[1]))


def printed_error(design) -> float:
    """Worst relative error, at nominal, of the gains as printed when evaluated in double precision
    (against mpmath at 30 digits); 0.0 when no gain holds exp, cos or sin.

    >>> from symgain.model import Model, Parameter, TargetSpec
    >>> from symgain.model.sampling_keys import Sampling
    >>> from symgain.design import derive
    >>> c = Parameter.declare("c", sign="positive", range=(1, 3))
    >>> model = Model(name="cart", parameters=(c,), states=("p", "v"), inputs=("F",),
    ...               A=sp.Matrix([[0, 1], [0, -c.symbol]]), B=sp.Matrix([[0], [1]]),
    ...               feedback=TargetSpec("deadbeat", {"deadbeat": True}), sampling=Sampling(sp.Rational(1, 10**4)))
    >>> printed_error(derive(model)) < 1e-12   # state feedback cancels little; integral action far more
    True
    """
    kept = _ERRORS.get(id(design))
    if kept is not None and kept[0] is design:  # measured once per design object
        return kept[1]
    worst = _printed_error(design)
    if len(_ERRORS) >= 8:
        _ERRORS.pop(next(iter(_ERRORS)))
    _ERRORS[id(design)] = (design, worst)
    return worst


_ERRORS: dict = {}  # id(design) -> (design, printed_error)


def _printed_error(design) -> float:
    import mpmath
    import numpy as np

    model = design.model
    symbols = [p.symbol for p in model.parameters]
    values = [float(p.nominal) if p.nominal is not None else 1.0 for p in model.parameters]
    worst = 0.0
    for part in design.parts():
        if part.definitions or part.free_gains:
            continue
        entries = [e for e in sp.Matrix(part.gain) if isinstance(e, sp.Expr) and e.has(sp.exp, sp.cos, sp.sin)]
        if not entries:
            continue
        try:
            with np.errstate(all="ignore"):
                double = np.array(sp.lambdify(symbols, entries, "numpy")(*values), dtype=complex)
            with mpmath.workdps(30):
                exact = np.array([complex(v) for v in sp.lambdify(symbols, entries, "mpmath")(
                    *(mpmath.mpf(v) for v in values))])
        except (TypeError, ValueError, ZeroDivisionError, OverflowError):
            continue
        scale = float(np.max(np.abs(exact))) if exact.size else 0.0
        if scale > 0:
            worst = max(worst, float(np.max(np.abs(double - exact))) / scale)
    return worst


def rewritable(design) -> bool:
    """Whether the emitters can print this sampled-data design's gains in short-period forms: a
    symbolic period, or a fixed one whose symbolic-period twin derives and stays under
    TWIN_SIZE_LIMIT operations."""
    from .sampled import symbolic_period_twin

    sampled = getattr(design, "sampled", None)
    if sampled is None:
        return False
    if not sp.sympify(sampled.period).is_number:
        return True
    found = symbolic_period_twin(design)
    return found is not None and sum(sp.count_ops(sp.Matrix(part.gain)) for part in found[0].parts()) \
        <= TWIN_SIZE_LIMIT
