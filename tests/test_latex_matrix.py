"""LaTeX plant matrices: the name rule, the round trip through sympy's own LaTeX, bad input."""
import subprocess
import sys

import pytest
import sympy as sp
from hypothesis import given, settings
from hypothesis import strategies as st

from symgain.errors import ExpressionError, ModelError, Where
from symgain.model.latex_matrix import latex_name_to_identifier, parse_latex_matrix
from symgain.model.toml_file import model_from_text

m, c, k = sp.symbols("m c k", positive=True)
omega_n, m_p, ell, theta0 = sp.symbols("omega_n m_p ell theta0", positive=True)
SYMBOLS = {"m": m, "c": c, "k": k, "omega_n": omega_n, "m_p": m_p, "ell": ell, "theta0": theta0}


@pytest.mark.parametrize("latex, name", [
    (r"\omega_n", "omega_n"), (r"\omega_{n}", "omega_n"), ("m_{p}", "m_p"), (r"\ell", "ell"),
    (r"k_{\theta}", "k_theta"), (r"\mathrm{km}", "km"), ("J_m", "J_m"),
])
def test_name_rule(latex, name):
    assert latex_name_to_identifier(latex) == name


@pytest.mark.parametrize("env", ["bmatrix", "pmatrix", "matrix"])
def test_environments(env):
    text = rf"\begin{{{env}}} 0 & 1 \\ -\frac{{k}}{{m}} & -\frac{{c}}{{m}} \end{{{env}}}"
    assert parse_latex_matrix(text, SYMBOLS) == sp.Matrix([[0, 1], [-k / m, -c / m]])


def test_names_map_to_declared_symbols_with_their_signs():
    A = parse_latex_matrix(r"\begin{bmatrix} \omega_n^2 & \frac{m_{p}}{\ell} \end{bmatrix}", SYMBOLS)
    assert A == sp.Matrix([[omega_n**2, m_p / ell]])
    assert A.free_symbols == {omega_n, m_p, ell}  # the declared (positive) symbols themselves


def test_numbers_are_exact_and_functions_kept():
    A = parse_latex_matrix(r"\begin{bmatrix} 0.1 & \sqrt{\frac{k}{m}} & \cos\theta_0 & 2\pi \end{bmatrix}",
                           SYMBOLS)
    assert A == sp.Matrix([[sp.Rational(1, 10), sp.sqrt(k / m), sp.cos(theta0), 2 * sp.pi]])


_atoms = st.sampled_from([m, c, k, omega_n, m_p, ell, sp.Integer(2), sp.Rational(3, 4)])
_entries = st.recursive(_atoms, lambda inner: st.one_of(
    st.tuples(inner, inner).map(lambda t: t[0] + t[1]),
    st.tuples(inner, inner).map(lambda t: t[0] * t[1]),
    st.tuples(inner, inner).map(lambda t: t[0] / t[1]),
    inner.map(lambda e: -e),
    _atoms.map(sp.sqrt), inner.map(sp.sin), inner.map(sp.exp)), max_leaves=5)  # real entries


@settings(max_examples=12, deadline=None)
@given(st.lists(_entries, min_size=4, max_size=4))
def test_round_trip_through_sympy_latex(entries):
    """sympy.latex(M) read back gives M again (sympy's printer is the outside reference)."""
    M = sp.Matrix(2, 2, entries)
    back = parse_latex_matrix(sp.latex(M), SYMBOLS)
    assert (back - M).applyfunc(sp.simplify) == sp.zeros(2, 2)


def test_round_trip_with_digit_subscript_name():
    M = sp.Matrix([[sp.cos(theta0), 1]])
    assert parse_latex_matrix(sp.latex(M), SYMBOLS) == M


@pytest.mark.parametrize("text, fragment", [
    (r"\begin{bmatrix} 0 & 1 \\ -k \end{bmatrix}", "row 1 has 1 entries but row 0 has 2"),
    (r"\begin{bmatrix} q & 1 \end{bmatrix}", "'q'"),
    (r"\begin{bmatrix} \omega_c \end{bmatrix}", r"'\omega_c'"),
    (r"\begin{bmatrix} \frac{1}{ \end{bmatrix}", r"'\frac{1}{'"),
    (r"\begin{bmatrix} \int k \end{bmatrix}", r"unsupported LaTeX command '\int'"),
    (r"\begin{bmatrix} k! \end{bmatrix}", "factorial"),
    (r"\begin{array}{c} k \end{array}", "environment 'array'"),
    (r"k + 1", "expected a LaTeX matrix"),
])
def test_bad_latex_is_one_line_naming_the_fragment(text, fragment):
    with pytest.raises(ModelError) as info:
        parse_latex_matrix(text, SYMBOLS, where=Where("f.toml", "plant.A"))
    message = str(info.value)
    assert "\n" not in message and message.startswith("f.toml: plant.A")
    assert fragment in message


def test_unreadable_cell_names_row_and_column():
    with pytest.raises(ExpressionError, match=r"plant\.A\[1\]\[0\]: cannot read LaTeX '\\frac\{k\}'"):
        parse_latex_matrix(r"\begin{bmatrix} 1 & 2 \\ \frac{k} & 3 \end{bmatrix}", SYMBOLS,
                           where=Where("f.toml", "plant.A"))


def test_unbalanced_braces_name_the_row():
    with pytest.raises(ModelError, match=r"unbalanced braces in row 1 .*'\\frac\{k\}\{ & 3'"):
        parse_latex_matrix(r"\begin{bmatrix} 1 & 2 \\ \frac{k}{ & 3 \end{bmatrix}", SYMBOLS)


@pytest.mark.parametrize("command", [r"\input{/etc/passwd}", r"\write18{rm -rf /}", r"\def\x{1}",
                                     r"\catcode`\a=13", r"\immediate\write18{ls}"])
def test_tex_engine_commands_are_refused(command):
    with pytest.raises(ModelError, match="refused"):
        parse_latex_matrix(rf"\begin{{bmatrix}} {command} & 1 \end{{bmatrix}}", SYMBOLS)


RAGGED = r"""
name = "bad"
[parameters]
k = { sign = "positive", range = [1, 2] }
[plant]
states = ["p", "v"]
inputs = ["F"]
A = '\begin{bmatrix} 0 & 1 \\ -k \end{bmatrix}'
B = [["0"], ["1"]]
[feedback]
poles = ["-1", "-2"]
"""


def test_model_file_with_latex_matrices():
    text = RAGGED.replace(r"\\ -k \end", r"\\ -k & 0 \end")
    model = model_from_text(text, "ok.toml")
    assert model.A == sp.Matrix([[0, 1], [-sp.Symbol("k", positive=True), 0]])


def test_ragged_latex_in_a_model_file_exits_2_with_one_line(tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text(RAGGED)
    run = subprocess.run([sys.executable, "-m", "symgain", "derive", str(path)], capture_output=True, text=True)
    assert run.returncode == 2
    assert run.stdout == ""
    lines = run.stderr.strip().splitlines()
    assert len(lines) == 1 and "plant.A" in lines[0] and "row 1 has 1 entries" in lines[0]
