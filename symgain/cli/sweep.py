"""Commands schedule, robust, sensitivity and plot: gains over ranges of parameters."""
from __future__ import annotations

import argparse
import sys
from pathlib import Path
from contextlib import contextmanager

from ..errors import ModelError
from . import output_option, whole_number

# numpy, sympy and the design stage load inside the commands (fast --help)

_FMT = argparse.RawDescriptionHelpFormatter
MAX_ROBUST_POINTS = 100_000  # eigenvalue cross-check points of robust
MAX_MISMATCH = 6  # mismatched parameters of robust (the closed-form conditions grow fast)


def _common(p, model_help="model file (TOML)", nargs=None):
    p.add_argument("model", help=model_help, nargs=nargs)
    output_option(p)
    p.add_argument("--quiet", action="store_true", help="no progress bar and only the essential lines")


def add_to(sub) -> None:
    p = sub.add_parser("schedule", help="tabulate the gains over a grid of one or two parameters",
                       formatter_class=_FMT,
                       description="Evaluate every designed gain over a grid (other parameters at nominal) "
                       "and write a CSV table, a C lookup table with linear or bilinear interpolation "
                       "and a plot. Grid points where a validity condition fails are marked invalid.",
                       epilog="examples:\n  symgain schedule examples/greenhouse_cart.toml --over m=15:90:16\n"
                       "  symgain schedule examples/greenhouse_cart.toml --over m=15:90:16 --over c=0:12:4")
    _common(p)
    p.add_argument("--over", action="append", metavar="NAME=LOW:HIGH:COUNT", required=True,
                   help="a scheduled parameter; give it once or twice (NAME alone: declared range, 11 points)")
    p.set_defaults(run=run_schedule)

    p = sub.add_parser("robust", help="stability when the plant's parameters differ from the controller's",
                       formatter_class=_FMT,
                       description="Design with estimated values (NAME_hat), keep the true ones in the plant, "
                       "derive the Routh-Hurwitz conditions in closed form, report the stable range of the "
                       "ratio true/estimate, cross-check with eigenvalues and plot the pole migration. "
                       "Exit code 1 when an eigenvalue check disagrees with the conditions.",
                       epilog="examples:\n  symgain demo --write-model conveyor.toml\n"
                       "  symgain robust conveyor.toml --mismatch m tau\n"
                       "  symgain robust --mismatch m tau conveyor.toml")
    _common(p, nargs="?")
    p.add_argument("--mismatch", nargs="+", action="extend", metavar="NAME", required=True,
                   help="plant parameters whose true value differs from the one the controller assumes")
    p.add_argument("--points", type=whole_number(1, MAX_ROBUST_POINTS), default=300, metavar="N",
                   help=f"sampled points for the eigenvalue cross-check (default 300, at most {MAX_ROBUST_POINTS})")
    p.add_argument("--seed", type=whole_number(0, 2**32 - 1), default=0,
                   help="random seed of the cross-check (default 0; 0 to 2^32 - 1)")
    p.set_defaults(run=run_robust)

    p = sub.add_parser("sensitivity", help="partial derivatives of the gains and relative sensitivities",
                       formatter_class=_FMT,
                       description="Print (p/K) dK/dp at nominal values for every gain and parameter: the "
                       "percent change of the gain per percent change of the parameter. With --formulas, "
                       "also the partial derivatives in closed form.",
                       epilog="example:\n  symgain sensitivity examples/greenhouse_cart.toml --formulas")
    p.add_argument("model", help="model file (TOML)")
    p.add_argument("--formulas", action="store_true", help="also print dK/dp in closed form")
    p.set_defaults(run=run_sensitivity)

    p = sub.add_parser("plot", help="draw closed-loop figures (step responses)", formatter_class=_FMT,
                       description="Draw the closed-loop step response at nominal values and at the corners "
                       "of the plant parameters' ranges (scipy.signal), one PNG.",
                       epilog="examples:\n  symgain demo --write-model conveyor.toml\n"
                       "  symgain plot conveyor.toml --step")
    _common(p)
    p.add_argument("--step", action="store_true", help="step responses at nominal and at the corners")
    p.add_argument("--gains", choices=("fixed", "scheduled"), default="fixed",
                   help="fixed: controller at nominal values (default); scheduled: formulas at each corner")
    p.set_defaults(run=run_plot)


@contextmanager
def _progress(total: int, label: str, quiet: bool):
    """A tqdm bar on stderr that appears only when the work takes more than a second."""
    from tqdm import tqdm

    bar = tqdm(total=total, desc=label, delay=1.0, disable=quiet, file=sys.stderr, leave=False,
               unit="pt", dynamic_ncols=True)
    try:
        yield bar.update
    finally:
        bar.close()


def _folder(args, model):
    from ..emit.files import default_folder, prepare_folder

    return prepare_folder(args.output or default_folder(model.name))


def run_schedule(args) -> int:
    import numpy as np

    from ..model.toml_file import load_model
    from ..emit.plots import png_bytes, schedule_figure
    from ..analysis.evaluate import GainEvaluator
    from ..emit.lookup_c import interpolation_errors, lookup_table_c, REFINE
    from ..emit.files import write_files
    from ..analysis.schedule import compute_schedule, parse_axis, schedule_csv

    model = load_model(args.model)
    axes = [parse_axis(text, model) for text in args.over]
    if len(axes) > 2:
        raise ModelError(f"--over is given {len(axes)} times; a schedule runs over one or two parameters")
    design, note = _designed_from(model)
    if note:
        print(f"note: {note}")
    evaluator = GainEvaluator(design)
    folder = _folder(args, model)
    total = int(np.prod([a.values.size for a in axes]))
    base = f"{model.name}-schedule"
    stages = 3 if len(axes) == 2 else 2  # evaluate, CSV rows, C rows (2-D tables)
    with _progress(stages * total, "schedule", args.quiet) as tick:
        schedule = compute_schedule(design, axes, evaluator=evaluator, progress=tick)
        errors = interpolation_errors(schedule, evaluator=evaluator)
        table = schedule_csv(schedule, progress=tick)
        source = lookup_table_c(schedule, errors, progress=tick if len(axes) == 2 else None)
    figure = png_bytes(schedule_figure(schedule))  # everything rendered before anything is written
    written = write_files(folder, {f"{base}.csv": table, f"{model.name}_schedule.c": source,
                                   f"{base}.png": figure})
    invalid = int((~schedule.valid).sum())
    grid = " x ".join(f"{a.name} {a.values[0]:g}..{a.values[-1]:g} ({a.values.size})" for a in axes)
    print(f"schedule of {len(schedule.entries)} gains over {grid}: {schedule.valid.size} points, "
          f"{invalid} invalid")
    if not args.quiet:
        print(f"worst interpolation error (grid {REFINE} times finer, absolute / relative to max |gain|):")
        for e in schedule.entries:
            err = errors[e.identifier]
            print(f"  {e.label:<20} {err.absolute:.3e} / {err.relative:.3e}")
    for path in written:
        print(f"wrote {path}")
    return 0


def _interval_text(lo: float, hi: float, var: str, scanned: bool = False) -> str:
    """``0.5 < r < 2``; with ``scanned`` an open end says how far the eigenvalue scan reached."""
    import numpy as np

    from ..mathtext import number_text

    if not np.isfinite(hi):
        reach = " (up to the largest ratio scanned, 1000)" if scanned else ""
        return (f"{var} > {number_text(lo)}" if lo > 0 else f"every {var} > 0") + reach
    return f"{number_text(lo)} < {var} < {number_text(hi)}"


def _mismatch_names(args) -> list[str]:
    """--mismatch NAME... MODEL also works: a last name that is a file is the model."""
    names = [n for item in args.mismatch for n in item.split(",") if n]
    if args.model is None:
        if names and (names[-1].endswith(".toml") or Path(names[-1]).is_file()):
            args.model = names.pop()
        else:
            raise ModelError("give the model file: symgain robust MODEL --mismatch NAME [NAME ...]")
    if not names:
        raise ModelError("name at least one parameter after --mismatch")
    names = list(dict.fromkeys(names))
    if len(names) > MAX_MISMATCH:
        raise ModelError(f"--mismatch names {len(names)} parameters; at most {MAX_MISMATCH} are analysed "
                         "at once")
    return names


def _designed_from(model):
    """The design (free gains settled, warnings printed) and the sentence about free gains."""
    from . import derive_and_warn
    from ..analysis.loops import settle_free_gains

    return settle_free_gains(derive_and_warn(model))


def _designed(args):
    """Model, design (free gains settled) and the sentence about free gains."""
    from ..model.toml_file import load_model

    model = load_model(args.model)
    design, note = _designed_from(model)
    return model, design, note


def run_robust(args) -> int:
    import numpy as np
    import sympy as sp

    from ..analysis.robust import (ClosedLoop, analyze_mismatch, cross_check, grid_size, pole_migration,
                                   ratio_ranges)
    from ..emit.files import write_atomic
    from ..emit.plots import png_bytes, pole_migration_figure
    from ..mathtext import condition_text, set_text

    names = _mismatch_names(args)
    model, design, note = _designed(args)
    analysis = analyze_mismatch(design, names)
    folder = _folder(args, model)
    closed_form = analysis.conditions is not None
    total = sum(grid_size(model, n, closed_form) for n in analysis.mismatched)
    with _progress(total, "grid scan", args.quiet) as tick:
        ranges = ratio_ranges(analysis, progress=tick)
    with _progress(args.points, "eigenvalue check", args.quiet) as tick:
        counts = cross_check(analysis, n_points=args.points, seed=args.seed, progress=tick)
    nominal = model.nominal_values()
    sweeps = {name: pole_migration(design, name) for name in analysis.mismatched
              if model.parameter(name).range is not None}
    path = None
    if sweeps:
        numeric_loop = ClosedLoop(design)
        poles0 = np.linalg.eigvals(numeric_loop(nominal, nominal))
        path = write_atomic(folder / f"{model.name}-poles.png",
                            png_bytes(pole_migration_figure(model, sweeps, poles0,
                                                                  numeric_loop.discrete)))
    ratio_words = ", ".join(f"{analysis.ratios[n]} = {n}/{analysis.hats[n]}" for n in analysis.mismatched)
    print(f"{model.name}: controller designed with {', '.join(map(str, analysis.hats.values()))}; "
          f"the plant has the true values ({ratio_words})")
    print(f"loop analysed: {analysis.loop}")
    if note:
        print(f"note: {note}")
    if not closed_form:
        why = ("a sampled-data loop: stable when every eigenvalue lies inside the unit circle"
               if design.sampled is not None else
               "no closed form: the loop is larger than 4 states, too long or not rational in the ratio")
        print(f"method: eigenvalues of the loop over ratios 0.001..1000 ({why})")
    elif not args.quiet:
        from ..emit.terminal import format_polynomial, terminal_width

        poly = format_polynomial(analysis.closed_loop_polynomial)
        shown = poly if len(poly) <= terminal_width() - 2 else \
            f"degree {sp.degree(analysis.closed_loop_polynomial, sp.Symbol('s'))} in s (too long to show)"
        print(f"closed-loop characteristic polynomial (scaled by a positive factor):\n  {shown}")
        print("Routh-Hurwitz conditions (conditions the signs already guarantee are left out):")
        for cond in analysis.conditions or []:
            text = condition_text(cond > 0)
            print(f"  {text if len(text) <= terminal_width() - 2 else 'a polynomial condition of ' + str(len(sp.Add.make_args(cond))) + ' terms > 0'}")
        if not analysis.conditions:
            print("  none: stable for every positive ratio")
    for name, rr in ranges.items():
        unit = model.parameter(name).unit
        ratio = str(analysis.ratios[name])
        print(f"{name} (controller assumes {nominal[name]:g} {unit}; other values at nominal):".replace(" ;", ";"))
        if rr.exact is not None:
            print(f"  stable ratio {ratio} = {name}/{name}_hat, exact: {set_text(rr.exact, ratio)}")
        print("  stable ratio, numerically: " + (" or ".join(_interval_text(*i, ratio, not closed_form)
                                                            for i in rr.intervals)
                                                 or "none"))
        if rr.declared is not None:
            verdict = "stable throughout" if rr.declared_stable else "NOT stable throughout"
            lo, hi = rr.declared
            print(f"  true {name} over its declared range gives {lo:.6g} <= {ratio} <= {hi:.6g}: {verdict}")
        if rr.over_ranges is not None:
            print(f"  stable at every one of {rr.grid_points} grid points over the declared ranges "
                  f"(estimate {name}_hat included): {_interval_text(*rr.over_ranges, ratio)}")
        else:
            print(f"  some of the {rr.grid_points} grid points over the declared ranges admit no stable ratio "
                  "(unstable even with a matched controller, or outside where the formulas hold)")
    if closed_form:
        print(f"eigenvalue cross-check at {counts['points']} sampled points (ratios 0.05..20): "
              f"{counts['agree']} agree, {counts['disagree']} disagree, {counts['marginal']} on the boundary")
    if path:
        print(f"wrote {path}")
    return 1 if counts["disagree"] else 0


def run_sensitivity(args) -> int:
    import sympy as sp

    from ..design import EXTRA_SYMBOLS
    from ..mathtext import math_text
    from ..analysis.sensitivity import relative_sensitivities, sensitivity_table
    from ..analysis.evaluate import gain_entries

    model, design, note = _designed(args)
    table, added = sensitivity_table(design, with_definitions=True)
    rel = relative_sensitivities(design, table=table)
    names = [p.name for p in model.parameters]
    print(f"{model.name}: relative sensitivity (p/K) dK/dp at nominal "
          + ", ".join(f"{k} = {v:g}" for k, v in model.nominal_values().items()))
    print("parts covered: " + "; ".join(f"{p.part} ({', '.join(_symbols_of(p))})" for p in design.parts()))
    if note:
        print(f"note: {note}")
    entries = gain_entries(design)
    keys = {e.label: (e.part if e.symbol == getattr(design, e.part).symbol else
                      {v: k for k, v in EXTRA_SYMBOLS.items()}.get(e.symbol, e.symbol)) for e in entries}
    header = ["gain", *names]
    rows = [[e.label] + [f"{rel[keys[e.label]][(e.row, e.col, n)]:+.3f}" for n in names] for e in entries]
    widths = [max(len(r[i]) for r in [header, *rows]) for i in range(len(header))]
    for r in [header, *rows]:
        print("  " + "  ".join(c.rjust(w) if i else c.ljust(w) for i, (c, w) in enumerate(zip(r, widths))))
    print("(+1.000: the gain grows in proportion to the parameter; nan: the gain is zero there)")
    if args.formulas:
        from ..emit.terminal import terminal_width

        print("partial derivatives in closed form:")
        for part in design.parts():
            if part.definitions:
                print(f"  {part.part} gain in compact form; definitions, evaluated in order:")
                for sym, expr in (*part.definitions, *added.get(part.part, ())):
                    print(f"    {math_text(sym)} = {math_text(expr)}")
        for e in entries:
            for n in names:
                d = table[keys[e.label]][(e.row, e.col, n)]
                if d != 0:
                    line = f"  d {e.label} / d {n} = {math_text(d)}"
                    print(line if len(line) <= terminal_width() else
                          f"  d {e.label} / d {n} = a formula of {sp.count_ops(d)} operations (whole: --json)")
    return 0


def _symbols_of(part) -> list[str]:
    import sympy as sp

    from ..design import EXTRA_SYMBOLS

    return [part.symbol] + [EXTRA_SYMBOLS.get(k, k) for k, v in part.extra.items()
                            if k != "gain_symbols" and isinstance(v, sp.MatrixBase)]


def run_plot(args) -> int:
    from ..emit.plots import png_bytes, step_figure
    from ..emit.files import write_atomic
    from ..analysis.step_response import corner_points, loop_description, step_responses

    if not args.step:
        raise ModelError("choose a figure to draw: --step")
    model, design, note = _designed(args)
    folder = _folder(args, model)
    with _progress(len(corner_points(design)), "step responses", args.quiet) as tick:
        runs = step_responses(design, gains=args.gains, progress=tick)
    output = model.outputs[0] if model.outputs else model.states[0]
    path = write_atomic(folder / f"{model.name}-step.png", png_bytes(step_figure(model, runs, output, args.gains)))
    unstable = [r.label for r in runs if not r.stable]
    listed = "; ".join(unstable[:3]) + ("; ..." if len(unstable) > 3 else "")
    print(f"loop drawn: {loop_description(design)}; step of the reference of {output}")
    if note:
        print(f"note: {note}")
    print(f"{len(runs)} step responses (nominal and {len(runs) - 1} corners), "
          f"{len(unstable)} unstable" + (f": {listed}" if unstable else ""))
    print(f"wrote {path}")
    return 0
