"""What every code emitter needs: the functions to write, names, shared subexpressions.

A design becomes a list of :class:`Function` objects, one per designed
matrix: ``<part>_gain`` for each part's gain, and one per extra matrix of a
part (named after its key; ``<part>_<key>`` when that name is taken). The
arguments are every declared parameter in declaration order, then the free
gains that the target left undetermined (sorted by name).

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> from symgain.design import derive
>>> m = Parameter.declare("m", sign="positive", range=(1, 2))
>>> b = Parameter.declare("b", sign="real", range=(1, 2))
>>> model = Model(name="cart", parameters=(m, b), states=("p", "v"), inputs=("F",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [b.symbol / m.symbol]]),
...               feedback=TargetSpec("poles", {"poles": (-1, -1)}))
>>> [(f.name, f.label, f.arguments, f.conditions) for f in design_functions(derive(model))]
[('feedback_gain', 'K', ('m', 'b'), (b,))]
>>> failure_rule(sp.Symbol("b") - 1)
((b - 1,), (-1, b))

Validity rule (the same in Python and C): a condition ``Ne(f, 0)`` fails
where ``|f| <= tol * (1 + |t_1| + ... + |t_k|)`` with ``t_i`` the terms of
``f`` as written (so that a round-off zero counts as zero); ``tol`` is
``1e-12`` in double precision and ``1e-5`` in single precision.
"""
from __future__ import annotations

from dataclasses import dataclass, replace

import sympy as sp

from ..design import EXTRA_SYMBOLS, Design
from ..model.identifiers import PYTHON_KEYWORDS

__all__ = ["Function", "design_functions", "failure_rule", "shared_subexpressions", "discriminants",
           "mangle", "TOLERANCE", "range_macro", "range_test"]

TOLERANCE = {"double": 1e-12, "single": 1e-5}

PART_ORDER = ("feedback", "estimator", "integral", "feedforward")


@dataclass(frozen=True)
class Function:
    """One emitted function: a matrix of closed-form entries in the parameters."""

    name: str  # e.g. "feedback_gain"
    part: str  # "feedback", ...
    key: str  # "gain" or the key of part.extra
    label: str  # matrix name in formulas: K, L, ...
    matrix: sp.ImmutableMatrix
    arguments: tuple[str, ...]  # parameter names (declaration order), then free gains
    conditions: tuple[sp.Expr, ...]  # f of each Ne(f, 0), in the order of part.valid_when
    meanings: tuple[tuple[str, str, str, tuple | None], ...]  # (name, meaning, unit, range)
    definitions: tuple[tuple[sp.Symbol, sp.Expr], ...] = ()  # compact form: computed first, in order
    nonnegative: tuple[sp.Expr, ...] = ()  # f of each f >= 0 (a solution branch is real there)
    branch: int | None = None  # the solution branch this function holds (several-input designs)
    infinite_ok: bool = False  # entries may be +-inf (absent input limits); NaN is still refused
    period: sp.Symbol | None = None  # sample period of a sampled-data design: entries printed in stable form
    # a fixed numeric period: (T, value, entries, conditions) of the twin design with T symbolic
    twin: tuple | None = None

    def printed(self) -> list:
        """The entries as the emitters print them: short-period stable forms when there is a period
        (:mod:`symgain.design.short_period`; the same values), otherwise the entries as designed.
        A fixed numeric period uses the twin design's forms with the number put in."""
        from ..design.short_period import stable_form

        if self.twin is not None:
            T, value, entries, _ = self.twin
            return [stable_form(e, T).xreplace({T: value}) for e in entries]
        if self.period is None:
            return list(self.matrix)
        return [stable_form(e, self.period) for e in self.matrix]

    def printed_conditions(self) -> list:
        """The f of each condition f != 0 as the emitters test it: at short periods in stable form with
        its positive factors (powers of T, ...) divided out (the same condition; the round-off zero
        test then sees a quantity of its natural size, not one that vanishes with T)."""
        from ..design.short_period import stable_condition

        if self.twin is not None:
            T, value, _, conditions = self.twin
            return [stable_condition(c, T).xreplace({T: value}) for c in conditions]
        if self.period is None:
            return list(self.conditions)
        return [stable_condition(c, self.period) for c in self.conditions]

    def checked_after(self) -> dict[int, list[int]]:
        """Definition index -> indexes of the conditions to test right after it (compact form).

        A condition on a pivot is tested as soon as the pivot is known, before any
        division by it; conditions that need no definition have the key -1.
        """
        position = {sym: k for k, (sym, _) in enumerate(self.definitions)}
        out: dict[int, list[int]] = {}
        for index, cond in enumerate(self.conditions):
            last = max((position[s] for s in cond.free_symbols if s in position), default=-1)
            out.setdefault(last, []).append(index)
        return out

    @property
    def shape(self) -> tuple[int, int]:
        return self.matrix.rows, self.matrix.cols


def _condition_expr(cond) -> sp.Expr:
    if isinstance(cond, (sp.Ne, sp.Ge)):
        return cond.lhs - cond.rhs if cond.rhs != 0 else cond.lhs
    raise TypeError(f"only Ne(f, 0) and f >= 0 conditions can be emitted, found {cond}")


def _split_conditions(conds) -> tuple[tuple, tuple]:
    """(f of each Ne(f, 0), f of each f >= 0)."""
    ne = tuple(_condition_expr(c) for c in conds if isinstance(c, sp.Ne))
    ge = tuple(_condition_expr(c) for c in conds if isinstance(c, sp.Ge))
    ge += tuple(c.rhs - c.lhs for c in conds if isinstance(c, sp.Le))
    if len(ne) + len(ge) != len(tuple(conds)):
        raise TypeError(f"only Ne(f, 0) and f >= 0 conditions can be emitted, found {conds}")
    return ne, ge


def design_functions(design: Design) -> list[Function]:
    """Every matrix of every part of the design, as functions to emit."""
    model = design.model
    params = [p.name for p in model.parameters]
    declared = {p.symbol for p in model.parameters}
    meanings = tuple((p.name, p.meaning, p.unit, p.range) for p in model.parameters)
    twins = _twin_matrices(design)
    out: list[Function] = []
    taken: set[str] = set()
    for part in design.parts():
        main = "integral_state_gain" if part.part == "integral" else f"{part.part}_gain"  # K of [K, Ki]
        matrices = [("gain", main, part.symbol, part.gain)]
        for key, value in part.extra.items():
            if key == "gain_symbols" or not isinstance(value, sp.MatrixBase):
                continue
            name = key if key not in taken and key != main else f"{part.part}_{key}"
            matrices.append((key, name, EXTRA_SYMBOLS.get(key, key), value))
        defined = {sym for sym, _ in part.definitions}
        in_definitions = {s for _, e in part.definitions for s in e.free_symbols}
        shown = part.selected_branch or (1 if part.branches else None)
        entries = [(key, name, label, matrix, part.valid_when, shown, tuple(part.definitions))
                   for key, name, label, matrix in matrices]
        if part.branches and part.selected_branch is None:  # every other branch is emitted too
            for b in part.branches:
                if b.index == shown:
                    continue
                entries.append(("gain", f"{main}_branch_{b.index}", part.symbol, b.gain,
                                b.valid_when, b.index, ()))
                for key, value in b.extra.items():
                    name = f"{key}_branch_{b.index}"
                    entries.append((key, name if name not in taken else f"{part.part}_{name}",
                                    EXTRA_SYMBOLS.get(key, key), value, b.valid_when, b.index, ()))
        for key, name, label, matrix, valid, branch, definitions in entries:
            conditions, nonnegative = _split_conditions(valid)
            if getattr(design, "sampled", None) is not None:
                nonnegative += discriminants(matrix, nonnegative)
            taken.add(name)
            matrix = sp.ImmutableMatrix(matrix)
            used = in_definitions if definitions else set()
            free = sorted((s for s in matrix.free_symbols
                           | {s for c in (*conditions, *nonnegative) for s in c.free_symbols}
                           | used if s not in declared and s not in defined), key=str)
            fm = tuple((str(s), "free gain left undetermined by the target", "", None) for s in free)
            out.append(Function(name, part.part, key, label, matrix, tuple(params) + tuple(map(str, free)),
                                conditions, meanings + fm, definitions=definitions, nonnegative=nonnegative,
                                branch=branch, period=None if definitions else sample_period(design)))
            twin = None if definitions or free else _twin_of(twins, part.part, key, branch, matrix, model)
            if twin is not None:  # the twin's conditions (the same formulas; T = value put in)
                T, value, _, twin_conditions = twin
                out[-1] = replace(out[-1], twin=twin, conditions=tuple(
                    c.xreplace({T: value}) for c in twin_conditions))
    return out


def _twin_matrices(design: Design):
    """(T, value, {(part, key, branch): (matrix, conditions)}) of the symbolic-period twin, or None."""
    from ..design.sampled import symbolic_period_twin
    from ..design.short_period import TWIN_LOSS, TWIN_SIZE_LIMIT, printed_error

    if getattr(design, "sampled", None) is None or not sp.sympify(design.sampled.period).is_number:
        return None
    if not printed_error(design) > TWIN_LOSS:
        return None  # the formulas as printed keep their digits: no second derivation, no rewrite
    found = symbolic_period_twin(design)
    if found is None:
        return None
    twin, T, value = found
    if sum(sp.count_ops(sp.Matrix(part.gain)) for part in twin.parts()) > TWIN_SIZE_LIMIT:
        return None  # rewriting forms this large costs minutes: the entries are printed as designed
    table = {}
    for part in twin.parts():
        shown = part.selected_branch or (1 if part.branches else None)
        conditions = _split_conditions(part.valid_when)[0]
        table[(part.part, "gain", shown)] = (part.gain, conditions)
        for key, v in part.extra.items():
            if key != "gain_symbols" and isinstance(v, sp.MatrixBase):
                table[(part.part, key, shown)] = (v, conditions)
    return T, value, table


def _twin_of(twins, part: str, key: str, branch, matrix, model):
    """The twin's (T, value, entries, conditions) for one function, if its entries agree with the design's
    own at nominal (30 digits); None otherwise (the entries are then printed as designed)."""
    if twins is None:
        return None
    T, value, table = twins
    found = table.get((part, key, branch))
    if found is None or sp.Matrix(found[0]).shape != matrix.shape:
        return None
    entries, twin_conditions = found
    nominal = {p.symbol: sp.Float(p.nominal if p.nominal is not None else 1, 30) for p in model.parameters}
    at = {**nominal, T: value}
    try:
        for mine, theirs in zip(list(matrix), list(entries)):
            a = complex(sp.sympify(mine).xreplace(nominal).evalf(30))
            b = complex(sp.sympify(theirs).xreplace(at).evalf(30))
            if abs(a - b) > 1e-9 * max(1.0, abs(a)):
                return None
    except (TypeError, ValueError, ZeroDivisionError):
        return None
    return T, value, tuple(entries), tuple(twin_conditions)


def discriminants(matrix, known=()) -> tuple:
    """The D of every sqrt(D) in a sampled-data matrix that may turn negative, as f >= 0 conditions.

    The exact hold writes the eigenvalues of a quadratic factor with sqrt(D); where D < 0 the
    formulas as written are not real (NaN in numpy and C) although the matrices are, so the
    emitted code refuses there with the condition named (D >= 0: the eigenvalues are real).

    >>> c, k = sp.symbols("c k", positive=True)
    >>> discriminants(sp.Matrix([[sp.exp(sp.sqrt(c**2 - 4*k))]]))
    (c**2 - 4*k,)
    """
    found = []
    for e in sp.ImmutableMatrix(matrix):
        for a in e.atoms(sp.Pow):
            if a.exp.is_Rational and a.exp.q == 2 and a.base.free_symbols and a.base.is_nonnegative is not True \
                    and a.base not in found and a.base not in known:
                found.append(a.base)
    return tuple(sorted(found, key=sp.default_sort_key))


def sample_period(design: Design):
    """The sample period symbol of a sampled-data design (None for a numeric period or a continuous design)."""
    sampled = getattr(design, "sampled", None)
    if sampled is None or not isinstance(sampled.period, sp.Symbol):
        return None
    return sampled.period


def failure_rule(expr: sp.Expr, definitions=()) -> tuple[tuple[sp.Expr, ...], tuple[sp.Expr, ...]]:
    """``((f,), terms)``: the value and the terms whose sizes scale the zero test.

    For a named quantity of the compact form the terms are those of its definition
    (the pivot ``u = a - b`` is a round-off zero when ``|u| <= tol (1 + |a| + |b|)``).

    >>> u, a, b = sp.symbols("u a b")
    >>> failure_rule(u, [(u, a - b)])
    ((u,), (a, -b))
    """
    definition = dict(definitions).get(expr)
    return (expr,), sp.Add.make_args(definition if definition is not None else expr)


def shared_subexpressions(exprs, avoid, prefix: str = "t"):
    """``sympy.cse`` with temporaries named ``t0, t1, ...`` that avoid the given names.

    >>> x, y = sp.symbols("x y")
    >>> shared_subexpressions([(x + y)**2, sp.sin(x + y)], {"t0"})
    ([(t1, x + y)], [t1**2, sin(t1)])
    """
    names = sp.numbered_symbols(prefix, exclude={sp.Symbol(a) for a in avoid})
    replacements, reduced = sp.cse(list(exprs), symbols=names, order="none")
    return replacements, reduced


def mangle(name: str, reserved: set[str]) -> str:
    """A name that is not reserved: append ``_p`` until it is free (documented mangling).

    >>> mangle("int", {"int", "double"}), mangle("m", {"int"})
    ('int_p', 'm')
    """
    while name in reserved:
        name += "_p"
    return name


PYTHON_RESERVED = set(PYTHON_KEYWORDS) | {"numpy", "shape", "out", "_fails", "_bad", "_invalid_mask", "on_invalid",
                                              "check_ranges"}


def range_macro(prefix: str) -> str:
    """The macro that, defined when the C source is compiled, removes the range tests.

    >>> range_macro("cart")
    'CART_NO_RANGE_CHECKS'
    """
    return f"{prefix.upper()}_NO_RANGE_CHECKS"


_FLOAT_MAX = 3.4028234663852886e38


def range_test(name: str, rng, ctype: str) -> str | None:
    """The C test that is true where ``name`` lies outside ``rng`` (None: no range, or none that a float can break).

    >>> range_test("m", (1, 2), "double"), range_test("m", (-1e300, 2), "float")
    ('!(m >= 1.0 && m <= 2.0)', '!(m <= 2.0f)')
    """
    if rng is None:
        return None
    suffix = "f" if ctype == "float" else ""
    sides = [f"{name} {op} {float(v)!r}{suffix}" for op, v in ((">=", rng[0]), ("<=", rng[1]))
             if ctype != "float" or abs(float(v)) <= _FLOAT_MAX]  # no float lies beyond that bound
    return f"!({' && '.join(sides)})" if sides else None
