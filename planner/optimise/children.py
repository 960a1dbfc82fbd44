"""The solver's child processes and temporary folders never outlive a run.

CBC runs as a child process (PuLP starts it). Each child gets its own process group and,
on Linux, a parent-death signal (``prctl(PR_SET_PDEATHSIG, SIGKILL)``), so that it dies
with Broodline even when Broodline is killed with SIGKILL; on any exception in the
parent (Ctrl-C, SIGTERM turned into an exception by the command line) the children still
running are killed before the exception goes on. Temporary solve folders carry the
process id in their name; a folder left by a process that no longer runs (killed with
SIGKILL, which no handler sees) is removed by the next solve.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import signal
import subprocess
import sys
import tempfile
import weakref
from pathlib import Path

__all__ = ["guard_children", "solve_folder", "live_children"]

_PREFIX = "broodline-solve-"
_CHILDREN: "weakref.WeakSet[subprocess.Popen]" = weakref.WeakSet()


def _die_with_parent() -> None:  # pragma: no cover - runs in the child
    """In the child, before exec: die when the parent dies (Linux only)."""
    if sys.platform.startswith("linux"):
        import ctypes
        with contextlib.suppress(Exception):
            ctypes.CDLL("libc.so.6", use_errno=True).prctl(1, signal.SIGKILL)  # PR_SET_PDEATHSIG


class _GuardedSubprocess:
    """Stands in for the ``subprocess`` module inside PuLP's CBC interface: ``Popen``
    starts the child in its own session with the parent-death signal and remembers it."""

    def __getattr__(self, name):
        return getattr(subprocess, name)

    @staticmethod
    def Popen(*args, **kwargs):  # noqa: N802 - the name PuLP calls
        kwargs.setdefault("start_new_session", True)
        if os.name == "posix":
            kwargs.setdefault("preexec_fn", _die_with_parent)
        proc = subprocess.Popen(*args, **kwargs)
        _CHILDREN.add(proc)
        return proc


def _install() -> None:
    """Point PuLP's CBC interface at the guarded ``Popen`` (once)."""
    with contextlib.suppress(ImportError):
        from pulp.apis import coin_api
        if not isinstance(getattr(coin_api, "subprocess", None), _GuardedSubprocess):
            coin_api.subprocess = _GuardedSubprocess()


def live_children() -> list[subprocess.Popen]:
    """Solver processes of this run still running."""
    return [p for p in list(_CHILDREN) if p.poll() is None]


def _kill_children() -> None:
    for p in live_children():
        with contextlib.suppress(ProcessLookupError, PermissionError, OSError):
            os.killpg(p.pid, signal.SIGKILL)
        with contextlib.suppress(Exception):
            p.wait(timeout=5)


@contextlib.contextmanager
def guard_children():
    """Around a solver call: if anything interrupts it, its children are killed."""
    _install()
    try:
        yield
    except BaseException:
        _kill_children()
        raise


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def _sweep(folder: Path) -> None:
    """Remove solve folders whose process no longer runs."""
    with contextlib.suppress(OSError):
        for d in folder.glob(_PREFIX + "*"):
            pid = d.name[len(_PREFIX):].split("-", 1)[0]
            if pid.isdigit() and int(pid) != os.getpid() and not _alive(int(pid)) \
                    and d.is_dir():
                shutil.rmtree(d, ignore_errors=True)


def solve_folder() -> tempfile.TemporaryDirectory:
    """A temporary folder for one solve, named after this process; stale folders of
    processes that were killed are removed first."""
    _sweep(Path(tempfile.gettempdir()))
    return tempfile.TemporaryDirectory(prefix=f"{_PREFIX}{os.getpid()}-")
