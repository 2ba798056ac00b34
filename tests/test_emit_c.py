"""The emitted C, compiled with the system compiler in strict C99 and run through a small
driver written here; results compared with the symbolic gains evaluated by mpmath."""
import shutil
import subprocess

import numpy as np
import pytest

from emit_helpers import (EXAMPLES, IDS, mark_known_cancellation, all_values, design_of, functions_of, normwise_error,
                          reference, relative_error)
from symgain.emit import emit

CC = shutil.which("cc") or shutil.which("gcc")
FLAGS = ["-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic"]
SENTINEL = -12345.0
pytestmark = pytest.mark.skipif(CC is None, reason="no C compiler (cc) on this machine")


def driver(prefix: str, fn, ctype: str) -> str:
    """Reads one point per line (the arguments in order), prints the return code and the matrix."""
    rows, cols = fn.shape
    n = len(fn.arguments)
    args = ", ".join(f"({ctype})a[{i}]" for i in range(n))
    return f"""#include <stdio.h>
#include "{prefix}.h"
int main(void)
{{
    double a[{n} + 1];
    for (;;) {{
        {ctype} G[{rows}][{cols}];
        int i, j, rc;
        for (i = 0; i < {n}; i++) {{
            if (scanf("%lf", &a[i]) != 1) {{
                return 0;
            }}
        }}
        for (i = 0; i < {rows}; i++) {{
            for (j = 0; j < {cols}; j++) {{
                G[i][j] = ({ctype}){SENTINEL!r};
            }}
        }}
        rc = {prefix}_{fn.name}({args}{', ' if n else ''}G);
        printf("%d", rc);
        for (i = 0; i < {rows}; i++) {{
            for (j = 0; j < {cols}; j++) {{
                printf(" %.17g", (double)G[i][j]);
            }}
        }}
        printf("\\n");
    }}
}}
"""


def build_and_run(design, fn, folder, prefix, precision, values, flags=()):
    paths = emit(design, ["c"], folder, name=prefix, precision=precision)
    ctype = "float" if precision == "single" else "double"
    (folder / "driver.c").write_text(driver(prefix, fn, ctype))
    exe = folder / "prog"
    subprocess.run([CC, *FLAGS, *flags, "-o", str(exe), str(folder / "driver.c"), str(paths[1]), "-lm"],
                   check=True, capture_output=True, text=True)
    n = len(next(iter(values.values())))
    text = "\n".join(" ".join(repr(float(values[a][i])) for a in fn.arguments) for i in range(n)) + "\n"
    out = subprocess.run([str(exe)], input=text, capture_output=True, text=True, check=True).stdout
    rows = [list(map(float, line.split())) for line in out.splitlines()]
    codes = np.array([r[0] for r in rows], dtype=int)
    mats = np.array([r[1:] for r in rows]).reshape(n, *fn.shape)
    return codes, mats, paths


@pytest.mark.parametrize("precision,tolerance", [("double", 1e-12), ("single", 1e-5)])
@pytest.mark.parametrize("path", EXAMPLES, ids=IDS)
def test_compiled_gain_matches_symbolic(path, precision, tolerance, tmp_path, request):
    mark_known_cancellation(request, path)
    design = design_of(path)
    for fn in functions_of(design):
        values = all_values(design, fn, 60)
        codes, got, paths = build_and_run(design, fn, tmp_path, "gains", precision, values)
        assert (codes == 0).all()
        ref = reference(fn, values)
        if precision == "double":
            assert relative_error(got, ref) < tolerance, fn.name
        else:  # float: relative to the largest entry of each matrix (see normwise_error)
            assert normwise_error(got, ref) < tolerance, fn.name
        source = paths[1].read_text()
        assert "malloc" not in source and "#include <math.h>" in source
        assert all(line.startswith(("#include <math.h>", '#include "gains.h"'))
                   for line in source.splitlines() if line.startswith("#include"))
        if precision == "single":
            assert "double" not in source.split("*/", 1)[1]  # float only after the comment head


def test_condition_error_code_and_untouched_matrix(tmp_path):
    design = design_of("odd")  # parameters lambda, int (a C keyword), omega_n; condition int != 0
    (fn,) = functions_of(design)
    values = {"lambda": np.array([1.5, 1.5, 1.2]), "int": np.array([2.0, 0.0, 1e-14]),
              "omega_n": np.array([2.0, 2.0, 2.5])}
    # int = 0 and 1e-14 lie outside int's range [0.5, 2]: compiled without the range tests to reach
    # the condition (with them: -5, the range code of the second of three arguments)
    codes, got, paths = build_and_run(design, fn, tmp_path, "odd", "double", values, flags=["-DODD_NO_RANGE_CHECKS"])
    assert codes.tolist() == [0, 1, 1]
    assert build_and_run(design, fn, tmp_path, "odd", "double", values)[0].tolist() == [0, -5, -5]
    # K = [2 lambda omega_n^2 / int, (3 lambda omega_n - 1) / int], worked by hand for poles -w, -2w
    np.testing.assert_allclose(got[0], [[2 * 1.5 * 4 / 2, (3 * 1.5 * 2 - 1) / 2]], rtol=1e-15)
    assert (got[1:] == SENTINEL).all()  # untouched on failure
    header = paths[0].read_text()
    assert "int odd_feedback_gain(double lambda, double int_p, double omega_n, double K[1][2]);" in header
    assert "returns 1 when int == 0" in header
    assert "int -> int_p" in header
    assert "lambda: cart mass [kg], > 0, range [1, 2]" in header
    assert "returns -1 when lambda is not finite and > 0" in header


def test_cse_locals_and_single_precision_literals(tmp_path):
    design = design_of(EXAMPLES[0])
    header, source = (p.read_text() for p in emit(design, ["c"], tmp_path, name="conv", precision="single"))
    body = source.split("{", 1)[1]
    assert "const float t0 = " in body
    assert "powf(" in body or "cbrtf(" in body  # the Bessel pattern's 15^(1/3) and 15^(2/3)
    assert "1.0f/5.0f" in body or "2.0f/5.0f" in body
    assert "float K[1][3]" in header
