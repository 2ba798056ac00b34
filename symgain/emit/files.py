"""Writing emitted files atomically.

Every file is first written to a temporary file in the same folder and then
renamed over the target, so a reader never sees half a file and an existing
file is only ever replaced by a complete one. :func:`write_files` renders
nothing itself: callers build every text first, so a failure while
rendering leaves no output at all.

>>> import tempfile, pathlib
>>> folder = pathlib.Path(tempfile.mkdtemp())
>>> [p.name for p in write_files(folder, {"a.txt": "one", "b.txt": "two"})]
['a.txt', 'b.txt']
>>> (folder / "a.txt").read_text()
'one'
>>> write_files(folder / "a.txt" / "x", {"c.txt": ""})
Traceback (most recent call last):
...
symgain.errors.OutputError: cannot create output folder ...
"""
from __future__ import annotations

import os
import tempfile
from pathlib import Path

from ..errors import OutputError

__all__ = ["write_atomic", "write_files", "prepare_folder", "default_folder"]


def prepare_folder(folder) -> Path:
    """The output folder, created if missing; :class:`OutputError` if it cannot be written."""
    folder = Path(folder)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(f"cannot create output folder {str(folder)!r}: {exc.strerror or exc}") from None
    if not folder.is_dir():
        raise OutputError(f"output path {str(folder)!r} is not a folder")
    if not os.access(folder, os.W_OK | os.X_OK):
        raise OutputError(f"output folder {str(folder)!r} is not writable")
    return folder


def write_atomic(path, text: str | bytes) -> Path:
    """Write text (or bytes) to ``path`` through a temporary file in the same folder and a rename."""
    path = Path(path)
    fd = None
    tmp = None
    binary = isinstance(text, bytes)
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)  # an ordinary new file's permissions, not mkstemp's 0600
        with (os.fdopen(fd, "wb") if binary else os.fdopen(fd, "w", encoding="utf-8", newline="\n")) as handle:
            fd = None
            handle.write(text)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(tmp, path)
        tmp = None
    except OSError as exc:
        raise OutputError(f"cannot write {str(path)!r}: {exc.strerror or exc}") from None
    finally:
        if fd is not None:
            os.close(fd)
        if tmp is not None and os.path.exists(tmp):
            os.unlink(tmp)
    return path


def write_files(folder, texts: dict[str, str]) -> list[Path]:
    """Write every ``name -> text`` into ``folder`` atomically; the paths in the given order."""
    folder = prepare_folder(folder)
    return [write_atomic(folder / name, text) for name, text in texts.items()]


def default_folder(model_name: str) -> Path:
    """``./symgain-out/<model name>``, where commands write when no folder is given.

    >>> default_folder("cart").as_posix()
    'symgain-out/cart'
    """
    return Path("symgain-out") / model_name
