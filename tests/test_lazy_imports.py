"""The command line starts without the heavy libraries; they load inside the commands."""
from __future__ import annotations

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def _modules_after(code: str) -> set[str]:
    probe = code + "\nimport sys\nprint(' '.join(sorted(sys.modules)))"
    out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, cwd=ROOT,
                         env={"PYTHONPATH": str(ROOT), "PATH": ""}, check=True)
    return set(out.stdout.split())


def test_help_does_not_load_sympy_scipy_matplotlib():
    loaded = _modules_after("from symgain.cli import build_parser\nbuild_parser().format_help()")
    assert "symgain.cli.core" in loaded  # the probe did build the parser
    for heavy in ("sympy", "scipy", "matplotlib", "numpy", "flint"):
        assert heavy not in loaded, heavy


def test_top_level_names_still_import():
    loaded = _modules_after("from symgain import derive, check_design, Model")
    assert {"sympy", "symgain.design", "symgain.analysis.check"} <= loaded


def test_cli_tolerance_default_matches_the_check():
    from symgain.analysis.check import DEFAULT_TOLERANCE
    from symgain.cli.core import DEFAULT_TOLERANCE as CLI_DEFAULT

    assert CLI_DEFAULT == DEFAULT_TOLERANCE


def test_cli_points_limit_matches_the_check():
    from symgain.analysis.check import MAX_POINTS
    from symgain.cli.core import MAX_POINTS as CLI_MAX

    assert CLI_MAX == MAX_POINTS


def test_cli_forms_match_the_design_stage():
    from symgain.cli.core import FORMS
    from symgain.design.single_input import FORMS as DESIGN_FORMS

    assert FORMS == DESIGN_FORMS
