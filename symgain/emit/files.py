"""Writing emitted files atomically.

Every file is first written to a temporary file in the same folder and then
renamed over the target, so a reader never sees half a file and an existing
file is only ever replaced by a complete one. :func:`write_files` treats a
set of files as one: every temporary file is written (and synced) first, and
only then are they renamed into place; if any write or rename fails, the
files already replaced get their old contents back and no new file of the
set stays behind. It renders nothing itself: callers build every text first,
so a failure while rendering leaves no output at all. The output folder too
is made only when the first file is written (:func:`prepare_folder` checks it
without creating it), and a folder made for a set that then fails is removed:
a refused command leaves no empty folder behind.

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
>>> later = prepare_folder(folder / "new" / "deeper")  # checked, not made
>>> later.exists(), [p.name for p in write_files(later, {"c.txt": "three"})], later.exists()
(False, ['c.txt'], True)
"""
from __future__ import annotations

import os
import shutil
import tempfile
from pathlib import Path

from ..errors import OutputError, printable

__all__ = ["write_atomic", "write_files", "prepare_folder", "default_folder"]


def prepare_folder(folder) -> Path:
    """The output folder, checked but not created: it is a writable folder, or the nearest
    existing folder above it is writable (so that it can be made when a file is written).

    :class:`OutputError` if it cannot be written. Checking first lets a command refuse a bad
    output path before its computation; creating late means a refused command leaves no folder.
    """
    folder = Path(folder)
    probe = folder
    while not os.path.lexists(probe) and probe != probe.parent:
        probe = probe.parent
    if not os.path.lexists(folder):  # to be made below an existing path
        if not probe.is_dir():
            raise OutputError(f"cannot create output folder {_shown(folder)}: {_shown(probe)} is not a folder")
        if not os.access(probe, os.W_OK | os.X_OK):
            raise OutputError(f"cannot create output folder {_shown(folder)}: {_shown(probe)} is not writable")
        return folder
    if not folder.is_dir():
        raise OutputError(f"output path {_shown(folder)} is not a folder")
    if not os.access(folder, os.W_OK | os.X_OK):
        raise OutputError(f"output folder {_shown(folder)} is not writable")
    return folder


def _make_folder(folder: Path) -> list[Path]:
    """Create the folder (and missing parents); the folders made, deepest first."""
    made = []
    probe = folder
    while not os.path.lexists(probe) and probe != probe.parent:
        made.append(probe)
        probe = probe.parent
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        _remove_folders(made)
        raise OutputError(f"cannot create output folder {_shown(folder)}: {exc.strerror or exc}") from None
    if not folder.is_dir():
        raise OutputError(f"output path {_shown(folder)} is not a folder")
    return made


def _remove_folders(made: list[Path]) -> None:
    """Remove the folders a failed set made (deepest first; only while they are empty)."""
    for path in made:
        try:
            path.rmdir()
        except OSError:
            return


def _temporary(path: Path, text: str | bytes) -> str:
    """A complete, synced temporary copy of *text* beside *path*; its name."""
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
        done, tmp = tmp, None
        return done
    except (OSError, UnicodeEncodeError) as exc:
        raise OutputError(f"cannot write {_shown(path)}: {getattr(exc, 'strerror', None) or exc}") from None
    finally:
        if fd is not None:
            os.close(fd)
        if tmp is not None and os.path.exists(tmp):
            os.unlink(tmp)


def _shown(path) -> str:
    return printable(repr(str(path)), 120)


def write_atomic(path, text: str | bytes) -> Path:
    """Write text (or bytes) to ``path`` through a temporary file in the same folder and a rename."""
    return write_files(Path(path).parent, {Path(path).name: text}, prepare=False)[0]


def write_files(folder, texts: dict[str, str | bytes], prepare: bool = True) -> list[Path]:
    """Write every ``name -> text`` into ``folder`` as one set (all or nothing); the paths in order."""
    folder = prepare_folder(folder) if prepare else Path(folder)
    made = _make_folder(folder)  # only now, when there is something to write
    targets = [folder / name for name in texts]
    temporaries: list[str] = []
    backups: list[tuple[Path, str | None]] = []  # (target, saved old file or None if it was new)
    try:
        for path, text in zip(targets, texts.values()):
            temporaries.append(_temporary(path, text))
        for path, tmp in zip(targets, temporaries):
            saved = None
            if os.path.isdir(path):
                raise OutputError(f"{_shown(path)} is a folder; it cannot be replaced by a file")
            if os.path.lexists(path):
                saved = tempfile.mktemp(prefix=f".{path.name}.", suffix=".old", dir=folder)
                try:
                    os.link(path, saved)
                except OSError:  # no hard links here: keep a copy instead
                    shutil.copy2(path, saved)
            try:
                os.replace(tmp, path)
            except OSError:
                if saved is not None and os.path.exists(saved):
                    os.unlink(saved)
                raise
            backups.append((path, saved))
    except (OSError, OutputError) as exc:
        for path, saved in reversed(backups):  # put the old set back
            try:
                if saved is not None:
                    os.replace(saved, path)
                else:
                    os.unlink(path)
            except OSError:
                pass
        for tmp in temporaries:
            if os.path.exists(tmp):
                os.unlink(tmp)
        _remove_folders(made)
        if isinstance(exc, OutputError):
            raise
        raise OutputError(f"cannot write {_shown(folder)}: {exc.strerror or exc}") from None
    for _, saved in backups:
        if saved is not None and os.path.exists(saved):
            os.unlink(saved)
    return targets


def default_folder(model_name: str) -> Path:
    """``./symgain-out/<model name>``, where commands write when no folder is given.

    >>> default_folder("cart").as_posix()
    'symgain-out/cart'
    """
    return Path("symgain-out") / model_name
