"""Commands derive, check and demo."""
from __future__ import annotations

import argparse
import sys
import time
from importlib import resources

# sympy, scipy and the design stage are imported inside the commands (fast --help)

DEFAULT_TOLERANCE = 1e-6  # the same as symgain.analysis.check.DEFAULT_TOLERANCE (a test keeps them equal)
MAX_POINTS = 100_000  # the same as symgain.analysis.check.MAX_POINTS

_FMT = argparse.RawDescriptionHelpFormatter


FORMS = ("auto", "expanded", "compact")  # symgain.design.single_input.FORMS (a test keeps them equal)


def add_form_option(p) -> None:
    """The --form option shared by derive, check and emit."""
    p.add_argument("--form", choices=FORMS, default="auto",
                   help="how gains are written: expanded (one formula each), compact (a sequence of named "
                   "definitions, for large plants) or auto (default: expanded unless it would be large)")


def _add_check_options(p):
    from . import positive_number, whole_number

    p.add_argument("--points", type=whole_number(1, MAX_POINTS), default=20, metavar="N",
                   help=f"parameter points to sample, nominal included (default 20, at most {MAX_POINTS})")
    p.add_argument("--seed", type=whole_number(0, 2**32 - 1), default=0,
                   help="random seed for the sampled points (default 0; 0 to 2^32 - 1)")
    p.add_argument("--tolerance", type=positive_number, default=DEFAULT_TOLERANCE,
                   help=f"largest accepted relative error (default {DEFAULT_TOLERANCE:g})")


def add_to(sub) -> None:
    p = sub.add_parser("derive", help="derive the gain formulas of a model file", formatter_class=_FMT,
                       description="Derive closed-form gains, the target and the conditions under which "
                       "the formulas hold.",
                       epilog="example:\n  symgain derive examples/greenhouse_cart.toml --json")
    p.add_argument("model", help="model file (TOML)")
    p.add_argument("--json", action="store_true", help="print the machine-readable JSON result")
    add_form_option(p)
    p.add_argument("--sensitivity", action="store_true",
                   help="with --json: include the partial derivatives dK/dp also for gains in compact "
                   "form (expanded gains always carry them)")
    p.add_argument("--at", metavar="NAME=VALUE,...",
                   help="also print every gain as a number at this point (other parameters at nominal)")
    p.set_defaults(run=run_derive)

    p = sub.add_parser("check", help="cross-check the formulas numerically against scipy",
                       formatter_class=_FMT,
                       description="Evaluate the formulas at sampled parameter points and compare with "
                       "scipy.signal.place_poles and the target polynomial. Exit code 1 when a point fails.",
                       epilog="example:\n  symgain check examples/greenhouse_cart.toml --points 50")
    p.add_argument("model", help="model file (TOML)")
    _add_check_options(p)
    add_form_option(p)
    p.set_defaults(run=run_check)

    p = sub.add_parser("demo", help="derive and check the built-in example", formatter_class=_FMT,
                       description="Run derive and check on an example model shipped with symgain.",
                       epilog="examples:\n  symgain demo\n  symgain demo --write-model conveyor.toml")
    p.add_argument("--write-model", metavar="FILE",
                   help="write the built-in model file to FILE (to edit or to try other commands on)")
    p.set_defaults(run=run_demo)


def parse_point(text: str, model) -> dict[str, float]:
    """``m=30,w=2`` -> {"m": 30.0, "w": 2.0}, names checked against the model."""
    import math

    from ..errors import ModelError, printable

    point = {}
    for item in filter(None, (t.strip() for t in text.split(","))):
        name, eq, value = item.partition("=")
        name = name.strip()
        if not eq or name not in model.symbols:
            raise ModelError(f"--at expects NAME=VALUE with declared names, found {item!r}; declared: "
                             + (", ".join(model.symbols) or "none"))
        try:
            point[name] = float(value)
        except ValueError:
            raise ModelError(f"--at {name}: {printable(value.strip(), 40)!r} is not a number") from None
        if not math.isfinite(point[name]):
            raise ModelError(f"--at {name}: the value must be a finite number")
        parameter = model.parameter(name)
        if not parameter.admits(point[name]):
            raise ModelError(f"--at {name} = {point[name]:g} contradicts the declared sign ({parameter.sign})")
    return point


def _values_at(design, point) -> list[str]:
    from ..analysis.evaluate import GainEvaluator
    from ..analysis.loops import settle_free_gains

    settled, note = settle_free_gains(design)
    evaluator = GainEvaluator(settled)
    gains, valid = evaluator(point)
    where = ", ".join(f"{k} = {v:g}" for k, v in {**design.model.nominal_values(), **point}.items())
    lines = [f"gains at {where or 'the numeric plant'}:"] + ([f"  note: {note}"] if note else [])
    lines += [f"  {e.label} = {float(g):.6g}" for e, g in zip(evaluator.entries, gains)]
    if not bool(valid):
        failed = evaluator.failed_conditions(point)
        lines.append("  NOT valid here: " + ("; ".join(failed) if failed else "a gain is not finite"))
    return lines


def run_derive(args) -> int:
    from . import derive_and_warn
    from ..emit.json import design_to_json
    from ..emit.terminal import format_design
    from ..model.toml_file import load_model

    model = load_model(args.model)
    point = parse_point(args.at, model) if args.at else None
    design = derive_and_warn(model, form=args.form)
    if args.json:
        print(design_to_json(design, sensitivity=True if args.sensitivity else None))
        return 0
    print(format_design(design), end="")
    if point is not None:
        print("\n" + "\n".join(_values_at(design, point)))
    return 0


def _print_check(design, args) -> int:
    from ..analysis.check import check_design
    from ..emit.terminal import format_check

    report = check_design(design, n_points=args.points, seed=args.seed, tolerance=args.tolerance)
    print(format_check(report, [p.name for p in design.model.parameters]), end="")
    print("check passed" if report.passed else "check FAILED")
    return 0 if report.passed else 1


def run_check(args) -> int:
    from . import derive_and_warn
    from ..errors import ClosedFormLimitation
    from ..model.toml_file import load_model

    model = load_model(args.model)
    try:
        design = derive_and_warn(model, form=args.form)
    except ClosedFormLimitation as exc:  # no closed form: check numerically where a pattern allows it
        return _check_numerically(model, exc, args)
    return _print_check(design, args)


def _check_numerically(model, exc: ClosedFormLimitation, args) -> int:
    """Exit 4 (no closed form) after a numeric check at the sampled points; 1 if that check fails."""
    from ..analysis.numeric_branches import check_without_closed_form

    key = exc.where.key or ""
    part = key.split(".")[0]
    if not key.endswith(".pattern") or getattr(model, part, None) is None:
        print(f"symgain: no closed form: {exc}", file=sys.stderr)
        return 4
    points = check_without_closed_form(model, part, args.points, args.seed, args.tolerance)
    names = [p.name for p in model.parameters]
    print(f"{part}: no closed form ({exc.what})")
    print(f"numeric check of the pattern at {len(points)} points (seed {args.seed}): real gains found by "
          "solving the coefficient equations numerically, each closed loop compared with the target")
    failed = 0
    for p in points:
        label = "nominal" if p.index == 0 else str(p.index)
        values = ", ".join(f"{n} = {p.values[n]:.4g}" for n in names)
        bad = p.gains == 0 or p.worst_error is None or p.worst_error > args.tolerance
        failed += bad
        err = "-" if p.worst_error is None else f"{p.worst_error:.1e}"
        print(f"  {label}: {values}: {p.gains} real gain{'s' if p.gains != 1 else ''}, worst closed-loop "
              f"err {err}  {'FAILED' if bad else 'ok'}")
    print("numeric check " + ("FAILED" if failed else "passed") + "; the design has no closed form (exit code 4)")
    print(f"symgain: no closed form: {exc}", file=sys.stderr)
    return 1 if failed else 4


DEMO_FILE = "demo_conveyor.toml"


def run_demo(args) -> int:
    from . import derive_and_warn
    from ..emit.terminal import format_design
    from ..model.toml_file import model_from_text

    text = resources.files("symgain.data").joinpath(DEMO_FILE).read_text(encoding="utf-8")
    if args.write_model:
        from pathlib import Path

        from ..emit.files import write_atomic
        from ..errors import OutputError, printable

        target = Path(args.write_model)
        if not target.parent.is_dir():
            raise OutputError(f"folder {printable(str(target.parent), 100)!r} does not exist")
        print(f"wrote {write_atomic(target, text)}")
        return 0
    start = time.perf_counter()
    model = model_from_text(text, f"<built-in {DEMO_FILE}>")
    design = derive_and_warn(model)
    took = time.perf_counter() - start
    print(f"symgain demo: the built-in model '{model.name}' ({model.title}).")
    print(f"Derived the gains in closed form in {took:.2f} s:\n")
    print(format_design(design))
    args.points, args.seed, args.tolerance = 20, 0, DEFAULT_TOLERANCE
    print("Checked them numerically at 20 parameter points against scipy.signal.place_poles:\n")
    code = _print_check(design, args)
    print("\nNext: 'symgain demo --write-model conveyor.toml' writes this model to a file to edit; then run "
          "'symgain derive FILE' and 'symgain check FILE'.")
    print("Gains from a linear model must be validated in simulation and on the machine with safe limits;")
    print("local codes, safety standards and licensed practice take precedence.")
    return code
