"""Work on the machine's second core: a call run in a forked child process, its result piped back.

A large compile has stages that do not depend on each other (the pre-hardware checks of the IR
while the scheduler runs; the listing while the shift file and the cycle table are written).
`run_forked` starts such a call in a child made by fork, which shares the parent's loaded board
and program copy-on-write, so nothing is copied to start it; only the result travels back,
pickled through a pipe. The caller goes on with its own work and collects the result with
`Pending.result()`, which returns the value or raises the child's exception. A child that
dies without a result (killed, or a result that cannot be pickled) costs time, not the answer:
the call is then made again in the parent.

The call runs in the parent instead, before `run_forked` returns, when forking is not
possible or not useful: no `os.fork` (Windows), a single usable core, other threads running
(a forked child would inherit their locks in whatever state they are), or the environment
variable SCANLOOM_JOBS=1. Results are the same either way; only the time differs.
"""

from __future__ import annotations

import os
import pickle
import sys
import threading
import traceback
from typing import Any, Callable, Generic, TypeVar

__all__ = ["Pending", "forking_possible", "run_forked"]

T = TypeVar("T")

JOBS_VARIABLE = "SCANLOOM_JOBS"
try:  # a child must leave this way even where os._exit has been replaced (tests do)
    from posix import _exit as _leave_child
except ImportError:  # no fork on this system either: the children below are never made
    _leave_child = os._exit


class Pending(Generic[T]):
    """The result of a call, in a child process or already computed in this one."""

    def __init__(self, *, value: Any = None, error: BaseException | None = None,
                 pid: int | None = None, reader: int | None = None,
                 call: tuple[Callable[..., T], tuple[Any, ...]] | None = None) -> None:
        self._value = value
        self._error = error
        self._pid = pid
        self._reader = reader
        self._call = call
        self.ran_here_after = ""  # why a forked call was run again here, if it was

    def result(self) -> T:
        """The call's return value; its exception raised here when it raised one."""
        if self._reader is not None:
            self._collect()
        if self._error is not None:
            raise self._error
        return self._value

    def _collect(self) -> None:
        reader, self._reader = self._reader, None
        assert reader is not None
        chunks = []
        with os.fdopen(reader, "rb") as stream:  # read everything before waiting: no deadlock
            while True:
                chunk = stream.read(1 << 20)
                if not chunk:
                    break
                chunks.append(chunk)
        pid, self._pid = self._pid, None
        assert pid is not None
        _, status = os.waitpid(pid, 0)
        payload = b"".join(chunks)
        kind, content = pickle.loads(payload) if payload else (
            "failed", f"the worker process ended without a result ({_describe(status)})")
        if kind == "value":
            self._value = content
        elif kind == "error":
            self._error = content
        else:  # the child died or could not send its result: do the work here after all
            self.ran_here_after = content
            assert self._call is not None
            function, args = self._call
            done = _run_here(function, args)
            self._value, self._error = done._value, done._error


def forking_possible() -> bool:
    """Whether `run_forked` would start a child here (see the module docstring)."""
    if os.environ.get(JOBS_VARIABLE, "").strip() == "1":
        return False
    if not hasattr(os, "fork") or sys.platform != "linux":
        return False
    if threading.active_count() > 1:
        return False
    try:
        cores = len(os.sched_getaffinity(0))
    except (AttributeError, OSError):
        cores = os.cpu_count() or 1
    return cores > 1


def run_forked(function: Callable[..., T], *args: Any) -> Pending[T]:
    """`function(*args)` in a forked child when that is possible, else right here.

    The function must not print and must return (or raise) something picklable; whatever it
    changes in memory stays in the child.
    """
    if not forking_possible():
        return _run_here(function, args)
    reader, writer = os.pipe()
    for stream in (sys.stdout, sys.stderr):  # nothing buffered may be written twice
        try:
            stream.flush()
        except (OSError, ValueError):
            pass
    pid = os.fork()
    if pid == 0:  # the child: compute, send, leave without running the parent's cleanups
        os.close(reader)
        status = 0
        try:
            payload = _payload(function, args)
            with os.fdopen(writer, "wb") as stream:
                stream.write(payload)
        except BaseException:  # noqa: BLE001 - nothing may escape a forked child
            status = 70
        finally:
            _leave_child(status)
    os.close(writer)
    return Pending(pid=pid, reader=reader, call=(function, args))


def _run_here(function: Callable[..., T], args: tuple[Any, ...]) -> Pending[T]:
    try:
        return Pending(value=function(*args))
    except Exception as error:  # noqa: BLE001 - raised again by result(), as a child's would be
        return Pending(error=error)


def _payload(function: Callable[..., Any], args: tuple[Any, ...]) -> bytes:
    try:
        message: tuple[str, Any] = ("value", function(*args))
    except Exception as error:  # noqa: BLE001 - sent back to be raised in the parent
        message = ("error", error)
    try:
        return pickle.dumps(message, protocol=pickle.HIGHEST_PROTOCOL)
    except Exception:  # noqa: BLE001 - an unpicklable result or exception: send its text
        return pickle.dumps(("failed", "the worker process could not send its result back:\n"
                             + traceback.format_exc()), protocol=pickle.HIGHEST_PROTOCOL)


def _describe(status: int) -> str:
    if os.WIFSIGNALED(status):
        return f"killed by signal {os.WTERMSIG(status)}"
    return f"exit status {os.waitstatus_to_exitcode(status)}"
