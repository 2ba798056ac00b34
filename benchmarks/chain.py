"""A chain of N carriages joined by springs and dampers, for the derivation benchmark.

Carriage 1 is tied to a wall by spring k_1 and damper c_1; carriage i (i >= 2)
is joined to carriage i-1 by spring k_i and damper c_i. The force F acts on
carriage 1. States are x_1, v_1, ..., x_N, v_N (2N states); the parameters
are m_i, k_i, c_i (3N, all positive). Newton's law for carriage i:

    m_i v_i' = -k_i (x_i - x_(i-1)) - c_i (v_i - v_(i-1))
               + k_(i+1) (x_(i+1) - x_i) + c_(i+1) (v_(i+1) - v_i)   [+ F for i = 1]

with x_0 = v_0 = 0 (the wall) and no spring beyond carriage N.

>>> chain = carriage_chain(1)
>>> chain.A
Matrix([
[       0,        1],
[-k_1/m_1, -c_1/m_1]])
>>> chain.B.T
Matrix([[0, 1/m_1]])
>>> len(carriage_chain(3).parameters)
9
"""
from __future__ import annotations

from dataclasses import dataclass

import sympy as sp

__all__ = ["Chain", "carriage_chain", "chain_model"]


@dataclass(frozen=True)
class Chain:
    A: sp.Matrix
    B: sp.Matrix
    parameters: tuple[sp.Symbol, ...]  # m_1, k_1, c_1, m_2, ...
    states: tuple[str, ...]


def carriage_chain(n: int) -> Chain:
    """The 2N x 2N plant of a chain of ``n`` carriages (see the module docstring)."""
    if n < 1:
        raise ValueError("a chain needs at least one carriage")
    m = [sp.Symbol(f"m_{i}", positive=True) for i in range(1, n + 1)]
    k = [sp.Symbol(f"k_{i}", positive=True) for i in range(1, n + 1)]
    c = [sp.Symbol(f"c_{i}", positive=True) for i in range(1, n + 1)]
    A = sp.zeros(2 * n, 2 * n)
    for i in range(n):
        x, v = 2 * i, 2 * i + 1
        A[x, v] = 1
        # link to the left (wall for i = 0): -k_i (x_i - x_(i-1)) - c_i (v_i - v_(i-1))
        A[v, x] += -k[i] / m[i]
        A[v, v] += -c[i] / m[i]
        if i > 0:
            A[v, x - 2] += k[i] / m[i]
            A[v, v - 2] += c[i] / m[i]
        if i + 1 < n:  # link to the right: k_(i+1) (x_(i+1) - x_i) + c_(i+1) (v_(i+1) - v_i)
            A[v, x] += -k[i + 1] / m[i]
            A[v, v] += -c[i + 1] / m[i]
            A[v, x + 2] += k[i + 1] / m[i]
            A[v, v + 2] += c[i + 1] / m[i]
    B = sp.zeros(2 * n, 1)
    B[1, 0] = 1 / m[0]
    params = tuple(p for i in range(n) for p in (m[i], k[i], c[i]))
    states = tuple(f"{q}_{i}" for i in range(1, n + 1) for q in ("x", "v"))
    return Chain(A, B, params, states)


def chain_model(n: int):
    """The chain as a symgain Model with every feedback pole at -w.

    >>> chain_model(2).feedback.values["poles"]
    (-w, -w, -w, -w)
    """
    from symgain.model import Model, Parameter, TargetSpec

    chain = carriage_chain(n)
    params = [Parameter.declare(str(p), sign="positive", range=(1, 2)) for p in chain.parameters]
    wp = Parameter.declare("w", sign="positive", range=(1, 3), role="design")
    w = wp.symbol
    # the declared symbols carry the same name and assumptions as the chain's
    return Model(name=f"chain_{n}", parameters=(*params, wp), states=chain.states, inputs=("F",),
                 A=chain.A, B=chain.B, feedback=TargetSpec("poles", {"poles": (-w,) * (2 * n)}))


def chain_toml(n: int) -> str:
    """The chain as model-file text (TOML), for timing whole commands.

    >>> "m_2 = " in chain_toml(2) and 'poles = ["-w", "-w", "-w", "-w"]' in chain_toml(2)
    True
    """
    chain = carriage_chain(n)
    size = 2 * n
    lines = [f'name = "chain_{n}"', f'title = "Chain of {n} carriages joined by springs and dampers"',
             "", "[parameters]"]
    lines += [f'{p} = {{ sign = "positive", range = [1, 2] }}' for p in chain.parameters]
    lines.append('w = { sign = "positive", range = [1, 3], role = "design" }')
    lines += ["", "[plant]", f"states = {list(chain.states)!r}".replace("'", '"'), 'inputs = ["F"]']
    rows = ["[" + ", ".join(f'"{sp.sstr(chain.A[i, j])}"' for j in range(size)) + "]" for i in range(size)]
    lines.append("A = [" + ",\n     ".join(rows) + "]")
    lines.append("B = [" + ", ".join(f'["{sp.sstr(chain.B[i, 0])}"]' for i in range(size)) + "]")
    lines += ["", "[feedback]", "poles = [" + ", ".join(['"-w"'] * size) + "]"]
    return "\n".join(lines) + "\n"
