"""Standard closed-loop pole patterns ("prototypes"), scaled by a bandwidth.

Each prototype is a monic polynomial of order ``n`` (1 to :data:`MAX_ORDER`)
in ``s``.  Its normalized form ``p1(s)`` (bandwidth 1) is scaled by a
bandwidth ``w`` as ``p(s) = w**n * p1(s/w)``: every pole is multiplied by
``w``, the result stays monic, and its constant term is ``w**n``.  The
all-pole system ``w**n / p(s)`` therefore has unit static gain, and ``w`` is
always the geometric mean of the pole magnitudes.  What ``w`` means besides:

``binomial``
    ``(s + w)**n``: all ``n`` poles at ``-w``.  Exact.
``butterworth``
    Poles ``w*exp(i*pi*(2k + n - 1)/(2n))``, ``k = 1..n``, evenly spaced on
    the left half of the circle ``|s| = w``; ``w`` is the -3 dB frequency of
    ``w**n / p(s)``.  Exact coefficients, computed from the closed form
    ``a_k = prod_{j=1..k} cos((j-1)*pi/(2n)) / sin(j*pi/(2n))`` (common
    practice): as radicals for orders 1-6, as sines, cosines and tangents of
    multiples of ``pi/(2n)`` (times radicals) for orders 7 and 8.
``bessel``
    The reverse Bessel polynomial ``theta_n(s) = sum_k b_k s**(n-k)``,
    ``b_k = (n+k)! / ((n-k)! k! 2**k)`` (unit group delay at DC), rescaled
    in frequency so that its constant term is ``w**n``:
    ``p(s) = (w/c)**n * theta_n(c*s/w)`` with ``c = theta_n(0)**(1/n)``.
    The magnitude of ``w**n / p(i*v)`` then falls off at high frequency
    along the same asymptote ``(w/v)**n`` as the Butterworth pattern.  This
    is the normalization ``scipy.signal.besselap`` calls "phase"; it is
    neither the unit-delay form nor the -3 dB form.  Exact coefficients
    ``b_k / theta_n(0)**(k/n)`` (rationals times rational powers).
``itae``
    The forms minimizing the integral of time times absolute error of the
    step response (Graham and Lathrop, 1953), with ``w`` their natural
    frequency ``omega_n``.  Coefficients are the published decimals, held as
    exact rationals (orders 7 and 8 written down from memory); the published
    table is itself an approximation of the optimum.

>>> import sympy
>>> s, w = sympy.symbols("s w", positive=True)
>>> prototype_polynomial("butterworth", 2, w, s)
s**2 + sqrt(2)*s*w + w**2
"""
from __future__ import annotations

from fractions import Fraction
from functools import lru_cache
from math import factorial

import sympy

from ..errors import ModelError, Where
from ..model.definition import PROTOTYPE_NAMES

__all__ = ["PROTOTYPES", "MAX_ORDER", "prototype_polynomial", "prototype_source"]

PROTOTYPES: tuple[str, ...] = PROTOTYPE_NAMES
MAX_ORDER = 8

_SOURCES = {
    "binomial": "binomial pattern (s + w)^n, all poles at -w (common practice)",
    "butterworth": (
        "Butterworth pattern, poles evenly spaced on |s| = w (S. Butterworth, "
        "'On the theory of filter amplifiers', Wireless Engineer 7, 1930)"
    ),
    "bessel": (
        "Bessel pattern, reverse Bessel polynomial (W. E. Thomson, 'Delay networks "
        "having maximally flat frequency characteristics', Proc. IEE 96, 1949) "
        "scaled so the pole magnitudes have geometric mean w"
    ),
    "itae": (
        "ITAE step-response forms (D. Graham and R. C. Lathrop, 'The synthesis of "
        "optimum transient response: criteria and standard forms', Trans. AIEE 72, "
        "1953; orders 1-6 as tabulated in Dorf and Bishop, Modern Control Systems)"
    ),
}

# ITAE-optimal step-response forms, coefficients of s**n ... s**0 at w = 1.
# Source: D. Graham and R. C. Lathrop, Trans. AIEE 72 (1953); orders 1-6 as
# reproduced in R. C. Dorf and R. H. Bishop, "Modern Control Systems", table of
# optimum coefficients of T(s) based on the ITAE criterion for a step input.
# Orders 7 and 8 are Graham and Lathrop's rows, written down from memory; the
# tests check that every row is a local near-optimum of the ITAE criterion.
_ITAE_ROWS: dict[int, tuple[str, ...]] = {
    1: ("1", "1"),
    2: ("1", "1.4", "1"),
    3: ("1", "1.75", "2.15", "1"),
    4: ("1", "2.1", "3.4", "2.7", "1"),
    5: ("1", "2.8", "5.0", "5.5", "3.4", "1"),
    6: ("1", "3.25", "6.60", "8.60", "7.45", "3.95", "1"),
    7: ("1", "4.475", "10.42", "15.08", "15.54", "10.64", "4.58", "1"),
    8: ("1", "5.20", "12.80", "21.60", "25.75", "22.20", "13.30", "5.15", "1"),
}


def prototype_source(name: str, *, where: Where | None = None) -> str:
    """One-line citation of a prototype, for reports.

    >>> prototype_source("binomial")
    'binomial pattern (s + w)^n, all poles at -w (common practice)'
    >>> prototype_source("chebyshev")
    Traceback (most recent call last):
    ...
    symgain.errors.ModelError: unknown prototype 'chebyshev'; choose one of binomial, butterworth, bessel, itae
    """
    _check_name(name, where)
    return _SOURCES[name]


def prototype_polynomial(
    name: str,
    order: int,
    bandwidth: sympy.Expr,
    s: sympy.Symbol,
    *,
    where: Where | None = None,
) -> sympy.Expr:
    """The prototype polynomial of the given order, scaled by ``bandwidth``.

    The result is expanded in ``s`` (one term per power of ``s``, the
    coefficient of ``s**(n-k)`` being ``a_k * bandwidth**k`` with the power of
    the bandwidth left as it is), monic, of degree ``order``, with constant
    term ``bandwidth**order``.  Results at bandwidth 1 are cached per
    prototype and order.

    >>> import sympy
    >>> s, w = sympy.symbols("s w", positive=True)
    >>> prototype_polynomial("binomial", 3, w, s)
    s**3 + 3*s**2*w + 3*s*w**2 + w**3
    >>> prototype_polynomial("itae", 2, w, s)
    s**2 + 7*s*w/5 + w**2
    >>> prototype_polynomial("bessel", 2, w, s)
    s**2 + sqrt(3)*s*w + w**2
    >>> prototype_polynomial("butterworth", 3, 2, s)
    s**3 + 4*s**2 + 8*s + 8
    >>> prototype_polynomial("itae", 9, w, s)
    Traceback (most recent call last):
    ...
    symgain.errors.ModelError: prototype order 9 is outside the supported range 1 to 8
    """
    _check_name(name, where)
    if isinstance(order, bool) or not isinstance(order, int):
        raise ModelError(
            f"prototype order must be a whole number from 1 to {MAX_ORDER}, found {order!r}",
            where=where,
        )
    if not 1 <= order <= MAX_ORDER:
        raise ModelError(
            f"prototype order {order} is outside the supported range 1 to {MAX_ORDER}",
            where=where,
        )
    w = _as_expr(bandwidth, where)
    coeffs = _normalized_coefficients(name, order)
    return sympy.Add(*[c * w**k * s ** (order - k) for k, c in enumerate(coeffs)])


def _check_name(name: object, where: Where | None) -> None:
    if name not in PROTOTYPES:
        raise ModelError(
            f"unknown prototype {name!r}; choose one of {', '.join(PROTOTYPES)}", where=where
        )


def _as_expr(value: object, where: Where | None) -> sympy.Expr:
    """A bandwidth given as a sympy expression or a plain number (never text)."""
    if isinstance(value, sympy.Expr):
        return value
    if isinstance(value, bool):
        raise ModelError(f"bandwidth must be an expression, found {value!r}", where=where)
    if isinstance(value, int):
        return sympy.Integer(value)
    if isinstance(value, Fraction):
        return sympy.Rational(value.numerator, value.denominator)
    if isinstance(value, float):
        return sympy.Float(value)
    raise ModelError(
        f"bandwidth must be a sympy expression or a number, found {type(value).__name__}",
        where=where,
    )


@lru_cache(maxsize=None)
def _normalized_coefficients(name: str, order: int) -> tuple[sympy.Expr, ...]:
    """Coefficients of s**n, s**(n-1), ..., s**0 at bandwidth 1 (first one is 1)."""
    if name == "binomial":
        return tuple(sympy.binomial(order, k) for k in range(order + 1))
    if name == "butterworth":
        return _butterworth(order)
    if name == "bessel":
        return _bessel(order)
    row = _ITAE_ROWS[order]
    return tuple(sympy.Rational(f.numerator, f.denominator) for f in map(Fraction, row))


def _bessel(n: int) -> tuple[sympy.Expr, ...]:
    """Reverse Bessel polynomial coefficients b_k / b_n**(k/n), k = 0..n."""
    b = [factorial(n + k) // (factorial(n - k) * factorial(k) * 2**k) for k in range(n + 1)]
    return tuple(
        sympy.Integer(b[k]) / sympy.Pow(b[n], sympy.Rational(k, n)) for k in range(n + 1)
    )


def _butterworth(n: int) -> tuple[sympy.Expr, ...]:
    """Exact Butterworth coefficients a_0..a_n (a_k = a_(n-k))."""
    g = sympy.pi / (2 * n)
    half = [sympy.Integer(1)]
    for k in range(1, n // 2 + 1):
        # a_k = prod_{j=1..k} cos((j-1)g)/sin(jg) = 1/(sin(kg) prod_{j<k} tan(jg))
        factors = [sympy.cos((j - 1) * g) for j in range(1, k + 1)]
        factors += [1 / sympy.sin(j * g) for j in range(1, k + 1)]
        # sympy turns some of these into radicals already; tidy that part as one number
        radical = sympy.Mul(*[f for f in factors if not f.has(sympy.sin, sympy.cos)])
        trig = sympy.Mul(*[f for f in factors if f.has(sympy.sin, sympy.cos)])
        product = _tidy_algebraic(radical) * trig
        regrouped = 1 / (sympy.sin(k * g) * sympy.Mul(*[sympy.tan(j * g) for j in range(1, k)]))
        half.append(_tidy_algebraic(product, regrouped))
    return tuple(half[min(k, n - k)] for k in range(n + 1))


def _tidy_algebraic(value: sympy.Expr, *other_forms: sympy.Expr) -> sympy.Expr:
    """Rewrite an exact real algebraic number as radicals if its degree is <= 4.

    Otherwise return the shortest of ``value``, ``other_forms`` (all exactly
    equal to it) and their trigonometric simplifications.  The radical root is
    picked out of the minimal polynomial's roots by its numerical value.
    """
    if value.is_Rational:
        return value
    forms = (value, *other_forms)
    if value.has(sympy.sin, sympy.cos, sympy.tan):  # angle not reducible by sympy
        candidates = [*forms, *(sympy.trigsimp(f) for f in forms)]
        return min(candidates, key=lambda e: (sympy.count_ops(e), len(str(e))))
    x = sympy.Dummy("x")
    minimal = sympy.Poly(sympy.minimal_polynomial(value, x), x)
    target = sympy.N(value, 40)
    if minimal.degree() <= 4:
        for root in sympy.roots(minimal, filter=None):
            if root.has(sympy.I):
                continue
            if abs(sympy.N(root, 40) - target) < sympy.Float("1e-30"):
                return sympy.radsimp(sympy.sqrtdenest(root))
    candidates = [*forms, *(sympy.trigsimp(f) for f in forms)]
    return min(candidates, key=lambda e: (sympy.count_ops(e), len(str(e))))
