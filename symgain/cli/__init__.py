"""The command line: a thin shell that parses arguments, calls the library, prints, exits.

Exit codes: 0 ok, 1 a check failed, 2 bad input (one line on stderr; the
traceback only with --debug), 3 an internal error (a bug: please report it), 4 a
well-posed design that cannot be solved in closed form (the reason on stderr). Each command lives in its own module of this
package and registers itself through ``add_to(subparsers)``.
"""
from __future__ import annotations

import argparse
import importlib
import sys

from ..errors import ClosedFormLimitation, SymgainError

__all__ = ["main", "COMMAND_MODULES"]

# one module per command group; each defines add_to(subparsers)
COMMAND_MODULES = ["symgain.cli.core", "symgain.cli.emit", "symgain.cli.sweep", "symgain.cli.simulate"]

EPILOG = """examples:
  symgain demo
  symgain derive examples/greenhouse_cart.toml
  symgain derive examples/greenhouse_cart.toml --json
  symgain check examples/greenhouse_cart.toml --points 50 --seed 3
  symgain emit examples/greenhouse_cart.toml --to python --to c --to latex -o build
  symgain schedule examples/greenhouse_cart.toml --over m=15:90:16
  symgain robust symgain/data/demo_conveyor.toml --mismatch m tau
"""


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # argparse errors: one line, exit code 2
        self.exit(2, f"symgain: {message}\n")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="symgain", description="Closed-form pole-placement gains as functions of "
                     "the plant's physical parameters.", epilog=EPILOG,
                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--debug", action="store_true", help="show the full traceback on errors")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True
    for name in COMMAND_MODULES:
        importlib.import_module(name).add_to(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.run(args) or 0)
    except ClosedFormLimitation as exc:
        if args.debug:
            raise
        print(f"symgain: no closed form: {exc}", file=sys.stderr)
        return 4
    except SymgainError as exc:
        if args.debug:
            raise
        print(f"symgain: {exc}", file=sys.stderr)
        return 2
    except BrokenPipeError:  # output piped into a reader that stopped early (| head)
        sys.stderr.close()
        return 0
    except Exception as exc:  # a bug of ours, not the user's input
        if args.debug:
            raise
        print(f"symgain: internal error ({type(exc).__name__}: {exc}); please report it with the "
              "model file; rerun with --debug for the traceback", file=sys.stderr)
        return 3
    except KeyboardInterrupt:  # pragma: no cover
        print("symgain: interrupted", file=sys.stderr)
        return 130
