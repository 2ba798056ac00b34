"""The emitted Python module, imported from a temporary folder and compared with the
symbolic gains evaluated by mpmath at 40 digits (the reference)."""
import ast
import importlib.util
import sys

import numpy as np
import pytest

from emit_helpers import mark_known_cancellation, EXAMPLES, IDS, all_values, design_of, functions_of, reference, relative_error
from symgain.emit import emit


def load_emitted(design, folder, name):
    """Write the module with symgain.emit.emit and import it like a user would."""
    (path,) = emit(design, ["python"], folder, name=name)
    spec = importlib.util.spec_from_file_location(name, path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module, path


@pytest.mark.parametrize("path", EXAMPLES, ids=IDS)
def test_module_matches_symbolic_gains(path, tmp_path, request):
    mark_known_cancellation(request, path)
    design = design_of(path)
    module, file = load_emitted(design, tmp_path, "emitted_" + IDS[EXAMPLES.index(path)])
    imports = {a.name for node in ast.walk(ast.parse(file.read_text()))
               if isinstance(node, (ast.Import, ast.ImportFrom)) for a in getattr(node, "names", [])}
    assert imports == {"numpy"}  # standalone: numpy only, no sympy
    for fn in functions_of(design):
        values = all_values(design, fn, 200)
        got = getattr(module, fn.name)(**values)
        assert got.shape == (200, *fn.shape)
        ref = reference(fn, values)
        assert relative_error(got, ref) < 1e-12, fn.name
        # the vectorized call equals the scalar calls
        for i in range(0, 200, 20):
            one = getattr(module, fn.name)(**{k: float(v[i]) for k, v in values.items()})
            assert one.shape == fn.shape
            np.testing.assert_allclose(one, got[i], rtol=1e-14, atol=0)


def test_broadcasting_and_docstring(tmp_path):
    design = design_of(EXAMPLES[0])  # the built-in conveyor: m, c, tau, w
    module, _ = load_emitted(design, tmp_path, "conveyor_mod")
    m = np.linspace(5, 40, 4)[:, None]
    w = np.linspace(2, 10, 3)[None, :]
    out = module.feedback_gain(m=m, c=2.0, tau=0.01, w=w)
    assert out.shape == (4, 3, 1, 3)
    single = module.feedback_gain(m=float(m[2, 0]), c=2.0, tau=0.01, w=float(w[0, 1]))
    np.testing.assert_allclose(out[2, 1], single, rtol=1e-15)
    doc = module.feedback_gain.__doc__
    for fragment in ("K[0, 0] = m*tau*w**3", "m [kg]: belt plus parcels mass; > 0, range [5, 40]", "Valid when"):
        assert fragment in doc
    with pytest.raises(TypeError):  # keyword-only arguments
        module.feedback_gain(12.0, 2.0, 0.01, 5.0)


def test_condition_failure_and_keyword_names(tmp_path):
    design = design_of("odd")  # parameters lambda, int, omega_n; condition int != 0
    module, file = load_emitted(design, tmp_path, "odd_mod")
    assert ('def feedback_gain(*, lambda_p, int, omega_n, on_invalid="raise", check_ranges=True):'
            in file.read_text())
    # K = [2 lambda omega_n^2 / int, (3 lambda omega_n - 1) / int], worked by hand for poles -w, -2w
    k = module.feedback_gain(lambda_p=1.5, int=2.0, omega_n=2.0)
    np.testing.assert_allclose(k, [[2 * 1.5 * 4 / 2, (3 * 1.5 * 2 - 1) / 2]], rtol=1e-15)
    beyond = {"check_ranges": False}  # int = 0 and the values below lie outside int's range [0.5, 2]
    with pytest.raises(ValueError, match=r"int != 0.*these parameter values"):
        module.feedback_gain(lambda_p=1.5, int=0.0, omega_n=2.0, **beyond)
    gains = np.array([[1.0, 2.0, 3.0], [4.0, 0.0, 5.0]])
    with pytest.raises(ValueError, match=r"int != 0 fails at index \(1, 1\)"):
        module.feedback_gain(lambda_p=1.5, int=gains, omega_n=2.0, **beyond)
    # a round-off zero counts as zero (|f| <= 1e-12 (1 + |terms|)), a small real value does not
    with pytest.raises(ValueError):
        module.feedback_gain(lambda_p=1.5, int=1e-13, omega_n=2.0, **beyond)
    assert np.isfinite(module.feedback_gain(lambda_p=1.5, int=1e-9, omega_n=2.0, **beyond)).all()
    # on_invalid="nan" (what schedules use): NaN exactly where the condition fails, the same
    # numbers elsewhere
    marked = module.feedback_gain(lambda_p=1.5, int=gains, omega_n=2.0, on_invalid="nan", **beyond)
    assert np.isnan(marked[1, 1]).all() and np.isfinite(np.delete(marked.reshape(6, 2), 4, axis=0)).all()
    np.testing.assert_array_equal(marked[0, 2], module.feedback_gain(lambda_p=1.5, int=3.0, omega_n=2.0, **beyond))
    with pytest.raises(ValueError, match="on_invalid"):
        module.feedback_gain(lambda_p=1.5, int=2.0, omega_n=2.0, on_invalid="ignore")


def test_no_sympy_needed(tmp_path):
    """The module imports in a Python that has no sympy (blocked through sys.modules)."""
    design = design_of(EXAMPLES[0])
    _, path = load_emitted(design, tmp_path, "nosympy_mod")
    code = ("import sys; sys.modules['sympy'] = None; sys.path.insert(0, %r); import nosympy_mod; "
            "print(nosympy_mod.feedback_gain(m=12.0, c=2.0, tau=0.01, w=5.0)[0, 0])" % str(tmp_path))
    import subprocess
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert abs(float(out.stdout) - 12.0 * 0.01 * 125.0) < 1e-12  # K[0,0] = m tau w^3
