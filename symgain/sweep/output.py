"""Writing output files: the folder is checked once, every file is written atomically.

A file is first written to a temporary file in the same folder and then moved
over the target with ``os.replace``, so a reader never sees half a file.

>>> import tempfile, pathlib
>>> folder = prepare_folder(pathlib.Path(tempfile.mkdtemp()) / "out")
>>> write_atomic(folder / "a.txt", "hello\\n").read_text()
'hello\\n'
"""
from __future__ import annotations

from pathlib import Path

from ..emit.files import prepare_folder, write_atomic  # one atomic writer for every output

__all__ = ["prepare_folder", "write_atomic", "default_folder"]


def default_folder(model_name: str) -> Path:
    """``./symgain-out/<model name>``."""
    return Path("symgain-out") / model_name
