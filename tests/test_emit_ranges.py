"""Emitted code enforces the declared ranges (the design envelope), with an explicit opt-out.

Python: a value outside [low, high] raises ValueError naming the parameter, the value and the
range; ``check_ranges=False`` evaluates outside it (the signs still hold); on_invalid="nan"
gives NaN gains there and prints no numpy warning. C: a negative return code documented in
the header, the matrix untouched; ``-D<PREFIX>_NO_RANGE_CHECKS`` removes the range tests.
Values computed outside the envelope are compared with the design's formulas evaluated by
mpmath at 40 digits (tests/emit_helpers.reference), not with the code under test.
"""
from __future__ import annotations

import importlib.util
import re
import shutil
import subprocess
import warnings

import numpy as np
import pytest

from emit_helpers import EXAMPLES, design_of, reference
from symgain.emit import emit
from symgain.emit.common import PYTHON_RESERVED, design_functions, mangle
from symgain.emit.controller_python import controller_blocker, controller_functions

CC = shutil.which("gcc") or shutil.which("cc")
FLAGS = ["-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic"]
SENTINEL = -12345.0
RTOL = 1e-6  # the formulas of sampled-data designs lose digits to cancellation (see test_emit_c); the
# point here is that the opt-out computes the formula at all, not how precisely
CHOSEN = ["demo", "greenhouse_cart", "linear_stage", "sampled_stage", "quarter_car_suspension", "camera_tilt"]
PATHS = [p for p in EXAMPLES if p == "demo" or any(p.endswith(f"/{name}.toml") for name in CHOSEN)]
IDS = [p.rsplit("/", 1)[-1].removesuffix(".toml") for p in PATHS]


def _functions(design):
    fns = design_functions(design)
    if controller_blocker(design) is None:
        fns += controller_functions(design)
    return fns


def _mass(design):
    """The first parameter declared positive with a range: the one pushed out of its envelope."""
    return next(p for p in design.model.parameters if p.sign == "positive" and p.range is not None)


def _point(design, fn, **changes):
    """Every argument of fn at its nominal value (free gains 1.0), with changes by model name."""
    nominal = design.model.nominal_values()
    return {a: float(changes.get(a, nominal.get(a, 1.0))) for a in fn.arguments}


def _outside(p) -> float:
    low, high = p.range
    return high + 0.25 * (high - low)


def _load(design, folder, name):
    (path,) = emit(design, ["python"], folder, name=name)
    spec = importlib.util.spec_from_file_location(name, path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.mark.parametrize("path", PATHS, ids=IDS)
def test_python_refuses_negative_mass_and_out_of_range_values(path, tmp_path):
    design = design_of(path)
    module = _load(design, tmp_path, "ranges_" + IDS[PATHS.index(path)])
    mass = _mass(design)
    low, high = mass.range
    key = mangle(mass.name, PYTHON_RESERVED)
    for fn in _functions(design):
        func = getattr(module, fn.name)
        kw = lambda values: {mangle(k, PYTHON_RESERVED): v for k, v in values.items()}  # noqa: E731
        assert not np.isnan(func(**kw(_point(design, fn)))).any()  # +-inf: an absent input limit
        with pytest.raises(ValueError, match=rf"{fn.name}: {key} must be a finite positive number"):
            func(**kw(_point(design, fn, **{mass.name: -mass.nominal})))
        out = _outside(mass)
        with pytest.raises(ValueError, match=re.escape(f"{fn.name}: {key} = {out!r} lies outside its declared "
                                                       f"range [{low:g}, {high:g}]")):
            func(**kw(_point(design, fn, **{mass.name: out})))
        for edge in (low, high):  # the range is closed: both ends are inside
            func(**kw(_point(design, fn, **{mass.name: edge})))
        # the opt-out: the design's formula outside the envelope (mpmath, 40 digits)
        point = _point(design, fn, **{mass.name: out})
        got = func(**kw(point), check_ranges=False)
        want = reference(fn, {k: np.array([v]) for k, v in point.items()})[0]
        np.testing.assert_allclose(got, want, rtol=RTOL, atol=RTOL * np.max(np.abs(want[np.isfinite(want)]),
                                                                              initial=1.0))
        with pytest.raises(ValueError, match="must be a finite positive"):  # the sign still holds
            func(**kw(_point(design, fn, **{mass.name: -mass.nominal})), check_ranges=False)
        # on_invalid="nan": NaN at the out-of-range and negative points only
        values = _point(design, fn)
        values[mass.name] = np.array([mass.nominal, out, -mass.nominal])
        marked = func(**kw(values), on_invalid="nan")
        assert not np.isnan(marked[0]).any() and np.isnan(marked[1:]).all()


@pytest.mark.parametrize("path", PATHS, ids=IDS)
def test_python_controller_refuses_out_of_range_unless_asked(path, tmp_path):
    design = design_of(path)
    if controller_blocker(design) is not None:
        pytest.skip(controller_blocker(design))
    module = _load(design, tmp_path, "ctl_" + IDS[PATHS.index(path)])
    mass = _mass(design)
    key = mangle(mass.name, PYTHON_RESERVED)
    cls = module.Controller
    T = None if cls.FIXED_PERIOD is not None or cls.PERIOD_PARAMETER is not None else 0.001
    if key == cls.PERIOD_PARAMETER:
        pytest.skip("the pushed parameter is the sample period")
    with pytest.raises(ValueError, match=rf"{key} = {_outside(mass)!r} lies outside its declared range"):
        cls(T, **{key: _outside(mass)})
    with pytest.raises(ValueError, match="declared sign"):
        cls(T, **{key: -mass.nominal}, check_ranges=False)
    ctl = cls(T, **{key: _outside(mass)}, check_ranges=False)
    gain = module.integral_gain if hasattr(module, "integral_gain") else module.feedback_gain
    values = {k: v for k, v in ctl.parameters.items()}
    np.testing.assert_array_equal(ctl.K, gain(**values, check_ranges=False))


def test_nan_mode_prints_no_numpy_warning(tmp_path):
    """A condition that fails in on_invalid="nan" mode divides by zero inside numpy: silenced there,
    and only there (plain numpy outside the function still warns: common practice for errstate)."""
    design = design_of("odd")  # K = [2 lambda omega_n^2 / int, (3 lambda omega_n - 1) / int]
    module = _load(design, tmp_path, "odd_quiet")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        marked = module.feedback_gain(lambda_p=1.5, int=np.array([2.0, 0.0]), omega_n=2.0, on_invalid="nan",
                                      check_ranges=False)
        marked_range = module.feedback_gain(lambda_p=np.array([1.5, 9.0]), int=2.0, omega_n=2.0,
                                            on_invalid="nan")
    assert [str(w.message) for w in caught] == []
    assert np.isnan(marked[1]).all() and np.isnan(marked_range[1]).all()
    np.testing.assert_allclose(marked[0], [[2 * 1.5 * 4 / 2, (3 * 1.5 * 2 - 1) / 2]], rtol=1e-15)  # by hand
    with pytest.warns(RuntimeWarning):  # the error state is restored after the call
        np.array([1.0]) / np.array([0.0])


def _driver(prefix: str, fns) -> str:
    """Reads ``index a1 ... an`` per line, calls function ``index``, prints rc and the matrix."""
    cases = []
    for index, fn in enumerate(fns):
        rows, cols = fn.shape
        n = len(fn.arguments)
        args = ", ".join(f"a[{i}]" for i in range(n))
        cases.append(f"""        case {index}: {{
            double G[{rows}][{cols}];
            for (i = 0; i < {n}; i++) if (scanf("%lf", &a[i]) != 1) return 2;
            for (i = 0; i < {rows}; i++) for (j = 0; j < {cols}; j++) G[i][j] = {SENTINEL!r};
            rc = {prefix}_{fn.name}({args}{', ' if n else ''}G);
            printf("%d", rc);
            for (i = 0; i < {rows}; i++) for (j = 0; j < {cols}; j++) printf(" %.17g", G[i][j]);
            printf("\\n");
            break;
        }}""")
    width = max(len(fn.arguments) for fn in fns) + 1
    return f"""#include <stdio.h>
#include "{prefix}.h"
int main(void)
{{
    double a[{width}];
    int which, i, j, rc;
    while (scanf("%d", &which) == 1) {{
        switch (which) {{
{chr(10).join(cases)}
        default:
            return 3;
        }}
    }}
    return 0;
}}
"""


def _run_c(design, folder, prefix, fns, lines, flags=()):
    paths = emit(design, ["c"], folder, name=prefix)
    (folder / "driver.c").write_text(_driver(prefix, fns))
    exe = folder / "prog"
    subprocess.run([CC, *FLAGS, *flags, "-o", str(exe), str(folder / "driver.c"), str(paths[1]), "-lm"],
                   check=True, capture_output=True, text=True)
    out = subprocess.run([str(exe)], input="\n".join(lines) + "\n", capture_output=True, text=True, check=True)
    return [[float(x) for x in line.split()] for line in out.stdout.splitlines()], paths[0].read_text()


@pytest.mark.skipif(CC is None, reason="no C compiler")
@pytest.mark.parametrize("path", PATHS, ids=IDS)
def test_c_refuses_negative_mass_and_out_of_range_values(path, tmp_path):
    design = design_of(path)
    fns = _functions(design)
    mass = _mass(design)
    out = _outside(mass)
    lines, expected = [], []
    for index, fn in enumerate(fns):
        k = fn.arguments.index(mass.name) + 1
        for value, code in ((mass.nominal, 0), (-mass.nominal, -k), (out, -(len(fn.arguments) + k)),
                            (mass.range[0], 0), (mass.range[1], 0)):
            point = _point(design, fn, **{mass.name: value})
            lines.append(" ".join([str(index)] + [repr(point[a]) for a in fn.arguments]))
            expected.append((fn, point, code))
    rows, header = _run_c(design, tmp_path, "rng", fns, lines)
    for (fn, point, code), row in zip(expected, rows):
        assert row[0] == code, (fn.name, point)
        untouched = np.array(row[1:]) == SENTINEL
        assert untouched.all() if code else not untouched.any()
    fn = fns[0]
    k = fn.arguments.index(mass.name) + 1
    low, high = mass.range
    assert (f"returns -{len(fn.arguments) + k} when {mass.name} lies outside [{low:g}, {high:g}] "
            "(unless compiled with RNG_NO_RANGE_CHECKS)") in header
    assert "-DRNG_NO_RANGE_CHECKS" in header
    # compiled with the opt-out: the out-of-range points compute the design's formula (mpmath)
    rows, _ = _run_c(design, tmp_path, "rng", fns, lines, flags=["-DRNG_NO_RANGE_CHECKS"])
    for (fn, point, code), row in zip(expected, rows):
        if code == -(len(fn.arguments) + fn.arguments.index(mass.name) + 1):
            assert row[0] == 0, fn.name
            want = reference(fn, {k: np.array([v]) for k, v in point.items()})[0].ravel()
            np.testing.assert_allclose(row[1:], want, rtol=RTOL, atol=RTOL * np.max(np.abs(want[np.isfinite(want)]),
                                                                                      initial=1.0))
        else:
            assert row[0] == code  # the sign test stays


@pytest.mark.skipif(CC is None, reason="no C compiler")
def test_c_controller_range_opt_out(tmp_path):
    """sampled_mirror: J range [2e-5, 5e-5] (from the example file); init returns -2 outside it,
    0 when compiled with -DSAMPLED_MIRROR_NO_RANGE_CHECKS, -2 still for a negative J (the sign)."""
    design = design_of(next(p for p in EXAMPLES if p.endswith("sampled_mirror.toml")))
    emit(design, ["c"], tmp_path)
    (tmp_path / "t.c").write_text("""#include <stdio.h>
#include "sampled_mirror.h"
int main(void)
{
    sampled_mirror_controller_t ctl;
    printf("%d %d %d\\n", sampled_mirror_controller_init(&ctl, 0.001, 3e-5, 1.2),
           sampled_mirror_controller_init(&ctl, 0.001, 9e-5, 1.2),
           sampled_mirror_controller_init(&ctl, 0.001, -3e-5, 1.2));
    return 0;
}
""")
    results = []
    for flags in ([], ["-DSAMPLED_MIRROR_NO_RANGE_CHECKS"]):
        subprocess.run([CC, *FLAGS, *flags, "-o", str(tmp_path / "t"), str(tmp_path / "t.c"),
                        str(tmp_path / "sampled_mirror.c"), "-lm"], check=True)
        results.append(subprocess.run([str(tmp_path / "t")], capture_output=True, text=True,
                                      check=True).stdout.split())
    assert results == [["0", "-2", "-2"], ["0", "0", "-2"]]
