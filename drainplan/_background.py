"""Run one independent piece of a job in a second process, beside the main work.

A design has parts that need none of each other's results (the season simulation
beside the layout and the pipes; the GeoPackage beside the figures and the sheet).
On a machine with more than one core, :func:`start` forks the process and runs the
piece in the child; :meth:`Task.result` collects its return value, its warnings or
its exception, exactly as if it had run here. The child writes nothing to the
terminal of its own and never returns into the caller's code (it leaves with
``os._exit``).

It runs the piece in this process instead (when the result is asked for) where a
fork is unavailable or unsafe: no ``os.fork`` (Windows), one usable core, another
thread in this process (a fork copies only the calling thread; the few threads
known to be fork-safe are not counted), or ``DRAINPLAN_BACKGROUND=0`` in the
environment. Either way the numbers are the same:
the same code runs on the same inputs.
"""

from __future__ import annotations

import os
import pickle
import sys
import warnings

__all__ = ["start", "Task", "available"]


#: Threads a fork is known to be safe with: jemalloc's background thread (started by
#: pyarrow, which pandas loads); jemalloc re-initialises it in the child through its
#: own fork handlers.
FORK_SAFE_THREADS = ("jemalloc_bg_thd",)


def _threads():
    """Threads of this process, those in :data:`FORK_SAFE_THREADS` not counted."""
    try:
        tasks = os.listdir("/proc/self/task")
    except OSError:
        import threading

        return threading.active_count()
    n = 0
    for tid in tasks:
        try:
            with open(f"/proc/self/task/{tid}/comm") as fh:
                name = fh.read().strip()
        except OSError:                 # a thread that just ended
            continue
        n += name not in FORK_SAFE_THREADS
    return n


def available():
    """True when :func:`start` would run its piece in a second process."""
    if os.environ.get("DRAINPLAN_BACKGROUND", "1").strip() in ("0", "no", "false", "off"):
        return False
    if not hasattr(os, "fork"):
        return False
    try:
        cores = len(os.sched_getaffinity(0))
    except (AttributeError, OSError):
        cores = os.cpu_count() or 1
    return cores > 1 and _threads() == 1


def _die_with_parent(parent):
    """Have the kernel stop this (child) process if its parent dies (Linux), so a
    parent killed outright leaves no work running on its own."""
    try:
        import ctypes
        import signal

        libc = ctypes.CDLL(None, use_errno=True)
        pr_set_pdeathsig = 1                        # <sys/prctl.h>
        libc.prctl(pr_set_pdeathsig, signal.SIGKILL, 0, 0, 0)
    except (OSError, AttributeError):               # not Linux: the piece runs to its end
        return
    if os.getppid() != parent:                      # the parent died before the call
        os._exit(1)


class Task:
    """A piece of work started by :func:`start`; :meth:`result` waits for it."""

    def __init__(self, fn, args, kwargs):
        self._call = (fn, args, kwargs)
        self._pid = None
        self._fd = None
        self._done = False
        self._value = None

    # -- in the child ------------------------------------------------------------------
    def _child(self, write_fd, parent):
        code = 0
        try:
            _die_with_parent(parent)
            fn, args, kwargs = self._call
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always")
                try:
                    out = ("ok", fn(*args, **kwargs))
                except BaseException as exc:        # noqa: BLE001 - handed to the parent
                    out = ("error", exc)
            shown = [(str(w.message), w.category) for w in caught]
            try:
                data = pickle.dumps((out, shown), protocol=pickle.HIGHEST_PROTOCOL)
            except Exception:                       # an unpicklable result or error
                data = pickle.dumps((("unpicklable", None), shown))
            with os.fdopen(write_fd, "wb") as fh:
                fh.write(data)
        except BaseException:                       # noqa: BLE001 - never return to the caller
            code = 1
        finally:
            os._exit(code)

    def _fork(self):
        read_fd, write_fd = os.pipe()
        for stream in (sys.stdout, sys.stderr):
            try:
                stream.flush()
            except Exception:                       # a closed or odd stream: nothing to flush
                pass
        parent = os.getpid()
        with warnings.catch_warnings():             # threads known to be fork-safe only
            warnings.simplefilter("ignore", DeprecationWarning)
            pid = os.fork()
        if pid == 0:                                # the child
            os.close(read_fd)
            self._child(write_fd, parent)
        os.close(write_fd)
        self._pid, self._fd = pid, read_fd

    # -- in the caller -----------------------------------------------------------------
    def running(self):
        """True while the piece is still working in the second process (False once it
        has finished, or when it runs in this process)."""
        if self._pid is None or self._done:
            return False
        import select

        return not select.select([self._fd], [], [], 0)[0]

    def result(self):
        """The piece's return value (its exception raised, its warnings re-issued here)."""
        if not self._done:
            self._done = True
            self._value = self._collect()
        kind, value = self._value
        if kind == "error":
            raise value
        return value

    def _run_here(self):
        fn, args, kwargs = self._call
        try:
            return ("ok", fn(*args, **kwargs))
        except Exception as exc:                    # raised by result(), like the child's
            return ("error", exc)

    def _collect(self):
        if self._pid is None:
            return self._run_here()
        try:
            with os.fdopen(self._fd, "rb") as fh:
                self._fd = None
                data = fh.read()
        finally:
            _, status = os.waitpid(self._pid, 0)
            self._pid = None
        try:
            out, shown = pickle.loads(data) if data else (("lost", None), [])
        except Exception:                           # a truncated message: the child died
            out, shown = ("lost", None), []
        if out[0] in ("lost", "unpicklable") or status != 0:
            return self._run_here()                 # the same work, in this process
        for message, category in shown:
            warnings.warn(message, category, stacklevel=3)
        return out

    def cancel(self):
        """Stop the child if it is still running (nothing is collected); nothing to do
        once :meth:`result` has been called."""
        if self._done:
            return
        if self._pid is not None:
            import signal

            try:
                os.kill(self._pid, signal.SIGKILL)
                os.waitpid(self._pid, 0)
            except OSError:
                pass
            self._pid = None
        if self._fd is not None:
            try:
                os.close(self._fd)
            except OSError:
                pass
            self._fd = None
        self._done = True
        self._value = ("error", RuntimeError("cancelled"))

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.cancel()
        return False


def start(fn, *args, **kwargs):
    """Start ``fn(*args, **kwargs)`` in a second process when that is safe and useful,
    else leave it to run here when :meth:`Task.result` is called.

    The piece must not depend on anything the caller does after starting it, and
    its return value (or exception) must be picklable; files it writes are its only
    other effect.
    """
    task = Task(fn, args, kwargs)
    if available():
        try:
            task._fork()
        except OSError:                             # no process to spare: run it here
            task._pid = None
    return task
