"""Placement with several inputs: a structured gain, or one input direction.

Two routes, both reported as a :class:`~symgain.design.GainDesign`:

* **Structured gain** (``pattern``): every ``*`` of the pattern is an unknown
  gain, every other entry is fixed. Matching the coefficients of
  det(sI - A + B K) with the target's gives polynomial equations in the
  unknowns (nonlinear as soon as two rows of K meet in a product). They are
  solved exactly: linearly when a choice of free gains makes them linear,
  otherwise through a lexicographic Groebner basis. The answer is stated as
  it is: a unique gain, a family with named free gains, several branches, or
  none (a :class:`~symgain.errors.DesignError` that says why).
* **One input direction** (``input_direction``, the classic route): with
  u = f v the plant (A, B f) has one input, the single-input formula gives
  k, and K = f k; the direction, when none is given, is chosen in
  :mod:`symgain.design.input_direction`.

>>> import sympy as sp
>>> from symgain.model import TargetSpec
>>> A = sp.Matrix([[0, 1], [0, 0]]); B = sp.Matrix([[1, 0], [0, 1]])
>>> spec = TargetSpec("poles", {"poles": (-1, -2), "pattern": [["0", "0"], ["*", "*"]]})
>>> part = design_several_inputs(A, B, spec, part="feedback", symbol="K", states=("p", "v"),
...                              inputs=("a", "b"), avoid=set())
>>> part.gain, part.extra["solution_kind"]
(Matrix([
[0, 0],
[2, 3]]), 'unique')
"""
from __future__ import annotations

import itertools
from dataclasses import dataclass

import sympy as sp

from ..errors import ClosedFormLimitation, DesignError, ModelError, Where
from ..model.definition import _shown
from ..model.expressions import parse_expression
from ..model import S, TargetSpec
from .placement import gain_symbols
from .polynomial_systems import BranchSolution, SolvedSystem, solve_branches
from .targets import resolve_target
from .validity import nonzero_conditions
from .result import GainDesign, Step
from .single_input import design_gain
from .input_direction import design_by_direction, direction_key, parameter_box, parse_direction  # noqa: F401 (re-exported)

__all__ = ["parse_pattern", "parse_direction", "StructuredPlacement", "place_structured",
           "design_several_inputs", "parameter_box"]


def parse_pattern(raw, shape: tuple[int, int], symbols: dict, where: Where,
                  row_label: str, col_label: str) -> list[list]:
    """Pattern entries: ``None`` for a free gain ``"*"``, else the fixed sympy expression.

    >>> parse_pattern([["*", "0"]], (1, 2), {}, Where("f.toml", "feedback.pattern"), "inputs", "states")
    [[None, 0]]
    >>> parse_pattern([["*"]], (1, 2), {}, Where("f.toml", "feedback.pattern"), "inputs", "states")
    Traceback (most recent call last):
    ...
    symgain.errors.ModelError: f.toml: feedback.pattern[0]: row 0 has 1 entries, expected 2 (one per state)
    """
    rows, cols = shape
    if not isinstance(raw, (list, tuple)) or not all(isinstance(r, (list, tuple)) for r in raw):
        raise ModelError(f"pattern must be a list of rows, found {_shown(raw)}", where=where)
    if len(raw) != rows:
        raise ModelError(f"pattern has {len(raw)} rows, expected {rows} (one per {row_label[:-1]})",
                         where=where)
    out = []
    for i, row in enumerate(raw):
        if not isinstance(row, (list, tuple)):
            raise ModelError(f"row {i} of the pattern must be a list, found {type(row).__name__}", where=where.at(i))
        if len(row) != cols:
            raise ModelError(f"row {i} has {len(row)} entries, expected {cols} (one per {col_label[:-1]})",
                             where=where.at(i))
        out.append([None if isinstance(v, str) and v.strip() == "*"
                    else v if isinstance(v, sp.Basic) else parse_expression(v, symbols, where=where.at(i, j))
                    for j, v in enumerate(row)])
    return out


@dataclass(frozen=True)
class StructuredPlacement:
    """What coefficient matching on a structured gain produced."""

    gain_symbols: sp.Matrix  # the gain with unknowns as symbols (fixed entries in place)
    unknowns: tuple[sp.Symbol, ...]
    closed_loop_polynomial: sp.Expr
    equations: tuple[sp.Eq, ...]
    kind: str  # "unique", "family", "branches"
    branches: tuple[sp.Matrix, ...]  # one gain per branch (free gains left as symbols)
    free: tuple[sp.Symbol, ...]
    method: str
    real_when: tuple[tuple, ...] = ()  # per branch: conditions for it to be real
    branch_notes: tuple[str, ...] = ()
    complex_only: int = 0  # branches left out: complex for every parameter value
    eliminating: sp.Expr | None = None  # the factored eliminating polynomial (nonlinear equations only)


def _linear_in(eqs, xs) -> bool:
    try:
        return all(sp.Poly(e, *xs).total_degree() <= 1 for e in eqs)
    except sp.PolynomialError:
        return False


def _solve(eqs, unknowns, nfree):
    """(kind, solutions, free, method); solutions are dicts unknown -> expression."""
    candidates = [F for k in range(nfree, len(unknowns)) for F in itertools.combinations(unknowns[::-1], k)]
    for free in candidates:  # a choice of free gains that leaves a linear system
        rest = [u for u in unknowns if u not in free]
        if rest and _linear_in(eqs, rest):
            sol = sp.linsolve(eqs, rest)
            if sol == sp.EmptySet:
                break  # inconsistent: let the Groebner basis say so
            (values,) = tuple(sol)
            undetermined = set().union(*[v.free_symbols for v in values]) & set(rest)
            free = tuple(sorted(set(free) | undetermined, key=unknowns.index))
            solved = SolvedSystem((BranchSolution(dict(zip(rest, values))),))
            return ("family" if free else "unique", solved, free,
                    "linear in " + ", ".join(map(str, rest)) +
                    (f" once {', '.join(map(str, free))} {'is' if len(free) == 1 else 'are'} left free" if free else ""))
    basis = sp.groebner(eqs, *unknowns, order="lex")
    if list(basis.exprs) == [1]:
        raise DesignError("no gain of this pattern reaches the target: the coefficient equations are "
                          "inconsistent (their Groebner basis is {1}); free more entries of the pattern")
    for k in range(nfree, len(unknowns)):
        for free in itertools.combinations(unknowns[::-1], k):
            rest = [u for u in unknowns if u not in free]
            sub = sp.groebner(list(basis.exprs), *rest, order="lex") if free else basis
            if not sub.is_zero_dimensional:
                continue
            solved = solve_branches(list(sub.exprs), rest)
            kind = "branches" if len(solved.branches) > 1 else ("family" if free else "unique")
            method = ("lexicographic Groebner basis; the eliminating polynomial (a step of the derivation) "
                      "factored over the parameters' field, each factor solved, then back substitution")
            return kind, solved, tuple(free), method
    raise DesignError("could not separate the coefficient equations into free and determined gains")


def place_structured(A: sp.Matrix, B: sp.Matrix, pattern: list[list], target: sp.Expr, *,
                     letter: str = "k", avoid: set[str] = frozenset()) -> StructuredPlacement:
    """Solve det(sI - A + B K) = target for the free entries (``None``) of ``pattern``.

    >>> A = sp.Matrix([[0, 1], [0, 0]]); B = sp.eye(2)
    >>> r = place_structured(A, B, [[None, 0], [0, None]], S**2 + 3*S + 2)
    >>> r.kind, [list(b) for b in r.branches]
    ('branches', [[1, 0, 0, 2], [2, 0, 0, 1]])
    """
    n, m = A.rows, B.cols
    names = gain_symbols(letter, (m, n), avoid) if m > 1 else gain_symbols(letter, (1, n), avoid)
    K = sp.Matrix(m, n, lambda i, j: names[i, j] if pattern[i][j] is None else pattern[i][j])
    unknowns = tuple(names[i, j] for i in range(m) for j in range(n) if pattern[i][j] is None)
    closed = sp.expand((A - B * K).charpoly(S).as_expr())
    got = sp.Poly(closed, S).all_coeffs()[1:]
    want = sp.Poly(target, S).all_coeffs()[1:]
    equations = tuple(sp.Eq(g, w, evaluate=False) for g, w in zip(got, want))
    numers = [e for e in (sp.numer(sp.together(g - w)) for g, w in zip(got, want)) if e != 0]
    if not unknowns:
        raise DesignError("the pattern has no free gain '*'")
    if not numers:
        kind, solved, free, method = ("family", SolvedSystem((BranchSolution({}),)), unknowns,
                                      "the target holds for every gain")
    else:
        kind, solved, free, method = _solve(numers, list(unknowns), max(0, len(unknowns) - len(numers)))
    branches = tuple(sp.Matrix(K.xreplace(dict(b.values)))
                     for b in solved.branches)
    return StructuredPlacement(K, unknowns, closed, equations, kind, branches, free, method,
                               tuple(b.real_when for b in solved.branches),
                               tuple(b.note for b in solved.branches), solved.complex_only,
                               solved.factors[0][1] if solved.factors else None)


def design_several_inputs(A: sp.Matrix, B: sp.Matrix, spec: TargetSpec, *, part: str, symbol: str,
                          states, inputs, avoid: set[str], symbols: dict | None = None,
                          word: str = "controllable", pattern_shape=None,
                          transpose_pattern: bool = False, ranges: dict | None = None):
    """A GainDesign for A - B K with several inputs (pattern or input direction).

    ``ranges`` (symbol -> (low, high, nominal)) is where a direction is chosen when none is given.
    """
    symbols = symbols or {}
    n, m = A.rows, B.cols
    target = resolve_target(spec, n)
    raw = spec.values.get("pattern")
    if raw is not None:
        pw = spec.where.child("pattern")
        rows, cols = pattern_shape or ((m, "inputs"), (n, "states"))
        pattern = parse_pattern(raw, (rows[0], cols[0]), symbols, pw, rows[1], cols[1])
        if transpose_pattern:  # estimator: the pattern of L (states x outputs), placed on the dual
            pattern = [list(r) for r in zip(*pattern)]
        try:
            res = place_structured(A, B, pattern, target.polynomial, letter=symbol.lower(), avoid=avoid)
        except DesignError as exc:
            raise DesignError(exc.what if spec.where.key else f"{part}: {exc.what}", where=pw) from None
        except ClosedFormLimitation as exc:
            raise ClosedFormLimitation(exc.what if spec.where.key else f"{part}: {exc.what}", where=pw) from None
        return _structured_design(A, B, spec, target, res, part=part, symbol=symbol, GainDesign=GainDesign,
                                  Step=Step)
    method = spec.values.get("method")
    if method == "canonical":
        from .canonical_form import design_canonical

        return design_canonical(A, B, spec, target, part=part, symbol=symbol, states=states, avoid=avoid,
                                word=word, symbols=symbols)
    if spec.values.get(direction_key(word)) is None and method != "direction":
        from .decoupled import design_blocks, plant_blocks

        blocks = plant_blocks(A, B)
        if len(blocks) > 1:
            return design_blocks(A, B, spec, target, blocks, part=part, symbol=symbol, states=states,
                                 inputs=inputs, avoid=avoid, symbols=symbols, word=word,
                                 design_several_inputs=design_several_inputs)
    return design_by_direction(A, B, spec, target, part=part, symbol=symbol, states=states, inputs=inputs,
                                avoid=avoid, symbols=symbols, word=word, design_gain=design_gain, Step=Step,
                                ranges=ranges)


def selected_branch(spec: TargetSpec, count: int) -> int | None:
    """The 1-based branch the model selects with ``branch = N`` (None: every branch is emitted).

    >>> selected_branch(TargetSpec("poles", {"poles": (-1,), "branch": 2}), 3)
    2
    """
    raw = spec.values.get("branch")
    if raw is None or raw == "all":
        return None
    if isinstance(raw, bool) or not isinstance(raw, int) or not 1 <= raw <= count:
        raise ModelError(f"branch must be \"all\" or a branch number from 1 to {count}, found {raw!r}",
                         where=spec.where.child("branch"))
    return raw


def _structured_design(A, B, spec, target, res, *, part, symbol, GainDesign, Step):
    from .result import Branch

    branches = []
    for k, (gain, real) in enumerate(zip(res.branches, res.real_when or ((),) * len(res.branches)), start=1):
        dens = [sp.denom(sp.together(e)) for e in gain]
        valid = tuple(dict.fromkeys((*nonzero_conditions(dens), *real)))
        note = res.branch_notes[k - 1] if res.branch_notes else ""
        branches.append(Branch(k, sp.ImmutableMatrix(gain), valid, tuple(real), {}, note))
    chosen = selected_branch(spec, len(branches)) if len(branches) > 1 else None
    shown = branches[(chosen or 1) - 1]
    dropped = (f"; {res.complex_only} more complex for every parameter value, left out"
               if res.complex_only else "")
    counts = {"unique": "one solution", "family": f"a family with free gain{'s' if len(res.free) > 1 else ''} "
              + ", ".join(map(str, res.free)),
              "branches": f"{len(branches)} real branches{dropped} (branch {shown.index} "
              + ("selected by the model" if chosen else "shown; every branch is emitted") + ")"}
    notes = (f"structured gain from the pattern: {counts[res.kind]}; solved {res.method}", *target.notes)
    if res.kind != "branches" and dropped:
        notes = (notes[0] + dropped, *notes[1:])
    steps = (
        Step("closed_loop_matrix", f"closed-loop matrix A - B {symbol}", sp.Matrix(A - B * res.gain_symbols)),
        Step("characteristic_polynomial", f"det(sI - A + B {symbol})", res.closed_loop_polynomial),
        Step("target_polynomial", "target polynomial", target.polynomial),
        Step("coefficient_equations", "coefficients matched power by power (polynomial equations)",
             res.equations),
        Step("solution", f"gain {symbol}" + (f" (branch {shown.index})" if len(branches) > 1 else ""),
             sp.Matrix(shown.gain)),
        *([Step("eliminating_polynomial", "eliminating polynomial (lexicographic Groebner basis), factored "
                "over the parameters' field", res.eliminating)] if res.eliminating is not None else []),
        *([Step("branches", "every real solution branch", res.branches)] if len(branches) > 1 else []),
        Step("valid_when", "conditions for the formulas to hold", shown.valid_when),
    )
    return GainDesign(part=part, symbol=symbol, gain=shown.gain, valid_when=shown.valid_when,
                      target=target, closed_loop_polynomial=res.closed_loop_polynomial, steps=steps,
                      free_gains=tuple(res.free), notes=notes,
                      extra={"gain_symbols": res.gain_symbols, "solution_kind": res.kind},
                      branches=tuple(branches) if len(branches) > 1 else (),
                      selected_branch=chosen)


