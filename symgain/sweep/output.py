"""Writing output files: the folder is checked once, every file is written atomically.

A file is first written to a temporary file in the same folder and then moved
over the target with ``os.replace``, so a reader never sees half a file.

>>> import tempfile, pathlib
>>> folder = prepare_folder(pathlib.Path(tempfile.mkdtemp()) / "out")
>>> write_atomic(folder / "a.txt", "hello\\n").read_text()
'hello\\n'
"""
from __future__ import annotations

import os
import tempfile
from pathlib import Path

from ..errors import OutputError, Where

__all__ = ["prepare_folder", "write_atomic", "default_folder"]


def default_folder(model_name: str) -> Path:
    """``./symgain-out/<model name>``."""
    return Path("symgain-out") / model_name


def prepare_folder(folder: str | Path) -> Path:
    """Create the folder (and parents); OutputError when it cannot be written."""
    folder = Path(folder)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(f"cannot create the output folder: {exc.strerror or exc}",
                          where=Where(str(folder))) from None
    if not folder.is_dir() or not os.access(folder, os.W_OK | os.X_OK):
        raise OutputError("the output folder is not writable", where=Where(str(folder)))
    return folder


def write_atomic(path: str | Path, data: str | bytes) -> Path:
    """Write text or bytes to ``path`` through a temporary file and ``os.replace``."""
    path = Path(path)
    mode = "wb" if isinstance(data, bytes) else "w"
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    except OSError as exc:
        raise OutputError(f"cannot write: {exc.strerror or exc}", where=Where(str(path))) from None
    try:
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)  # the permissions of an ordinary new file, not mkstemp's 0600
        with os.fdopen(fd, mode, **({} if mode == "wb" else {"encoding": "utf-8", "newline": ""})) as fh:
            fh.write(data)
        os.replace(tmp, path)
    except OSError as exc:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise OutputError(f"cannot write: {exc.strerror or exc}", where=Where(str(path))) from None
    return path
