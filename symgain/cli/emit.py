"""Command emit: write a derived design as Python, C, LaTeX or JSON files."""
from __future__ import annotations

import argparse

from ..emit import TARGETS  # light: the emitters themselves load on use
from .core import add_form_option
from . import output_option

EPILOG = """examples:
  symgain emit examples/greenhouse_cart.toml --to python --to c -o build
  symgain emit examples/greenhouse_cart.toml --to c --precision single --name cart
  symgain emit examples/greenhouse_cart.toml --to latex -o report
  symgain emit examples/linear_stage.toml --to latex --with-simulation -o report

files: NAME.py (numpy only), NAME.h + NAME.c (C99), NAME.tex (pdflatex), NAME.json;
NAME is the model's name unless --name is given. Each file is written whole or not at all.
"""


def add_to(sub) -> None:
    p = sub.add_parser("emit", help="write the gain formulas as Python, C, LaTeX or JSON files",
                       formatter_class=argparse.RawDescriptionHelpFormatter, epilog=EPILOG,
                       description="Derive the design of a model file and write it in one or more "
                       "target languages.")
    p.add_argument("model", help="model file (TOML)")
    p.add_argument("--to", action="append", choices=TARGETS, required=True, metavar="TARGET",
                   help=f"target language, repeatable: {', '.join(TARGETS)}")
    output_option(p)
    p.add_argument("--name", metavar="PREFIX",
                   help="file name, Python module and C prefix (default: the model's name)")
    p.add_argument("--precision", choices=("double", "single"), default="double",
                   help="C floating-point type: double (default) or single (float)")
    add_form_option(p)
    p.add_argument("--with-simulation", action="store_true",
                   help="add a closed-loop simulation section (figures and pass/fail table) to the LaTeX "
                   "report, run as 'symgain simulate' would with the model file's settings")
    p.set_defaults(run=run_emit)


def run_emit(args) -> int:
    from . import derive_and_warn
    from ..emit import emit
    from ..emit.files import default_folder, prepare_folder
    from ..errors import ModelError
    from ..model.toml_file import load_model

    model = load_model(args.model)
    folder = args.output or default_folder(model.name)
    prepare_folder(folder)  # a bad output path is refused before the work; the folder is made on writing
    design = derive_and_warn(model, form=args.form)
    sections, figures = None, {}
    if args.with_simulation:
        if "latex" not in args.to:
            raise ModelError("--with-simulation adds a section to the LaTeX report: add --to latex")
        from ..analysis.simulation.latex_section import simulation_for_report

        sections, figures = simulation_for_report(design, args.name or design.model.name)
    for path in emit(design, args.to, folder, name=args.name, precision=args.precision,
                     latex_sections=sections, extra_files=figures):
        print(path)
    return 0
