"""Shared by the emitter tests: the examples, a model with a validity condition, and
a high-precision reference evaluation of the symbolic gains (mpmath, 40 digits)."""
from __future__ import annotations

import functools
from importlib import resources
from pathlib import Path

import mpmath
import numpy as np
import sympy as sp

from symgain.design import derive
from symgain.emit.common import design_functions
from symgain.model import Model, Parameter, TargetSpec
from symgain.model.toml_file import load_model, model_from_text

EXAMPLES = ["demo"] + [str(p) for p in sorted((Path(__file__).resolve().parent.parent / "examples").glob("*.toml"))]
IDS = [Path(p).stem for p in EXAMPLES]


@functools.lru_cache(maxsize=None)
def design_of(path: str):
    """Derive each example once per test session ("demo": the built-in model)."""
    if path == "demo":
        text = resources.files("symgain.data").joinpath("demo_conveyor.toml").read_text()
        return derive(model_from_text(text, "demo_conveyor.toml"))
    if path == "odd":
        return derive(odd_model())
    return derive(load_model(path))


def odd_model() -> Model:
    """A cart whose actuator gain 'int' may vanish (condition int != 0), with awkward names:
    'lambda' (a Python keyword), 'int' (a C keyword), 'omega_n' (a subscripted Greek name)."""
    lam = Parameter.declare("lambda", sign="positive", range=(1, 2), unit="kg", meaning="cart mass")
    b = Parameter.declare("int", sign="real", range=(0.5, 2), unit="1", meaning="actuator gain & 100% sign")
    w = Parameter.declare("omega_n", sign="positive", range=(1, 3), unit="rad/s", meaning="bandwidth",
                          role="design")
    return Model(name="odd", parameters=(lam, b, w), states=("p", "v"), inputs=("F",),
                 A=sp.Matrix([[0, 1], [0, -1 / lam.symbol]]), B=sp.Matrix([[0], [b.symbol / lam.symbol]]),
                 feedback=TargetSpec("poles", {"poles": (-w.symbol, -2 * w.symbol)}))


def random_points(design, n: int, seed: int = 1) -> dict[str, np.ndarray]:
    """Uniform samples in the declared ranges (nominal value where no range)."""
    rng = np.random.default_rng(seed)
    out = {}
    for p in design.model.parameters:
        out[p.name] = rng.uniform(*p.range, size=n) if p.range else np.full(n, p.nominal)
    return out


def all_values(design, fn, n: int, seed: int = 1) -> dict[str, np.ndarray]:
    """Random parameter points, plus values in [0.5, 2] for free gains (non-parameter arguments)."""
    values = random_points(design, n, seed)
    if fn.nonnegative:  # a solution branch: keep points where it is real (f >= 0), drawn from a larger sample
        wide = random_points(design, 20 * n, seed)
        keep = np.ones(20 * n, dtype=bool)
        for cond in fn.nonnegative:
            names = sorted(map(str, cond.free_symbols))
            keep &= np.asarray(sp.lambdify(names, cond, "numpy")(*[wide[k] for k in names])) >= 0
        assert keep.sum() >= n, f"{fn.name}: fewer than {n} sampled points where the branch is real"
        values = {k: v[keep][:n] for k, v in wide.items()}
    rng = np.random.default_rng(seed + 100)
    for a in fn.arguments:
        if a not in values:
            values[a] = rng.uniform(0.5, 2.0, size=n)
    return values


def reference(fn, values: dict[str, np.ndarray]) -> np.ndarray:
    """The function's matrix evaluated with mpmath at 40 digits, shape (n, rows, cols)."""
    symbols = sorted(fn.matrix.free_symbols, key=str)
    f = sp.lambdify(symbols, fn.matrix, modules="mpmath")
    n = len(next(iter(values.values())))
    out = np.empty((n, *fn.shape))
    with mpmath.workdps(40):
        for i in range(n):
            args = [mpmath.mpf(float(values[str(s)][i])) for s in symbols]
            out[i] = np.array(f(*args).tolist(), dtype=float)
    return out


def relative_error(got: np.ndarray, ref: np.ndarray) -> float:
    """Largest entrywise |got - ref| / |ref| (absolute where ref is exactly zero)."""
    scale = np.where(ref == 0, 1.0, np.abs(ref))
    return float(np.max(np.abs(got - ref) / scale))


def normwise_error(got: np.ndarray, ref: np.ndarray) -> float:
    """Largest over the points of max |got - ref| / max |ref| within each matrix (a matrix-norm
    relative error, common practice for gains: an entry that is a near-cancelling sum of large
    terms is not held to a relative accuracy the arithmetic cannot give)."""
    axes = tuple(range(1, got.ndim))
    scale = np.max(np.abs(ref), axis=axes)
    return float(np.max(np.max(np.abs(got - ref), axis=axes) / np.where(scale == 0, 1.0, scale)))


def functions_of(design):
    return design_functions(design)


# Fixed: sampled-data closed forms lost digits at short sample periods (1 - exp(-T c/m) with
# T c/m down to 1e-4 in sampled_stage, cancelling to third order). The emitters now print the
# short-period stable forms of symgain.emit.stable_forms; tests/test_stable_forms.py measures them
# at T = 1e-4. No example is expected to fail any more.
SHORT_PERIOD_CANCELLATION: set[str] = set()


def mark_known_cancellation(request, path: str) -> None:
    """Expect the strict failure of the emitted-gain accuracy test for the examples listed above."""
    from pathlib import Path as _Path

    import pytest

    if _Path(path).stem in SHORT_PERIOD_CANCELLATION:
        request.applymarker(pytest.mark.xfail(strict=True, reason="short-period cancellation in sampled-data "
                                              "closed forms (known, see emit_helpers)"))
