"""Running an independent piece of a job in a second process (drainplan._background).

The piece must give exactly what it gives in this process: its value, its
exception (with the input it names), its warnings. Checked against running the
same function directly (derived checks, no published values involved).
"""

import os
import signal
import sys
import warnings
from pathlib import Path

import numpy as np
import pytest

from drainplan import _background as background
from drainplan.errors import InputError


def _work(n):
    rng = np.random.default_rng(n)
    return {"pid": os.getpid(), "values": rng.normal(size=n), "sum": float(rng.normal(size=n).sum())}


def _fails():
    raise InputError("drain radius 0.5 m must be smaller than the depth", param="drain_radius")


def _warns():
    warnings.warn("this spacing is outside the method's range", UserWarning)
    return 7


def _dies_in_child(parent):
    if os.getpid() != parent:           # the child dies without a word
        os.kill(os.getpid(), signal.SIGKILL)
    return "ran here"


needs_fork = pytest.mark.skipif(not background.available(),
                                reason="no second process here (one core, threads or no fork)")


@needs_fork
def test_value_comes_from_a_second_process():
    task = background.start(_work, 1000)
    out = task.result()
    direct = _work(1000)
    assert out["pid"] != os.getpid()
    np.testing.assert_array_equal(out["values"], direct["values"])
    assert out["sum"] == direct["sum"]
    assert task.result() is out          # collected once


def test_error_is_raised_with_its_input_name():
    task = background.start(_fails)
    with pytest.raises(InputError, match="drain radius 0.5 m") as info:
        task.result()
    assert info.value.param == "drain_radius"


def test_warnings_are_issued_here():
    task = background.start(_warns)
    with pytest.warns(UserWarning, match="outside the method's range"):
        assert task.result() == 7


@needs_fork
def test_a_child_that_dies_is_replaced_by_running_here():
    assert background.start(_dies_in_child, os.getpid()).result() == "ran here"


def test_switched_off_runs_here(monkeypatch):
    monkeypatch.setenv("DRAINPLAN_BACKGROUND", "0")
    assert not background.available()
    assert background.start(_work, 10).result()["pid"] == os.getpid()


@needs_fork
def test_cancel_stops_the_child():
    task = background.start(_work, 10)
    pid = task._pid
    task.cancel()
    with pytest.raises(ProcessLookupError):
        os.kill(pid, 0)                  # reaped: no such process


def _sleep_then(value, seconds):
    import time

    time.sleep(seconds)
    return value


@needs_fork
def test_running_until_the_piece_is_done():
    import time

    task = background.start(_sleep_then, 5, 0.5)
    assert task.running()
    time.sleep(1.0)
    assert not task.running()           # finished: its result waits in the pipe
    assert task.result() == 5 and not task.running()


@needs_fork
@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="parent-death signal: Linux")
def test_child_stops_when_its_parent_is_killed(tmp_path):
    """A parent killed outright (SIGKILL, no chance to stop its child) leaves no child
    working on its own."""
    import subprocess
    import textwrap
    import time

    script = tmp_path / "parent.py"
    script.write_text(textwrap.dedent(f"""
        import os, sys, time
        sys.path.insert(0, {str(Path(__file__).parent)!r})
        from drainplan import _background
        import test_background as t
        task = _background.start(t._sleep_then, 1, 30.0)
        print(task._pid, flush=True)
        time.sleep(60)
    """))
    p = subprocess.Popen([sys.executable, str(script)], stdout=subprocess.PIPE, text=True,
                         env={**os.environ, "OPENBLAS_NUM_THREADS": "1"})
    child = int(p.stdout.readline())
    os.kill(child, 0)                    # running
    p.kill()
    p.wait()
    for _ in range(50):
        time.sleep(0.1)
        try:
            os.kill(child, 0)
        except ProcessLookupError:
            break
        # a zombie waits for init to reap it: count it as stopped
        try:
            with open(f"/proc/{child}/stat") as fh:
                if fh.read().split(")")[-1].split()[0] == "Z":
                    break
        except OSError:
            break
    else:
        os.kill(child, signal.SIGKILL)
        pytest.fail("the child outlived its killed parent")
