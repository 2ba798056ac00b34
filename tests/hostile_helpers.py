"""Shared pieces of the hostile-input tests: model text builders, the injection corpus, a runner.

The corpus holds texts an attacker or a careless user could put in a title,
a meaning or a unit. Each executable payload, if it ever ran, would create
the file named by ``MARK`` in the current folder; the tests look for it.
"""
from __future__ import annotations

import contextlib
import io
import json
import os
from pathlib import Path

from symgain.cli import main

MARK = "symgain_hostile_marker"

#: Texts that try to end a Python string or docstring, or break its escapes.
PYTHON_PAYLOADS = [
    f'x"""\nimport os; os.system("touch {MARK}")\n"""',
    f"x'''\n__import__('os').system('touch {MARK}')\n'''",
    f'x\\"""\n__import__("os").system("touch {MARK}")#',
    f'"""; __import__("os").system("touch {MARK}"); """',
    f'\\\n__import__("os").system("touch {MARK}")',
    "a \\x b \\N{ c \\u12 d \\",
    f"\r__import__('os').system('touch {MARK}')",
    f"\u2028\u2029\x0c__import__('os').system('touch {MARK}')",
    "\x00 nul \x1b[31m red \x7f",
]

#: Texts that try to end a C comment (and add a function that runs before main).
C_PAYLOADS = [
    f'*/\n#include <stdlib.h>\n__attribute__((constructor)) static void p(void) {{ system("touch {MARK}"); }}\n/*',
    f'*/ __attribute__((constructor)) static void q(void) {{ extern int system(const char *); system("touch {MARK}"); }} /*',
    "??/\n*??/\n/ trigraph splice",
    "/* nested /* comment */",
    "\\\n*/ int broken = ;",
]

#: Texts that try to run TeX commands or break the document.
LATEX_PAYLOADS = [
    "\\input{/etc/hostname}",
    f"\\immediate\\write18{{touch {MARK}}}",
    "} \\end{document}",
    "$ \\frac{ $ & % # ~ ^ _ { }",
    "^^5cinput{x} \\\\ \\par \n\n \\section{x}",
    "[optional] \\verb|x| \\catcode`\\@=11",
    "Müller 20 °C ☃ µm",
]

#: Texts that try to start matplotlib math text or a spreadsheet formula.
PLOT_CSV_PAYLOADS = [
    "$\\frac{1}{$",
    "$x^{$ \\undefined $",
    "=HYPERLINK(\"http://example.invalid\")",
    "+1\n,=cmd|' /C calc'!A0",
    "@SUM(1)",
]

ALL_PAYLOADS = PYTHON_PAYLOADS + C_PAYLOADS + LATEX_PAYLOADS + PLOT_CSV_PAYLOADS


def toml_string(text: str) -> str:
    """A TOML basic string holding *text* exactly (JSON escapes are TOML escapes)."""
    return json.dumps(text, ensure_ascii=True)


def cart_text(title="", unit="kg", meaning="mass", name="cart", extra="", params=None,
              poles='["-2", "-3"]', target=None) -> str:
    """A small valid model (a cart with mass m) with the given user texts."""
    params = params or f'm = {{ sign = "positive", range = [1, 2], unit = {toml_string(unit)}, ' \
                       f'meaning = {toml_string(meaning)} }}'
    target = target or f"poles = {poles}"
    return (f'name = {toml_string(name)}\ntitle = {toml_string(title)}\n{extra}\n[parameters]\n{params}\n'
            '[plant]\nstates = ["p", "v"]\ninputs = ["F"]\nA = [["0", "1"], ["0", "0"]]\n'
            f'B = [["0"], ["1/m"]]\n[feedback]\n{target}\n')


def run_cli(args: list[str], cwd: Path | None = None) -> tuple[int, str, str]:
    """Run the command line in this process: (exit code, stdout, stderr)."""
    out, err = io.StringIO(), io.StringIO()
    old = os.getcwd()
    try:
        if cwd is not None:
            os.chdir(cwd)
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            try:
                code = main([str(a) for a in args])
            except SystemExit as exc:  # argparse
                code = exc.code if isinstance(exc.code, int) else 2
    finally:
        os.chdir(old)
    return code, out.getvalue(), err.getvalue()


def one_bounded_line(stderr: str, limit: int = 320) -> bool:
    """True when stderr holds exactly one line of bounded length (the error), warnings aside."""
    lines = [line for line in stderr.splitlines() if not line.startswith("symgain: warning:")]
    return len(lines) == 1 and len(lines[0]) <= limit and "Traceback" not in stderr
