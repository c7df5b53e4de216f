"""The machine-wide compile lock: a second process waits while the first holds it, and the
lock of a process that dies is released (POSIX advisory locks, common practice)."""

import subprocess
import sys
import textwrap
import time

import pytest

from phaselab.base.locks import file_lock

pytest.importorskip("fcntl")

HOLDER = textwrap.dedent("""
    import sys, time
    from phaselab.base.locks import file_lock
    with file_lock(sys.argv[1]):
        print("held", flush=True)
        time.sleep(float(sys.argv[2]))
""")


def _holder(path, seconds):
    proc = subprocess.Popen([sys.executable, "-c", HOLDER, str(path), str(seconds)],
                            stdout=subprocess.PIPE, text=True)
    assert proc.stdout.readline().strip() == "held"
    return proc


def test_second_holder_waits_for_the_first(tmp_path):
    lock = tmp_path / ".lock-demo"
    proc = _holder(lock, 1.5)
    t0 = time.perf_counter()
    with file_lock(lock):
        waited = time.perf_counter() - t0
    proc.wait(timeout=60)
    assert waited > 0.5


def test_lock_of_a_killed_process_is_released(tmp_path):
    lock = tmp_path / ".lock-demo"
    proc = _holder(lock, 600)
    proc.kill()
    proc.wait(timeout=60)
    t0 = time.perf_counter()
    with file_lock(lock):
        pass
    assert time.perf_counter() - t0 < 5.0


def test_unwritable_place_runs_without_lock(tmp_path):
    with file_lock(tmp_path / "missing-folder" / ".lock"):
        ran = True
    assert ran
