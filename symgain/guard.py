"""Time and memory limits around the heavy steps (symbolic derivation, numeric checks).

Some models make the symbolic algebra explode: a dense 8 x 8 plant with
dozens of parameters can run for minutes and fill gigabytes. The command line
runs every command inside :func:`limits`: past the time limit (a timer
signal, Linux and other POSIX systems) or past the memory limit (the process's
address-space limit, ``resource.RLIMIT_AS``) the command stops with one line
that names the step in progress and the model's size, and exit code 2.

Library code names its steps with :func:`stage`; outside :func:`limits` that
only records the name.

>>> import time
>>> with limits(seconds=0.2):
...     stage("demo loop", "3 states")
...     while True:
...         time.sleep(0.01)
Traceback (most recent call last):
...
symgain.guard.LimitError: time limit of 0.2 s reached in demo loop (3 states); raise it with --time-limit SECONDS or simplify the model
"""
from __future__ import annotations

import os
import select
import signal
import sys
import threading
from contextlib import contextmanager

from .errors import DesignError

__all__ = ["LimitError", "limits", "stage", "current_stage", "supervised", "DEFAULT_TIME_LIMIT",
           "DEFAULT_MEMORY_LIMIT"]

DEFAULT_TIME_LIMIT = 600.0  # seconds for one command
DEFAULT_MEMORY_LIMIT = 4096  # megabytes of address space for the command-line process

_state = {"step": "startup", "size": "", "pipe": None}


class LimitError(DesignError):
    """A time or memory limit was reached; the message names the step and the size."""


class _TimeUp(BaseException):
    """Raised by the timer; a BaseException so that no ``except Exception`` inside a library eats it."""


def stage(step: str, size: str | None = None) -> None:
    """Record the step now running (and the size of what it works on; None: the same size)."""
    _state["step"] = step
    if size is not None:
        _state["size"] = size
    if _state["pipe"] is not None:  # tell the supervising parent (see supervised)
        try:
            os.write(_state["pipe"], (current_stage().replace("\n", " ") + "\n").encode("utf-8", "replace"))
        except OSError:
            _state["pipe"] = None


def current_stage() -> str:
    """``"step (size)"`` of the step now running.

    >>> stage("reading the model", ""); current_stage()
    'reading the model'
    """
    return _state["step"] + (f" ({_state['size']})" if _state["size"] else "")


def _set_memory_limit(megabytes: float):
    """Lower the address-space limit; the previous limits, to restore (None where unsupported)."""
    try:
        import resource
    except ImportError:  # pragma: no cover - not POSIX
        return None
    soft, hard = resource.getrlimit(resource.RLIMIT_AS)
    wanted = int(megabytes * 1024 * 1024)
    if hard != resource.RLIM_INFINITY:
        wanted = min(wanted, hard)
    resource.setrlimit(resource.RLIMIT_AS, (wanted, hard))
    return soft, hard


def _restore_memory_limit(previous) -> None:
    if previous is not None:
        import resource

        resource.setrlimit(resource.RLIMIT_AS, previous)


@contextmanager
def limits(seconds: float | None = None, megabytes: float | None = None):
    """Run the body under a time limit (seconds) and a memory limit (megabytes); ``None``: no limit.

    The time limit needs the main thread and ``SIGALRM``; elsewhere only the
    memory limit applies. A :class:`LimitError` replaces the interrupted step.
    """
    _state["step"], _state["size"] = "startup", ""
    previous = _set_memory_limit(megabytes) if megabytes is not None else None
    timed = (seconds is not None and hasattr(signal, "setitimer")
             and threading.current_thread() is threading.main_thread())
    old = None
    if timed:
        def _alarm(signum, frame):
            raise _TimeUp()

        old = signal.signal(signal.SIGALRM, _alarm)
        signal.setitimer(signal.ITIMER_REAL, seconds, 0.5)  # re-fires every 0.5 s until it lands
    try:
        yield
    except _TimeUp:
        raise LimitError(f"time limit of {seconds:g} s reached in {current_stage()}; raise it with "
                         "--time-limit SECONDS or simplify the model") from None
    except MemoryError:
        limit = f" of {megabytes:g} MB" if megabytes is not None else ""
        raise LimitError(f"memory limit{limit} reached in {current_stage()}; raise it with "
                         "--memory-limit MB or simplify the model") from None
    finally:
        if timed:
            signal.setitimer(signal.ITIMER_REAL, 0)
            signal.signal(signal.SIGALRM, old)
        _restore_memory_limit(previous)


def _write_all(fd: int, data: bytes) -> str | None:
    """Write everything; the reason when the output cannot take it (None when all went well)."""
    try:
        while data:
            data = data[os.write(fd, data):]
    except BrokenPipeError:  # the reader of our output went away (| head): drop the rest quietly
        return ""
    except OSError as exc:  # disk full (> /dev/full), I/O error
        return exc.strerror or str(exc)
    return None


def supervised(run, megabytes: float | None = None) -> int:
    """Run ``run()`` (returning an exit code) in a forked child; report a crash of the child in one line.

    Native libraries abort the whole process when an allocation fails under the
    memory limit (FLINT prints ``Unable to allocate memory`` and raises SIGABRT),
    and the kernel's out-of-memory killer sends SIGKILL: no Python handler runs.
    The parent then prints which step was running and returns 2. Without
    ``os.fork`` (not POSIX) ``run()`` is called directly.
    """
    if not hasattr(os, "fork"):  # pragma: no cover
        return run()
    sys.stdout.flush()
    sys.stderr.flush()
    read_end, write_end = os.pipe()
    err_read, err_write = os.pipe()
    out_read, out_write = os.pipe()
    pid = os.fork()
    if pid == 0:  # the child does the work; its stdout and stderr go through the parent
        for fd in (read_end, err_read, out_read):
            os.close(fd)
        os.dup2(err_write, 2)
        os.dup2(out_write, 1)
        os.close(err_write)
        os.close(out_write)
        _state["pipe"] = write_end
        code = 3
        try:
            code = run()
        except SystemExit as exc:  # argparse errors and --help
            code = exc.code if isinstance(exc.code, int) else (0 if exc.code is None else 2)
        finally:
            try:
                sys.stdout.flush()
                sys.stderr.flush()
            finally:
                os._exit(code if isinstance(code, int) else 3)
    for fd in (write_end, err_write, out_write):
        os.close(fd)
    target = {err_read: 2, out_read: 1}
    failed: dict[int, str] = {}  # output fd -> why writing to it failed
    open_ends = {read_end, err_read, out_read}
    try:
        last = _relay(open_ends, read_end, target, failed)
    except KeyboardInterrupt:
        os.waitpid(pid, 0)
        print("symgain: interrupted", file=sys.stderr)
        return 130
    _, status = os.waitpid(pid, 0)
    if failed.get(1):
        print(f"symgain: cannot write the output: {failed[1]}", file=sys.stderr)
        return 2
    return _verdict(status, last, megabytes)


def _relay(open_ends, read_end, target, failed) -> str:
    """Copy the child's output to ours and keep the last stage it reported, until all pipes close."""
    last, pending, quiet = "startup", b"", False
    while open_ends:
        ready, _, _ = select.select(list(open_ends), [], [])
        for fd in ready:
            data = os.read(fd, 65536)
            if not data:
                open_ends.discard(fd)
                os.close(fd)
            elif fd == read_end:
                pending += data
                *lines, pending = pending.split(b"\n")
                for line in lines:
                    last = line.decode("utf-8", "replace").strip() or last
            else:
                if b"FLINT exception" in data:  # a native abort message: replaced by our one line
                    data, quiet = data.split(b"FLINT exception")[0], True
                if data and not quiet and target[fd] not in failed:
                    problem = _write_all(target[fd], data)
                    if problem is not None:
                        failed[target[fd]] = problem
    return last


def _verdict(status: int, last: str, megabytes) -> int:
    if os.WIFEXITED(status):
        return os.WEXITSTATUS(status)
    signum = os.WTERMSIG(status)
    limit = f" (limit {megabytes:g} MB)" if megabytes is not None else ""
    if signum in (signal.SIGABRT, signal.SIGKILL, signal.SIGSEGV, signal.SIGBUS):
        what = f"ran out of memory{limit}" if signum in (signal.SIGABRT, signal.SIGKILL) else "crashed"
        print(f"symgain: {what} in {last}; raise --memory-limit MB or simplify the model "
              f"(stopped by signal {signal.Signals(signum).name})", file=sys.stderr)
        return 2
    print(f"symgain: stopped by signal {signal.Signals(signum).name} in {last}", file=sys.stderr)
    return 2
