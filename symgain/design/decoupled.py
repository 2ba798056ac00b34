"""Plants that decouple: design each block of states and inputs on its own.

States i and j belong to one block when A couples them (A[i, j] or A[j, i]
is not identically zero), and an input joins the block of every state it
drives (B[i, u] not zero). The connected components of that graph, ordered
by their first state, are the blocks: after permuting states and inputs, A
and B are block diagonal. Each block is a plant of its own; its target is a
share of the whole target (:mod:`symgain.design.target_split`), and its gain fills
the block's rows and columns of K, the rest of K being zero. A block with
one input gets the single-input formula (unique); a block with several
inputs is designed by the route for several inputs again.

The closed-loop polynomial is the product of the blocks' polynomials, so
the whole closed loop has the target's poles whenever each block has its
share.

>>> import sympy as sp
>>> A = sp.Matrix([[0, 1, 0, 0], [0, 0, 0, 0], [0, 0, 0, 1], [0, 0, 0, 0]])
>>> B = sp.Matrix([[0, 0], [1, 0], [0, 0], [0, 1]])
>>> plant_blocks(A, B)
[((0, 1), (0,)), ((2, 3), (1,))]
"""
from __future__ import annotations

import sympy as sp

from ..model import TargetSpec
from .placement import gain_symbols
from .target_split import split_target
from ..mathtext import math_text

__all__ = ["plant_blocks", "design_blocks"]


def plant_blocks(A: sp.Matrix, B: sp.Matrix) -> list[tuple[tuple[int, ...], tuple[int, ...]]]:
    """[(state indices, input indices)] of the decoupled blocks; one block when the plant is coupled.

    Inputs that drive no state belong to no block. A block that no input drives makes the
    plant uncontrollable: then the whole plant is returned as one block (the usual route says why).
    """
    n, m = A.rows, B.cols
    parent = list(range(n + m))

    def find(i):
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    def join(i, j):
        parent[find(i)] = find(j)

    for i in range(n):
        for j in range(n):
            if i != j and A[i, j] != 0:
                join(i, j)
        for u in range(m):
            if B[i, u] != 0:
                join(i, n + u)
    groups: dict[int, list[int]] = {}
    for i in range(n + m):
        groups.setdefault(find(i), []).append(i)
    blocks = []
    for members in groups.values():
        states = tuple(i for i in members if i < n)
        inputs = tuple(i - n for i in members if i >= n)
        if states:
            blocks.append((states, inputs))
    blocks.sort(key=lambda b: b[0][0])
    if len(blocks) < 2 or any(not ins for _, ins in blocks):
        return [(tuple(range(n)), tuple(range(m)))]
    return blocks


def _names(indices, names) -> str:
    return ", ".join(str(names[i]) for i in indices) if names else ", ".join(str(i + 1) for i in indices)


def design_blocks(A, B, spec: TargetSpec, target, blocks, *, part, symbol, states, inputs, avoid, symbols,
                  word, design_several_inputs):
    """One GainDesign whose gain is assembled from a design per block.

    ``design_several_inputs`` designs a block with several inputs (passed in by the caller, the route
    for several inputs, so that the two modules do not import each other).
    """
    from .result import GainDesign, Step
    from .single_input import design_gain

    n, m = A.rows, B.cols
    where = spec.where.child("target_split") if spec.where.key else spec.where
    shares, rule = split_target(target, spec.values.get("target_split"), [len(s) for s, _ in blocks],
                                "block", where, symbols)
    Ksym = gain_symbols(symbol.lower(), (m, n), avoid)
    K, closed, valid, steps, notes = sp.zeros(m, n), sp.Integer(1), [], [], []
    free: list = []
    layout = "; ".join(f"block {k}: states {_names(s, states)}, inputs {_names(u, inputs)}"
                       for k, (s, u) in enumerate(blocks, start=1))
    steps.append(Step("blocks", "the plant decouples (A and B block diagonal after permuting states and "
                      "inputs)", layout))
    for k, ((si, ui), share) in enumerate(zip(blocks, shares), start=1):
        Ab = A.extract(list(si), list(si))
        Bb = B.extract(list(si), list(ui))
        sub_values = {key: v for key, v in spec.values.items()
                      if key in ("method", "input_direction", "output_direction")}
        sub = TargetSpec("polynomial", {"polynomial": share, **sub_values}, spec.where)
        bstates = tuple(states[i] for i in si) if states else None
        if len(ui) == 1:
            bd = design_gain(Ab, Bb, sub, part=part, symbol=symbol, states=bstates, avoid=avoid, word=word,
                             form="expanded")  # the block gain is assembled entry by entry
        else:
            bd = design_several_inputs(Ab, Bb, sub, part=part, symbol=symbol, states=bstates,
                                       inputs=tuple(inputs[u] for u in ui) if inputs else None,
                                       avoid=avoid, symbols=symbols, word=word)
        local = sp.Matrix(bd.extra["gain_symbols"])
        rename = {}
        for r, u in enumerate(ui):
            for c, s in enumerate(si):
                if isinstance(local[r, c], sp.Symbol):
                    rename[local[r, c]] = Ksym[u, s]
        gain = sp.Matrix(bd.gain).xreplace(rename)
        for r, u in enumerate(ui):
            for c, s in enumerate(si):
                K[u, s] = gain[r, c]
        closed *= sp.sympify(bd.closed_loop_polynomial).xreplace(rename)
        valid.extend(c.xreplace(rename) for c in bd.valid_when)
        free.extend(rename.get(g, g) for g in bd.free_gains)
        notes.extend(f"block {k}: {note}" for note in bd.notes if note not in notes)
        steps.append(Step(f"block_{k}_target", f"block {k} target polynomial", share))
        steps.append(Step(f"block_{k}_gain", f"block {k} gain (rows: inputs {_names(ui, inputs)}; columns: "
                          f"states {_names(si, states)})", gain))
    mask = sp.zeros(m, n)
    for si, ui in blocks:
        for u in ui:
            for s in si:
                mask[u, s] = Ksym[u, s]
    valid_t = tuple(dict.fromkeys(valid))
    steps += [Step("characteristic_polynomial", f"det(sI - A + B {symbol}) (product over the blocks)", closed),
              Step("target_polynomial", "target polynomial", target.polynomial),
              Step("solution", f"gain {symbol}", K),
              Step("valid_when", "conditions for the formulas to hold", valid_t)]
    head = (f"the plant decouples into {len(blocks)} blocks ({layout}); each block designed on its own, "
            f"{symbol} zero between blocks; {rule}: "
            + "; ".join(f"block {k} gets {math_text(sp.factor(p))}" for k, p in enumerate(shares, start=1)))
    return GainDesign(part=part, symbol=symbol, gain=sp.ImmutableMatrix(K), valid_when=valid_t, target=target,
                      closed_loop_polynomial=closed, steps=tuple(steps), free_gains=tuple(free),
                      notes=(head, *[n_ for n_ in notes if n_ not in target.notes], *target.notes),
                      extra={"gain_symbols": mask, "solution_kind": "blocks",
                             "target_split": tuple(shares)})
