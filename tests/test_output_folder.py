"""A refused command leaves no output folder behind; the folder is made only when files are written.

Every refusal below happens after the command has looked at its output folder (the
computation refuses, not the argument parser), so a folder made up front would stay
behind empty. The default folder (symgain-out/<model>) is checked too.
"""
from __future__ import annotations

from pathlib import Path

import pytest

from hostile_helpers import one_bounded_line, run_cli
from symgain.emit.files import prepare_folder, write_files
from symgain.errors import OutputError

ROOT = Path(__file__).resolve().parent.parent
CART = ROOT / "examples" / "greenhouse_cart.toml"
SAMPLED = ROOT / "examples" / "sampled_stage.toml"


def _estimator_only(tmp_path) -> Path:
    """greenhouse_cart with an [estimator] and no [feedback]: loads, derives, then most commands refuse."""
    text = CART.read_text()
    text = text[:text.index("[feedback]")] + '[estimator]\npoles = ["-10", "-12"]\n'
    path = tmp_path / "estimator_only.toml"
    path.write_text(text)
    return path


CASES = {
    "schedule": lambda m: ["schedule", CART, "--over", "m=15:90:300", "--over", "c=0:12:300"],  # over 40 000
    "plot": lambda m: ["plot", "--step", m],
    "simulate": lambda m: ["simulate", m],
    "simulate-period": lambda m: ["simulate", SAMPLED, "--sample-time", "0.01"],  # made for 0.002 s
    "robust": lambda m: ["robust", m, "--mismatch", "m"],
    "emit-simulation": lambda m: ["emit", m, "--to", "latex", "--with-simulation"],
}


@pytest.mark.parametrize("command", list(CASES))
def test_refused_command_leaves_no_folder(command, tmp_path):
    model = _estimator_only(tmp_path)
    out = tmp_path / "out" / "deeper"
    option = "--out" if command.startswith("emit") else "--output"
    code, _, err = run_cli([*CASES[command](model), option, out])
    assert code == 2 and one_bounded_line(err), err
    assert not (tmp_path / "out").exists()
    code, _, err = run_cli(CASES[command](model), cwd=tmp_path)  # the default folder
    assert code == 2 and one_bounded_line(err), err
    assert not (tmp_path / "symgain-out").exists()


def test_successful_command_makes_the_folder(tmp_path):
    out = tmp_path / "new" / "folder"
    code, stdout, err = run_cli(["emit", CART, "--to", "python", "--out", out])
    assert code == 0, err
    assert (out / "greenhouse_cart.py").is_file() and str(out / "greenhouse_cart.py") in stdout


def test_unwritable_output_is_refused_before_the_work(tmp_path):
    blocker = tmp_path / "a_file"
    blocker.write_text("not a folder")
    code, _, err = run_cli(["emit", CART, "--to", "c", "--out", blocker / "x"])
    assert code == 2 and one_bounded_line(err) and "cannot create output folder" in err
    with pytest.raises(OutputError, match="is not a folder"):
        prepare_folder(blocker)


def test_failed_set_removes_the_folders_it_made(tmp_path):
    """A set whose second file cannot be written (a folder stands at its name) leaves nothing."""
    target = tmp_path / "made" / "here"
    with pytest.raises(OutputError):
        write_files(target, {"a.txt": "one", "": "the folder itself cannot be a file"})
    assert not (tmp_path / "made").exists()
    kept = tmp_path / "kept"
    kept.mkdir()
    with pytest.raises(OutputError):
        write_files(kept, {"a.txt": "one", "": "x"})
    assert kept.is_dir() and list(kept.iterdir()) == []  # an existing folder stays, emptied of the set
