"""The injection corpus through every emitter and the schedule outputs.

Each text of the corpus goes into a title, a meaning and a unit. The generated files are then
used as their language intends (Python imported and called, C compiled with -Werror and run,
LaTeX typeset by pdflatex, CSV read back, PNG rendered), and the tests assert that no payload
ran (no marker file appeared) and that the text survived as text (it reads back where the
language allows reading it back).
"""
from __future__ import annotations

import csv
import importlib.util
import io
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

import symgain
from symgain.emit import emit

from hostile_helpers import (ALL_PAYLOADS, C_PAYLOADS, LATEX_PAYLOADS, MARK, PLOT_CSV_PAYLOADS,
                             PYTHON_PAYLOADS, cart_text, run_cli)

CC = shutil.which("cc") or shutil.which("gcc")
PDFLATEX = shutil.which("pdflatex")


def _design(title: str, meaning: str, unit: str):
    return symgain.derive(symgain.model_from_text(cart_text(title=title, meaning=meaning, unit=unit), "m.toml"))


def _triples(payloads):
    """The corpus as (title, meaning, unit) triples, each text in each role once."""
    n = len(payloads)
    return [(payloads[k], payloads[(k + 1) % n], payloads[(k + 2) % n]) for k in range(n)]


@pytest.mark.parametrize("texts", _triples(ALL_PAYLOADS), ids=lambda t: repr(t[0])[:30])
def test_python_module_imports_runs_and_keeps_the_text(texts, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    title, meaning, unit = texts
    path = emit(_design(title, meaning, unit), ["python"], tmp_path, name="hostile_mod")[0]
    compile(path.read_text(encoding="utf-8"), str(path), "exec")  # no SyntaxError
    spec = importlib.util.spec_from_file_location(f"hostile_mod_{abs(hash(texts))}", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    gain = module.feedback_gain(m=1.5)
    assert gain.shape == (1, 2)
    assert not (tmp_path / MARK).exists()
    assert title in module.__doc__  # the docstring reads back the exact title
    assert meaning in module.feedback_gain.__doc__ and unit in module.feedback_gain.__doc__


DRIVER = r"""
#include <stdio.h>
#include "hostile.h"
int main(void)
{
    double K[1][2] = {{0.0, 0.0}};
    int code = hostile_feedback_gain(1.5, K);
    printf("%d %.17g %.17g\n", code, K[0][0], K[0][1]);
    return 0;
}
"""


@pytest.mark.skipif(CC is None, reason="no C compiler")
@pytest.mark.parametrize("texts", _triples(C_PAYLOADS + PYTHON_PAYLOADS[:2] + LATEX_PAYLOADS[:2]),
                         ids=lambda t: repr(t[0])[:30])
def test_c_files_compile_run_and_hold_no_extra_code(texts, tmp_path):
    title, meaning, unit = texts
    paths = emit(_design(title, meaning, unit), ["c"], tmp_path, name="hostile")
    (tmp_path / "driver.c").write_text(DRIVER)
    subprocess.run([CC, "-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic", "-o", str(tmp_path / "prog"),
                    str(tmp_path / "driver.c"), str(tmp_path / "hostile.c"), "-lm"], check=True,
                   capture_output=True, cwd=tmp_path)
    out = subprocess.run([str(tmp_path / "prog")], check=True, capture_output=True, text=True, cwd=tmp_path)
    code, k1, k2 = out.stdout.split()
    assert int(code) == 0 and float(k1) == pytest.approx(9.0) and float(k2) == pytest.approx(7.5)
    assert not (tmp_path / MARK).exists()
    for path in paths:  # user text never opens or closes a comment: every comment is ours
        text = path.read_text()
        assert text.count("/*") == text.count("*/")


@pytest.mark.skipif(CC is None, reason="no C compiler")
def test_math_macro_names_compile(tmp_path):
    """Parameters named like <math.h> macros (HUGE_VAL, NAN, M_PI, INFINITY) get mangled."""
    params = "\n".join(f'{n} = {{ sign = "positive", range = [1, 2] }}' for n in ("HUGE_VAL", "NAN", "M_PI", "INFINITY"))
    text = cart_text(params=params).replace('"1/m"', '"HUGE_VAL*NAN/(M_PI*INFINITY)"')
    paths = emit(symgain.derive(symgain.model_from_text(text, "m.toml")), ["c"], tmp_path, name="macros")
    subprocess.run([CC, "-std=c99", "-Wall", "-Werror", "-pedantic", "-c", "-o", str(tmp_path / "m.o"),
                    str(paths[1])], check=True, capture_output=True, cwd=tmp_path)
    assert "double HUGE_VAL_p" in paths[0].read_text()


@pytest.mark.skipif(PDFLATEX is None, reason="no pdflatex")
@pytest.mark.parametrize("texts", _triples(LATEX_PAYLOADS + PYTHON_PAYLOADS[:1] + PLOT_CSV_PAYLOADS[:1]),
                         ids=lambda t: repr(t[0])[:30])
def test_latex_report_typesets_and_shows_the_text(texts, tmp_path):
    title, meaning, unit = texts
    path = emit(_design(title, meaning, unit), ["latex"], tmp_path, name="hostile")[0]
    run = subprocess.run([PDFLATEX, "-no-shell-escape", "-interaction=nonstopmode", "-halt-on-error",
                          path.name], cwd=tmp_path, capture_output=True, text=True, timeout=120)
    assert run.returncode == 0, run.stdout[-1500:]
    assert not (tmp_path / MARK).exists()
    assert "(/etc/hostname" not in run.stdout  # \input was never run
    if shutil.which("pdftotext"):
        shown = subprocess.run(["pdftotext", "hostile.pdf", "-"], cwd=tmp_path, capture_output=True,
                               text=True).stdout
        words = [w for w in title.split() if w.isascii() and w.isalpha() and len(w) > 3]
        for word in words:  # plain words of the title are printed as text
            assert word in shown, (word, shown[:400])


def test_schedule_outputs_keep_units_as_text(tmp_path):
    for k, unit in enumerate(PLOT_CSV_PAYLOADS + C_PAYLOADS[:2]):
        title = PLOT_CSV_PAYLOADS[k % len(PLOT_CSV_PAYLOADS)]
        model = tmp_path / f"s{k}.toml"
        model.write_text(cart_text(title=title, unit=unit), encoding="utf-8")
        out = tmp_path / f"out{k}"
        code, stdout, err = run_cli(["schedule", model, "--over", "m=1:2:5", "--quiet", "-o", out], cwd=tmp_path)
        assert code == 0, err
        table = list(csv.reader(io.StringIO((out / "cart-schedule.csv").read_text())))
        assert len(table) == 6 and table[0][0].startswith("m [") and all(len(r) == len(table[0]) for r in table)
        assert not table[0][0].startswith(("=", "+", "-", "@"))
        source = (out / "cart_schedule.c").read_text()
        assert source.count("/*") == source.count("*/")
        assert (out / "cart-schedule.png").read_bytes()[:4] == b"\x89PNG"
        if CC:
            subprocess.run([CC, "-std=c99", "-Wall", "-Werror", "-pedantic", "-c", "-o", str(out / "s.o"),
                            str(out / "cart_schedule.c")], check=True, capture_output=True)
    assert not (tmp_path / MARK).exists()


def test_step_plot_with_math_text_in_title_and_unit(tmp_path):
    model = tmp_path / "p.toml"
    model.write_text(cart_text(title="$\\frac{1}{$", unit="$x^{$"), encoding="utf-8")
    code, _, err = run_cli(["plot", model, "--step", "--quiet", "-o", tmp_path / "out"])
    assert code == 0, err
