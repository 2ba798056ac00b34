"""Commands derive, check and demo."""
from __future__ import annotations

import argparse
import time
from importlib import resources

from ..analysis.check import DEFAULT_TOLERANCE, MAX_POINTS, check_design
from . import derive_and_warn
from ..emit.json import design_to_json
from ..model.toml_file import load_model, model_from_text
from ..emit.terminal import format_check, format_design

_FMT = argparse.RawDescriptionHelpFormatter


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
    p.set_defaults(run=run_derive)

    p = sub.add_parser("check", help="cross-check the formulas numerically against scipy",
                       formatter_class=_FMT,
                       description="Evaluate the formulas at sampled parameter points and compare with "
                       "scipy.signal.place_poles and the target polynomial. Exit code 1 when a point fails.",
                       epilog="example:\n  symgain check examples/greenhouse_cart.toml --points 50")
    p.add_argument("model", help="model file (TOML)")
    _add_check_options(p)
    p.set_defaults(run=run_check)

    p = sub.add_parser("demo", help="derive and check the built-in example", formatter_class=_FMT,
                       description="Run derive and check on an example model shipped with symgain.",
                       epilog="example:\n  symgain demo")
    p.set_defaults(run=run_demo)


def run_derive(args) -> int:
    design = derive_and_warn(load_model(args.model))
    print(design_to_json(design) if args.json else format_design(design), end="" if not args.json else "\n")
    return 0


def _print_check(design, args) -> int:
    report = check_design(design, n_points=args.points, seed=args.seed, tolerance=args.tolerance)
    print(format_check(report, [p.name for p in design.model.parameters]), end="")
    print("check passed" if report.passed else "check FAILED")
    return 0 if report.passed else 1


def run_check(args) -> int:
    return _print_check(derive_and_warn(load_model(args.model)), args)


DEMO_FILE = "demo_conveyor.toml"


def run_demo(args) -> int:
    text = resources.files("symgain.data").joinpath(DEMO_FILE).read_text(encoding="utf-8")
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
    print("\nNext: write your own model file (see README.md) and run 'symgain derive FILE' and "
          "'symgain check FILE'.")
    print("Gains from a linear model must be validated in simulation and on the machine with safe limits;")
    print("local codes, safety standards and licensed practice take precedence.")
    return code
