"""Command simulate: the closed loop in time, under actuator limits and parameter mismatch."""
from __future__ import annotations

import argparse
import tempfile

from ..errors import ModelError
from . import output_option

EPILOG = """examples:
  symgain simulate examples/greenhouse_cart.toml
  symgain simulate examples/linear_stage.toml --reference x=0.05 --points 40 --seed 2
  symgain simulate examples/drone_altitude.toml --offset h=0.3 --gains scheduled -o build

The model file may declare [simulation] (scenarios, run length, sample period, points),
[requirements] (settling_time, overshoot, steady_state_error, peak_input) and [input_limits];
see docs/model-file.md. Scenario options given here replace the file's scenarios.
Exit code 1 when a requirement fails at some point (a loop that does not settle always fails).
"""


def _pairs(values, option: str) -> dict:
    import sympy as sp

    out = {}
    for text in values or []:
        name, sep, value = text.partition("=")
        if not sep or not name.strip():
            raise ModelError(f"{option} {text!r}: expected NAME=VALUE")
        try:
            out[name.strip()] = sp.Float(float(value))
        except ValueError:
            raise ModelError(f"{option} {text!r}: {value!r} is not a number") from None
    return out


def add_to(sub) -> None:
    p = sub.add_parser("simulate", help="run the closed loop in time: limits, mismatch, requirements",
                       formatter_class=argparse.RawDescriptionHelpFormatter, epilog=EPILOG,
                       description="Simulate the emitted controller (the Controller class of the Python "
                       "module 'emit --to python' writes) on the nonlinear equations of motion when the "
                       "model has them, else on the linear plant, with the actuator limits, at nominal "
                       "values, at the corners of the declared ranges and at seeded Latin-hypercube "
                       "points. Prints a table per scenario and point, names the worst point and writes "
                       "one figure per scenario.")
    p.add_argument("model", help="model file (TOML)")
    output_option(p)
    p.add_argument("--quiet", action="store_true",
                   help="tables of the nominal, the worst and the failing points only")
    g = p.add_argument_group("scenario (replaces the file's scenarios)")
    g.add_argument("--reference", action="append", metavar="OUTPUT=STEP", help="reference step, repeatable")
    g.add_argument("--offset", action="append", metavar="STATE=VALUE", help="initial offset, repeatable")
    g.add_argument("--disturbance", action="append", metavar="INPUT=STEP", help="input disturbance step")
    g.add_argument("--disturbance-time", type=float, default=0.0, metavar="S",
                   help="when the disturbance steps in (default 0 s)")
    g.add_argument("--noise", action="append", metavar="NAME=STD",
                   help="measurement noise standard deviation (seeded), repeatable")
    r = p.add_argument_group("run")
    r.add_argument("--duration", type=float, metavar="S", help="run length (default from the slowest pole)")
    r.add_argument("--sample-time", type=float, metavar="S",
                   help="controller sample period for a continuous design (default from the fastest pole)")
    r.add_argument("--points", type=int, metavar="N", help="Latin-hypercube points besides the corners (default 16)")
    r.add_argument("--seed", type=int, help="seed of the points and the noise (default 0)")
    r.add_argument("--no-corners", action="store_true", help="leave out the corners of the ranges")
    r.add_argument("--gains", choices=("nominal", "scheduled"),
                   help="nominal: controller at nominal values (default); scheduled: at the true values")
    r.add_argument("--free-gain", action="append", metavar="NAME=VALUE",
                   help="value of a gain the target leaves free (default 0), repeatable")
    r.add_argument("--jobs", type=int, default=None, metavar="N", help="worker processes (default: up to 4)")
    p.set_defaults(run=run_simulate)


def _check_numbers(args) -> None:
    for name in ("duration", "sample_time"):
        value = getattr(args, name)
        if value is not None and not value > 0:
            raise ModelError(f"--{name.replace('_', '-')} must be above zero, found {value:g}")
    for name in ("points", "jobs"):
        value = getattr(args, name)
        if value is not None and value < (0 if name == "points" else 1):
            raise ModelError(f"--{name} must be {'0 or more' if name == 'points' else '1 or more'}, found {value}")


def _scenarios(args, model):
    import sympy as sp

    from ..model.simulation_keys import Scenario

    given = [args.reference, args.offset, args.disturbance, args.noise]
    if not any(given):
        return None
    checks = [(args.reference, "--reference", model.outputs or model.states),
              (args.offset, "--offset", model.states), (args.disturbance, "--disturbance", model.inputs),
              (args.noise, "--noise", (model.outputs or ()) + tuple(model.states))]
    tables = []
    for values, option, names in checks:
        table = _pairs(values, option)
        for key in table:
            if key not in names:
                raise ModelError(f"{option}: {key!r} is not one of {', '.join(names)}")
        tables.append(table)
    return [Scenario("command line", reference=tables[0], initial=tables[1], disturbance=tables[2],
                     disturbance_time=sp.Float(args.disturbance_time), noise=tables[3])]


def run_simulate(args) -> int:
    from . import derive_and_warn
    from ..model.toml_file import load_model
    from ..emit.plots import png_bytes
    from ..analysis.simulation.campaign import prepare, run_campaign
    from ..analysis.simulation.figures import scenario_figure
    from ..analysis.simulation.tables import campaign_csv, format_campaign
    from ..emit.files import default_folder, prepare_folder, write_files
    from .sweep import _progress

    _check_numbers(args)
    model = load_model(args.model)
    scenarios = _scenarios(args, model)
    design = derive_and_warn(model)
    folder = prepare_folder(args.output or default_folder(model.name))
    with tempfile.TemporaryDirectory(prefix="symgain-controller-") as module_folder:
        setup = prepare(design, module_folder, scenarios=scenarios, duration=args.duration,
                        sample_time=args.sample_time, points=args.points, seed=args.seed, gains=args.gains,
                        corners=False if args.no_corners else None,
                        free_gains={k: float(v) for k, v in _pairs(args.free_gain, "--free-gain").items()})
        with _progress(len(setup.points), "simulate", args.quiet) as tick:
            campaign = run_campaign(setup, jobs=args.jobs, progress=tick)
    plant = "nonlinear equations of motion" if setup.plant.nonlinear else "linear plant"
    print(f"{model.name}: emitted controller on the {plant}; {len(setup.points)} plant points x "
          f"{len(setup.cases)} scenario{'s' if len(setup.cases) > 1 else ''} in {campaign.elapsed:.2f} s ({len(setup.points) / campaign.elapsed:.1f} "
          f"points per second, {campaign.workers} process{'es' if campaign.workers > 1 else ''})")
    if setup.plant.nonlinear:
        print("outputs, states and inputs are deviations from the equilibrium the controller assumes")
    for note in campaign.notes:
        print(f"note: {note}")
    print(format_campaign(campaign, every_point=not args.quiet), end="")
    base = f"{model.name}-simulation"
    title = model.title or model.name
    files = {f"{base}.csv": campaign_csv(campaign)}  # every file rendered first, then written as one set
    for k in range(len(setup.cases)):
        files[f"{base}-{k + 1}.png"] = png_bytes(scenario_figure(campaign, k, title))
    written = write_files(folder, files)
    for path in written:
        print(f"wrote {path}")
    print("simulation passed" if campaign.passed else "simulation FAILED: a requirement is not met")
    print("A simulation is a model too: validate on the machine with safe limits; local codes, safety "
          "standards and licensed practice take precedence.")
    return 0 if campaign.passed else 1
