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

import signal
import threading
from contextlib import contextmanager

from .errors import DesignError

__all__ = ["LimitError", "limits", "stage", "current_stage", "DEFAULT_TIME_LIMIT", "DEFAULT_MEMORY_LIMIT"]

DEFAULT_TIME_LIMIT = 600.0  # seconds for one command
DEFAULT_MEMORY_LIMIT = 4096  # megabytes of address space for the command-line process

_state = {"step": "startup", "size": ""}


class LimitError(DesignError):
    """A time or memory limit was reached; the message names the step and the size."""


class _TimeUp(BaseException):
    """Raised by the timer; a BaseException so that no ``except Exception`` inside a library eats it."""


def stage(step: str, size: str | None = None) -> None:
    """Record the step now running (and the size of what it works on; None: the same size)."""
    _state["step"] = step
    if size is not None:
        _state["size"] = size


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
