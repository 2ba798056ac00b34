"""Property-based fuzzing (hypothesis) of the model-file reader, the API constructors and the options.

Whatever the input, the outcome is a valid result or the library's own error with one bounded
line; the command line exits 0, 1 or 2 (never 3); no payload runs (the marker never appears).
"""
from __future__ import annotations

import math

import pytest
import sympy as sp
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from symgain.errors import SymgainError
from symgain.model import Model, Parameter, TargetSpec
from symgain.model.toml_file import model_from_text

from hostile_helpers import ALL_PAYLOADS, MARK, cart_text, one_bounded_line, run_cli, toml_string

PAYLOAD = f"__import__('os').system('touch {MARK}')"
FUZZ = settings(max_examples=60, deadline=None, suppress_health_check=list(HealthCheck))

SNIPPETS = ["[", "]", "{", "}", '"', "'", "=", "\n", "#", ",", "inf", "nan", "true", "-0", "1e999",
            "9" * 50, "[[" * 30, "\\u0000", "\\", "1/0", "m^-1", "s", "E", "I", "sqrt(-1)", PAYLOAD,
            "\u0430", "\uff4d", "[parameters]", "[plant]", "[feedback]", "poles = []", "A = 1",
            'sign = "nonzero"', "range = [2, 1]", "nominal = 0"]

VALUES = st.one_of(
    st.sampled_from(["0", "1", "-1", "m", "1/m", "m^2", "1/(m-m)", "sin(1)^2+cos(1)^2-1", "1e-400",
                     "10^1000", "(10^399)^11", PAYLOAD, "m.__class__", "lambda: 1", "abs", "I", "zoo"]),
    st.text(max_size=20),
    st.integers(min_value=-10**30, max_value=10**30),
    st.floats(allow_nan=True, allow_infinity=True),
    st.booleans(),
)


def _toml_value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return "nan" if math.isnan(value) else ("inf" if value > 0 else "-inf") if math.isinf(value) else repr(value)
    if isinstance(value, int):
        return str(value)
    return toml_string(value)


def _outcome(call):
    """Run *call*: a result or the library's error with a bounded one-line message."""
    try:
        return call()
    except SymgainError as exc:
        message = str(exc)
        assert "\n" not in message and len(message) <= 300, message
        return exc


@FUZZ
@given(position=st.integers(min_value=0, max_value=400), snippet=st.sampled_from(SNIPPETS),
       cut=st.integers(min_value=0, max_value=20))
def test_mutated_model_files(position, snippet, cut):
    text = cart_text()
    position = min(position, len(text))
    mutated = text[:position] + snippet + text[position + cut:]
    _outcome(lambda: model_from_text(mutated, "fuzz.toml"))


@FUZZ
@given(a=st.lists(st.lists(VALUES, min_size=2, max_size=2), min_size=2, max_size=2),
       b=st.lists(st.lists(VALUES, min_size=1, max_size=1), min_size=2, max_size=2),
       poles=st.lists(VALUES, min_size=0, max_size=3),
       sign=st.sampled_from(["positive", "real", "nonzero", "nonnegative", "bogus"]),
       low=VALUES, high=VALUES, nominal=st.one_of(st.none(), VALUES))
def test_model_file_values(tmp_path_factory, a, b, poles, sign, low, high, nominal):
    rows = lambda m: "[" + ", ".join("[" + ", ".join(_toml_value(v) for v in r) + "]" for r in m) + "]"  # noqa
    params = f'm = {{ sign = "{sign}", range = [{_toml_value(low)}, {_toml_value(high)}]' \
             + (f", nominal = {_toml_value(nominal)}" if nominal is not None else "") + " }"
    text = cart_text(params=params, poles="[" + ", ".join(_toml_value(p) for p in poles) + "]")
    text = text.replace('A = [["0", "1"], ["0", "0"]]', f"A = {rows(a)}").replace('B = [["0"], ["1/m"]]',
                                                                                  f"B = {rows(b)}")
    _outcome(lambda: model_from_text(text, "fuzz.toml"))


@FUZZ
@given(name=st.one_of(st.text(max_size=12), st.sampled_from(["m", "m\n", "e", "E", "s", "int", "HUGE_VAL"]),
                      st.integers(), st.none()),
       sign=st.one_of(st.sampled_from(["positive", "real", "nonzero", "nonnegative"]), VALUES),
       range_=st.one_of(st.none(), st.tuples(VALUES, VALUES), VALUES, st.lists(VALUES, max_size=3)),
       nominal=st.one_of(st.none(), VALUES), unit=st.one_of(st.text(max_size=10), VALUES))
def test_parameter_declare(name, sign, range_, nominal, unit):
    result = _outcome(lambda: Parameter.declare(name, sign=sign, range=range_, nominal=nominal, unit=unit))
    if isinstance(result, Parameter):
        for value in [result.nominal, *(result.range or ())]:
            assert value is None or math.isfinite(value)


@FUZZ
@given(entries=st.lists(VALUES, min_size=6, max_size=6),
       states=st.one_of(st.just(("p", "v")), st.just("pv"), st.lists(st.text(max_size=4), max_size=3)),
       feedforward=st.one_of(st.booleans(), VALUES),
       poles=st.lists(st.one_of(VALUES, st.sampled_from([PAYLOAD, "-1", "-w"])), max_size=3))
def test_api_model_constructor(tmp_path_factory, entries, states, feedforward, poles):
    m = Parameter.declare("m", sign="positive", range=(1, 2))

    def build():
        model = Model(name="cart", parameters=(m,), states=states, inputs=("F",),
                      A=[entries[0:2], entries[2:4]], B=[[entries[4]], [entries[5]]],
                      feedforward=feedforward, feedback=TargetSpec("poles", {"poles": poles}))
        from symgain.design import derive

        return derive(model)
    _outcome(build)


OPTION_VALUES = st.one_of(st.sampled_from(["0", "-1", "1", "3", "nan", "inf", "1e999", "9" * 25, "", "m", "x",
                                           "m=1:2:3", "m=1:2:1", "m=2:1:3", "m=1:inf:3", "m=:::", "\x00",
                                           "a\nb", "python", "c", "latex", "json", "single", "quad",
                                           PAYLOAD, "class", "--help"]),
                          st.text(max_size=12))


@settings(max_examples=40, deadline=None, suppress_health_check=list(HealthCheck))
@given(command=st.sampled_from(["derive", "check", "emit", "schedule", "sensitivity"]),
       options=st.lists(st.tuples(st.sampled_from(["--points", "--seed", "--tolerance", "--over", "--to",
                                                   "--name", "--precision", "--json", "--quiet"]),
                                  OPTION_VALUES), max_size=3))
def test_command_options(tmp_path_factory, command, options):
    folder = tmp_path_factory.mktemp("cli")
    model = folder / "m.toml"
    model.write_text(cart_text(), encoding="utf-8")
    args = [command, str(model)]
    for flag, value in options:
        args += [flag] if flag in ("--json", "--quiet") else [flag, value]
    if command in ("emit", "schedule"):
        args += ["-o", str(folder / "out")]
    code, _, err = run_cli(args, cwd=folder)
    assert code in (0, 1, 2), (args, code, err)
    if code == 2 and "usage:" not in err:
        assert one_bounded_line(err), (args, err)
    assert not (folder / MARK).exists()


@settings(max_examples=10, deadline=None, suppress_health_check=list(HealthCheck))
@given(command=st.sampled_from(["robust", "plot"]),
       options=st.lists(st.tuples(st.sampled_from(["--points", "--seed", "--mismatch", "--gains", "--step"]),
                                  OPTION_VALUES), max_size=3))
def test_robust_and_plot_options(tmp_path_factory, command, options):
    folder = tmp_path_factory.mktemp("cli")
    model = folder / "m.toml"
    model.write_text(cart_text(), encoding="utf-8")
    args = [command, str(model), "--quiet", "-o", str(folder / "out")]
    args += ["--mismatch", "m"] if command == "robust" else ["--step"]
    for flag, value in options:
        args += [flag] if flag == "--step" else [flag, value]
    code, _, err = run_cli(args, cwd=folder)
    assert code in (0, 1, 2), (args, code, err)
    if code == 2:
        assert one_bounded_line(err), (args, err)
    assert not (folder / MARK).exists()
