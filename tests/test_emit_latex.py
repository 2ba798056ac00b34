"""The LaTeX report: every formula read back with latex2sympy2 equals the design's expression
(numerically at random points, symbolically for small ones), and the document compiles with
pdflatex without errors and without any line running into the margin."""
from pathlib import Path
import re
import shutil
import subprocess
import warnings

import mpmath
import numpy as np
import pytest
import sympy as sp

from emit_helpers import EXAMPLES, IDS, design_of
from symgain.emit import emit
from symgain.emit.latex import CAUTION
from symgain.model import S

with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    from latex2sympy2 import latex2sympy

PDFLATEX = shutil.which("pdflatex")
_LAYOUT = [(r"\\", " "), (r"\Bigl", ""), (r"\Bigr", ""), (r"\qquad", " "), (r"\quad", " "), ("&", " ")]


def formulas(report: str) -> list[tuple[str, str]]:
    """(key, source) of every formula line, marked ``%@ KEY`` by the emitter."""
    return [(line.rsplit("%@", 1)[1].strip(), line.rsplit("%@", 1)[0])
            for line in report.splitlines() if "%@" in line]


def sides(source: str):
    """Layout removed (alignment, line breaks, bracket sizes, labels); split at the relation."""
    head, matrix = (source.split(r"\begin{bmatrix}", 1) + [""])[:2]
    matrix, tail = (matrix.split(r"\end{bmatrix}", 1) + [""])[:2]
    for old, new in _LAYOUT:
        head, tail = head.replace(old, new), tail.replace(old, new)
    source = head + (r"\begin{bmatrix}" + matrix + r"\end{bmatrix}" if matrix else "") + tail
    if r"\colon" in source:
        source = source.split(r"\colon", 1)[1]
    if r"\neq" in source:
        left, right = source.split(r"\neq", 1)
        return left, right, "ne"
    if "=" in source:
        left, right = source.split("=", 1)
        return left, right, "eq"
    return "", source, "none"


def parse(code: str, symbols: dict):
    """latex2sympy2, then its symbols mapped by name onto the design's symbols."""
    # latex2sympy2 reads a lone d as a differential and e as Euler's number: name them as words
    code = re.sub(r"(?<![\\A-Za-z])([de])(?![A-Za-z])", r"\\mathit{\1}", code)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        expr = latex2sympy(code.strip())
    mapping = {}
    for sym in expr.free_symbols:
        name = re.sub(r"\\mathit|[\\{}]", "", sym.name)
        digits = re.sub(r"^([A-Za-z]+)_(\d+)$", r"\1\2", name)  # m1 is typeset m_{1}, like m_1
        mapping[sym] = symbols.get(name, symbols.get(digits, sp.I if name == "i" else sp.E if name == "e" else sym))
    return expr.xreplace(mapping)


def expected(design, key: str):
    """What the formula with this key must equal, taken from the design object itself."""
    indices = [int(i) for i in re.findall(r"\[(\d+)\]", key)]
    path = re.sub(r"\[\d+\]", "", key).split(".")
    if path[0] == "plant":
        value = getattr(design.model, path[1])
    elif path[0] == "sampled":  # the sampled plant of a sampled-data design: Phi, Gamma, valid_when
        value = getattr(design.sampled, path[1])
    else:
        part = getattr(design, path[0])
        if path[1] == "extra":
            value = part.extra[path[2]]
        elif path[1] == "sensitivity":  # dK[i, j]/dp, from the design's sensitivity table
            from symgain.analysis.sensitivity import sensitivity_table

            return sensitivity_table(design)[path[0]][(indices[0], indices[1], path[2])]
        elif path[1] == "target_poles":
            value = part.target.poles
        else:
            value = part.step(path[1]).value
    while indices:
        if isinstance(value, sp.MatrixBase) and len(indices) == 2:
            return value[indices[0], indices[1]]
        value = value[indices.pop(0)]
    return value


def same(got, want, symbols, rng) -> bool:
    """Equal at 4 random points (parameters in their ranges, other symbols in [0.5, 2])."""
    if isinstance(want, sp.MatrixBase):
        return got.shape == want.shape and all(same(g, w, symbols, rng) for g, w in zip(got, want))
    got, want = sp.sympify(got), sp.sympify(want)
    if want.atoms(sp.MatrixSymbol):  # a formula in whole matrices (N = ...): compared as scalars
        names = {m.name: sp.Symbol(m.name) for m in want.atoms(sp.MatrixSymbol)}
        want = sp.sympify(str(want), locals=names)  # our own printed string, not user text
    free = sorted(got.free_symbols | want.free_symbols, key=str)
    if not free:
        return abs(complex(got.evalf(30)) - complex(want.evalf(30))) <= 1e-12 * (1 + abs(complex(want.evalf(30))))
    if sp.count_ops(want) < 40 and sp.cancel(got - want) == 0:
        return True
    f = sp.lambdify(free, [got, want], modules="mpmath")
    with mpmath.workdps(30):
        for _ in range(4):
            point = [mpmath.mpf(rng.uniform(*symbols[s.name + "#range"]) if s.name + "#range" in symbols
                                else rng.uniform(0.5, 2.0)) for s in free]
            g, w = (complex(v) for v in f(*point))
            if abs(g - w) > 1e-10 * max(1.0, abs(w)):
                return False
    return True


def check_report(design, report: str) -> int:
    symbols = {p.name: p.symbol for p in design.model.parameters}
    symbols.update({f"{p.name}#range": p.range for p in design.model.parameters if p.range})
    symbols["s"] = S
    for part in design.parts():
        gs = part.extra.get("gain_symbols")
        if isinstance(gs, sp.MatrixBase):
            symbols.update({str(s): s for s in gs})
        symbols.update({str(s): s for s in part.free_gains})
    rng = np.random.default_rng(5)
    items = formulas(report)
    for key, source in items:
        want = expected(design, key)
        left, right, relation = sides(source)
        if isinstance(want, sp.Eq):
            assert relation == "eq", key
            assert same(parse(left, symbols), want.lhs, symbols, rng), key
            assert same(parse(right, symbols), want.rhs, symbols, rng), key
        elif isinstance(want, sp.Ne):
            assert relation == "ne" and same(parse(left, symbols), want.lhs - want.rhs, symbols, rng), key
        else:
            assert same(parse(right, symbols), want, symbols, rng), (key, right)
    return len(items)


@pytest.mark.parametrize("path", EXAMPLES + ["odd"], ids=IDS + ["odd"])
def test_formulas_read_back(path, tmp_path):
    design = design_of(path)
    (tex,) = emit(design, ["latex"], tmp_path)
    report = tex.read_text()
    keys = {k for k, _ in formulas(report)}
    for part in design.parts():  # every designed gain entry is shown, one by one
        symbols = part.extra.get("gain_symbols")
        for i in range(part.gain.rows):
            for j in range(part.gain.cols):
                key = f"{part.part}.solution[{i}][{j}]"
                fixed = symbols is not None and symbols.shape == part.gain.shape and (
                    not isinstance(symbols[i, j], sp.Symbol) or symbols[i, j] == part.gain[i, j])
                if fixed:  # fixed by the pattern (0 = 0) or a free gain (k_21 = k_21): not repeated
                    assert key not in keys
                else:
                    assert key in keys or part.step("solution") is None
    assert check_report(design, report) >= 5
    assert "Safety caution" in report and report.index("Safety caution") > report.index("Numeric cross-check")


def test_names_and_escaping(tmp_path):
    design = design_of("odd")  # omega_n, lambda, int; a meaning with & and %
    report = emit(design, ["latex"], tmp_path)[0].read_text()
    assert r"\omega_{n}" in report and r"\lambda" in report and r"\mathit{int}" in report
    assert r"actuator gain \& 100\% sign" in report
    assert r"\mathit{int} &\neq 0" in report
    assert CAUTION.split(".")[0] in report


@pytest.mark.skipif(PDFLATEX is None, reason="pdflatex is not installed (Debian: texlive-latex-base); "
                    "the report compilation test cannot run here")
@pytest.mark.parametrize("path", EXAMPLES + ["odd"], ids=IDS + ["odd"])
def test_report_compiles_without_overfull_lines(path, tmp_path):
    design = design_of(path)
    (tex,) = emit(design, ["latex"], tmp_path, name="report")
    run = subprocess.run([PDFLATEX, "-interaction=nonstopmode", "-halt-on-error", tex.name],
                         cwd=tmp_path, capture_output=True, text=True, timeout=120)
    log = (tmp_path / "report.log").read_text(errors="replace")
    assert run.returncode == 0, log[-2000:]
    assert (tmp_path / "report.pdf").stat().st_size > 1000
    assert not re.search(r"^! ", log, re.M), log
    overfull = re.findall(r"Overfull \\hbox \((\d+\.\d+)pt too wide\)", log)
    assert not overfull, f"lines into the margin: {overfull}"


def test_report_lists_gain_sensitivities():
    """Issue 6: the partial derivatives of the gains appear in the report, one keyed formula each."""
    from symgain.emit.latex import latex_report
    from symgain.model.toml_file import load_model
    from symgain.design import derive

    design = derive(load_model(Path(__file__).resolve().parents[1] / "examples" / "greenhouse_cart.toml"))
    report = latex_report(design, n_points=2)
    assert "Sensitivity of the gains" in report
    keys = [line.rsplit("%@ ", 1)[1] for line in report.splitlines() if "%@ feedback.sensitivity." in line]
    # K = [2 m w^2, 3 m w - c]: nonzero derivatives d/dm (2), d/dc (1), d/dw (2) -> 5 formulas
    assert sorted(keys) == sorted(["feedback.sensitivity.m[0][0]", "feedback.sensitivity.m[0][1]",
                                   "feedback.sensitivity.c[0][1]", "feedback.sensitivity.w[0][0]",
                                   "feedback.sensitivity.w[0][1]"])
