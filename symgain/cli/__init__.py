"""The command line: a thin shell that parses arguments, calls the library, prints, exits.

Exit codes: 0 ok, 1 a check failed, 2 bad input (one line on stderr; the
traceback only with --debug), 3 an internal error (a bug: please report it), 4 a
well-posed design that cannot be solved in closed form (the reason on stderr). Each command lives in its own module of this
package and registers itself through ``add_to(subparsers)``.
"""
from __future__ import annotations

import argparse
import importlib
import math
import os
import sys

from ..errors import ClosedFormLimitation, SymgainError, printable
from ..guard import DEFAULT_MEMORY_LIMIT, DEFAULT_TIME_LIMIT, limits

__all__ = ["main", "COMMAND_MODULES", "whole_number", "positive_number"]

# one module per command group; each defines add_to(subparsers)
COMMAND_MODULES = ["symgain.cli.core", "symgain.cli.emit", "symgain.cli.sweep", "symgain.cli.simulate"]

EPILOG = """examples (the first writes the built-in model file used by the others):
  symgain demo --write-model conveyor.toml
  symgain derive conveyor.toml
  symgain derive conveyor.toml --at m=30,tau=0.5
  symgain derive conveyor.toml --json
  symgain check conveyor.toml --points 50 --seed 3
  symgain emit conveyor.toml --to python --to c --to latex -o build
  symgain schedule conveyor.toml --over m
  symgain robust conveyor.toml --mismatch m tau
"""


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # argparse errors: one line, bounded, exit code 2
        self.exit(2, f"symgain: {printable(' '.join(str(message).split()), 300)}\n")


def whole_number(low: int, high: int, what: str = "a whole number"):
    """An argparse type: an integer from *low* to *high* (the documented caps).

    >>> whole_number(1, 10)("3")
    3
    >>> whole_number(1, 10)("0")
    Traceback (most recent call last):
    ...
    argparse.ArgumentTypeError: expected a whole number from 1 to 10, found '0'
    """
    def parse(text: str) -> int:
        shown = printable(repr(text), 40)
        if len(text) > 30:
            raise argparse.ArgumentTypeError(f"expected {what} from {low} to {high}, found {shown}")
        try:
            value = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"expected {what}, found {shown}") from None
        if not low <= value <= high:
            raise argparse.ArgumentTypeError(f"expected {what} from {low} to {high}, found {shown}")
        return value
    parse.__name__ = "whole number"
    return parse


def output_option(p) -> None:
    """The one output-folder option of every command that writes files (``--out`` is an alias)."""
    p.add_argument("-o", "--output", "--out", dest="output", metavar="DIR", default=None,
                   help="output folder (default ./symgain-out/<model name>)")


def positive_number(text: str) -> float:
    """An argparse type: a positive finite number (nan, inf, 0 and negatives are refused).

    >>> positive_number("1e-6")
    1e-06
    """
    shown = printable(repr(text), 40)
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a positive number, found {shown}") from None
    if not math.isfinite(value) or value <= 0:
        raise argparse.ArgumentTypeError(f"expected a positive finite number, found {shown}")
    return value


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="symgain", description="Closed-form pole-placement gains as functions of "
                     "the plant's physical parameters.", epilog=EPILOG,
                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--debug", action="store_true", help="show the full traceback on errors")
    parser.add_argument("--time-limit", type=positive_number, default=DEFAULT_TIME_LIMIT, metavar="SECONDS",
                        help=f"stop a command that runs longer (default {DEFAULT_TIME_LIMIT:g} s)")
    parser.add_argument("--memory-limit", type=positive_number, default=DEFAULT_MEMORY_LIMIT, metavar="MB",
                        help=f"address-space limit of the process (default {DEFAULT_MEMORY_LIMIT} MB)")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True
    for name in COMMAND_MODULES:
        importlib.import_module(name).add_to(sub)
    return parser


def main(argv: list[str] | None = None, supervise: bool | None = None) -> int:
    """Run the command line; exit code as the module docstring says.

    Called without arguments (the ``symgain`` command), the command runs in a
    supervised child process (:func:`symgain.guard.supervised`), so that even a
    native library's abort under the memory limit ends in one line and exit code 2.
    """
    if supervise is None:
        supervise = argv is None
    argv = sys.argv[1:] if argv is None else argv
    if supervise and "--debug" not in argv and "-h" not in argv and "--help" not in argv:
        from ..guard import supervised

        memory = _memory_option(argv)
        return supervised(lambda: main(argv, supervise=False), memory)
    limit = getattr(sys, "get_int_max_str_digits", lambda: 0)()
    if 0 < limit < 100_000:  # inputs are bounded by the reader (4000 digits); derived numbers may be longer
        sys.set_int_max_str_digits(100_000)
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        with limits(args.time_limit, args.memory_limit):
            code = int(args.run(args) or 0)
        sys.stdout.flush()
        return code
    except ClosedFormLimitation as exc:
        if args.debug:
            raise
        print(f"symgain: no closed form: {printable(exc, 2000)}", file=sys.stderr)
        return 4
    except SymgainError as exc:
        if args.debug:
            raise
        print(f"symgain: {exc}", file=sys.stderr)
        return 2
    except BrokenPipeError:  # output piped into a reader that stopped early (| head)
        _drop_stdout()
        sys.stderr.close()
        return 0
    except OSError as exc:  # the terminal or file we print to fails (disk full: > /dev/full)
        if args.debug:
            raise
        _drop_stdout()
        print(f"symgain: cannot write the output: {printable(exc.strerror or exc, 100)}", file=sys.stderr)
        return 2
    except Exception as exc:  # a bug of ours, not the user's input
        if args.debug:
            raise
        print(f"symgain: internal error ({type(exc).__name__}: {printable(exc, 150)}); please report it "
              "with the model file; rerun with --debug for the traceback", file=sys.stderr)
        return 3
    except KeyboardInterrupt:  # pragma: no cover
        print("symgain: interrupted", file=sys.stderr)
        return 130


def _memory_option(argv: list[str]) -> float:
    """The --memory-limit value as given (for the supervisor's message), else the default."""
    for k, arg in enumerate(argv):
        value = arg.split("=", 1)[1] if arg.startswith("--memory-limit=") else (
            argv[k + 1] if arg == "--memory-limit" and k + 1 < len(argv) else None)
        if value is not None:
            try:
                return float(value)
            except ValueError:
                break
    return DEFAULT_MEMORY_LIMIT


def derive_and_warn(model, form: str = "auto"):
    """Derive the design and print its warnings on stderr, one line each."""
    from ..design import derive

    design = derive(model, form=form)
    for line in design.warnings:
        print(f"symgain: warning: {printable(line, 300)}", file=sys.stderr)
    return design


def _drop_stdout() -> None:
    """Point stdout at the null device so that the exit flush cannot fail a second time."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)
    except (OSError, ValueError, AttributeError):
        pass
