"""A scan whose process is killed outright (SIGKILL, as a batch system ends a job past its
time) resumes from its Zarr store: the rerun computes only the missing chunks and equals an
uninterrupted run exactly."""

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

import phaselab
from phaselab.scan import chaos_map, state_grid

zarr = pytest.importorskip("zarr")

ROOT = Path(__file__).resolve().parents[2]

SCRIPT = """
import sys
import numpy as np
import phaselab
rotor = phaselab.models.standard_map()
grid = phaselab.state_grid(rotor, {"q": (0.1, 6.0, 16), "p": (0.1, 6.0, 16)})
phaselab.chaos_map(rotor, grid, 20000, params={"K": 1.1}, batch_size=8, store=sys.argv[1], progress=False)
print("finished")
"""


@pytest.mark.slow
def test_a_killed_scan_resumes_from_its_store(tmp_path):
    store = tmp_path / "megno.zarr"
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    proc = subprocess.Popen([sys.executable, "-c", SCRIPT, str(store)], env=env, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE)
    done_then = 0
    try:
        deadline = time.monotonic() + 90
        while time.monotonic() < deadline and proc.poll() is None:
            time.sleep(0.05)
            try:
                done_then = int(np.asarray(zarr.open_group(str(store), mode="r")["chunk_done"][:]).sum())
            except Exception:
                continue
            if done_then >= 2:
                proc.send_signal(signal.SIGKILL)
                break
    finally:
        if proc.poll() is None and done_then < 2:
            proc.kill()
        proc.wait(timeout=30)
    assert proc.returncode == -signal.SIGKILL, proc.stderr.read().decode()[-2000:]
    rotor = phaselab.models.standard_map()
    grid = state_grid(rotor, {"q": (0.1, 6.0, 16), "p": (0.1, 6.0, 16)})
    resumed = chaos_map(rotor, grid, 20000, params={"K": 1.1}, batch_size=8, store=store)
    assert 2 <= resumed.run.reused < resumed.run.chunks == 32
    assert resumed.run.computed == resumed.run.chunks - resumed.run.reused
    whole = chaos_map(rotor, grid, 20000, params={"K": 1.1}, batch_size=8)
    np.testing.assert_array_equal(resumed.values, whole.values)
    np.testing.assert_array_equal(resumed.t_end, whole.t_end)
