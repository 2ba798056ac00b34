"""Atomic writing of emitted files, output-folder errors, and the emit command."""
import os

import pytest

from emit_helpers import EXAMPLES, design_of
from symgain.cli import main
from symgain.emit import emit
from symgain.emit import files as files_module
from symgain.errors import OutputError


def test_existing_file_replaced_only_by_a_complete_one(tmp_path, monkeypatch):
    target = tmp_path / "gains.py"
    target.write_text("old complete content\n")

    class Broken(Exception):
        pass

    real_fdopen = os.fdopen

    def failing_fdopen(fd, *args, **kwargs):
        handle = real_fdopen(fd, *args, **kwargs)

        def write(_text):
            handle.close()  # half-way: the disk fills up
            raise OSError(28, "No space left on device")
        handle.write = write
        return handle

    monkeypatch.setattr(files_module.os, "fdopen", failing_fdopen)
    with pytest.raises(OutputError, match="No space left on device"):
        files_module.write_atomic(target, "new content")
    assert target.read_text() == "old complete content\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["gains.py"]  # no temporary file left


def test_render_failure_writes_nothing(tmp_path):
    design = design_of(EXAMPLES[0])
    with pytest.raises(OutputError, match="unknown target 'fortran'"):
        emit(design, ["python", "fortran"], tmp_path)
    assert list(tmp_path.iterdir()) == []


def test_every_example_emits_every_target(tmp_path):
    for path in EXAMPLES:
        design = design_of(path)
        written = emit(design, ["python", "c", "latex", "json"], tmp_path / design.model.name)
        assert sorted(p.suffix for p in written) == [".c", ".h", ".json", ".py", ".tex"]
        assert all(p.stat().st_size > 100 for p in written)


def test_cli_emit_and_unwritable_folder(tmp_path, capsys):
    demo = EXAMPLES[1]
    assert main(["emit", demo, "--to", "python", "--to", "c", "-o", str(tmp_path), "--name", "gains"]) == 0
    assert sorted(p.name for p in tmp_path.iterdir()) == ["gains.c", "gains.h", "gains.py"]
    capsys.readouterr()
    blocker = tmp_path / "a_file"
    blocker.write_text("")
    code = main(["emit", demo, "--to", "json", "-o", str(blocker / "sub")])
    err = capsys.readouterr().err
    assert code == 2
    assert err.count("\n") == 1 and "cannot create output folder" in err
    assert main(["emit", demo, "--to", "c", "--name", "not-an-identifier", "-o", str(tmp_path)]) == 2
