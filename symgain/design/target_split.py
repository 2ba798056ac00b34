"""Splitting one target polynomial into one polynomial per block or per chain.

A decoupled plant is designed block by block, and the canonical design for
several inputs places one polynomial per chain of the controllable form; both
need the target's poles shared out. The model may say how (key
``target_split``: one entry per block or chain, each a monic polynomial in s
or a list of poles; their product must be the target). Otherwise symgain
applies one documented rule, **in order, first fit**:

* the target is cut into real factors: for explicit poles, damping and
  settling targets, the poles in the order given (a complex pole with its
  conjugate, as one quadratic); for a polynomial or prototype target, the
  irreducible factors over the parameters' field, in the order sympy's
  ``factor_list`` gives them, each repeated by its multiplicity;
* each factor, in that order, goes to the first block (or chain) that still
  has room for its degree; blocks are ordered by their first state, chains by
  their input.

When the factors do not fill the blocks exactly (an irreducible factor wider
than any room left), the rule stops with a :class:`ClosedFormLimitation` that
asks for ``target_split``.

>>> from symgain.model import S
>>> w = sp.Symbol("w", positive=True)
>>> polys, rule = split_target(sp.expand((S + w)**2 * (S + 2*w)**2), None, [2, 2])
>>> [sp.factor(p) for p in polys]
[(s + w)**2, (s + 2*w)**2]
"""
from __future__ import annotations

import sympy as sp

from ..errors import ClosedFormLimitation, ModelError, Where
from ..model.expressions import parse_expression
from ..model import S
from ..mathtext import math_text

__all__ = ["parse_target_split", "split_target", "RULE"]

RULE = ("target split by the rule 'in order, first fit': the target's real factors (poles in the order "
        "given, conjugate pairs together; or its irreducible factors) go, in order, to the first {what} with "
        "room for them")


def parse_target_split(raw, symbols: dict, where: Where) -> tuple[sp.Expr, ...]:
    """Entries of ``target_split``: a polynomial in s (text) or a list of poles.

    >>> parse_target_split(["s^2 + 3*s + 2", ["-1", "-1"]], {}, Where(None, "feedback.target_split"))
    (s**2 + 3*s + 2, s**2 + 2*s + 1)
    """
    from .targets import poles_polynomial

    if not isinstance(raw, list) or not raw:
        raise ModelError("target_split must be a list with one entry per block or chain "
                         "(a polynomial in s, or a list of poles)", where=where)
    out = []
    for i, entry in enumerate(raw):
        if isinstance(entry, list):
            poles = [parse_expression(p, symbols, where=where.at(i, j)) for j, p in enumerate(entry)]
            out.append(poles_polynomial(poles, where.at(i)))
        else:
            expr = sp.expand(parse_expression(entry, symbols, where=where.at(i), extra={"s": S}))
            try:
                poly = sp.Poly(expr, S)
            except sp.PolynomialError:
                raise ModelError(f"{math_text(expr)} is not a polynomial in s", where=where.at(i)) from None
            if poly.degree() < 1 or sp.simplify(poly.LC() - 1) != 0:
                raise ModelError(f"{math_text(expr)} must be a monic polynomial in s", where=where.at(i))
            out.append(expr)
    return tuple(out)


def _factors(target) -> list[sp.Expr]:
    from .targets import poles_polynomial

    if target.poles:
        remaining, out = list(target.poles), []
        while remaining:
            p = remaining.pop(0)
            if sp.simplify(sp.im(p)) == 0:
                out.append(S - p)
                continue
            conj = sp.conjugate(p)
            k = next((i for i, q in enumerate(remaining) if sp.simplify(q - conj) == 0), None)
            if k is None:
                return [target.polynomial]
            out.append(poles_polynomial([p, remaining.pop(k)]))
        return out
    _, facs = sp.factor_list(target.polynomial, S)
    return [f for f, mult in facs for _ in range(mult) if sp.degree(f, S) > 0]


def split_target(target, given, sizes: list[int], what: str = "block",
                 where: Where | None = None, symbols: dict | None = None) -> tuple[list[sp.Expr], str]:
    """(one monic polynomial per block/chain, the rule used as text).

    ``target`` is a :class:`~symgain.design.targets.Target` or a polynomial in s; ``given`` the model's
    ``target_split`` as written (parsed here with the declared ``symbols``), or None.
    """
    from .targets import Target

    if not isinstance(target, Target):
        target = Target(sp.expand(target), None, "")
    where = where or Where()
    if given is not None:
        given = parse_target_split(given, symbols or {}, where)
        if len(given) != len(sizes):
            raise ModelError(f"target_split has {len(given)} entries but the design has {len(sizes)} {what}s "
                             f"(of {', '.join(map(str, sizes))} states)", where=where)
        for i, (poly, size) in enumerate(zip(given, sizes)):
            if sp.degree(poly, S) != size:
                raise ModelError(f"entry {i} has degree {sp.degree(poly, S)} but {what} {i + 1} has {size} "
                                 "states", where=where.at(i))
        if sp.cancel(sp.expand(sp.Mul(*given)) - target.polynomial) != 0:
            raise ModelError("the product of the target_split entries is not the target polynomial "
                             f"{math_text(target.polynomial)}", where=where)
        return [sp.expand(p) for p in given], f"target split as the model gives it (target_split, one per {what})"
    room, parts = list(sizes), [[] for _ in sizes]
    for f in _factors(target):
        d = sp.degree(f, S)
        k = next((i for i, r in enumerate(room) if r >= d), None)
        if k is None:
            raise ClosedFormLimitation(
                f"the target's factor {math_text(sp.expand(f))} (degree {d}) does not fit the {what}s left "
                f"(sizes {', '.join(map(str, sizes))}); give target_split = [...] with one polynomial per {what}",
                where=where)
        room[k] -= d
        parts[k].append(f)
    return [sp.expand(sp.Mul(*p)) for p in parts], RULE.format(what=what)
