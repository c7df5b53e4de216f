"""Scans on a Dask cluster: two worker processes on 127.0.0.1 (a LocalCluster), the same
results as a local run to the last bit, also when a worker is killed mid-scan and when a
scan is resumed from a store."""

import os
import signal
import threading
import time

import numpy as np
import pytest

import phaselab
from phaselab.scan import chaos_map, escape_map, state_grid

distributed = pytest.importorskip("distributed")

pytestmark = pytest.mark.slow


@pytest.fixture(scope="module")
def client():
    """Two single-threaded worker processes (they inherit PHASELAB_CACHE_DIR, so they load
    the kernels this session compiled)."""
    import logging

    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                                  dashboard_address=None, silence_logs=logging.CRITICAL) as cluster, \
            distributed.Client(cluster) as c:
        yield c


@pytest.fixture(scope="module")
def kicked_rotor():
    return phaselab.models.standard_map()


def worker_pids(client):
    return set(client.run(os.getpid).values())


def test_local_dask_and_resumed_runs_agree(client, kicked_rotor, hh, tmp_path, monkeypatch):
    """The random initial deviation vectors depend on the seed and each orbit's own state
    only, so a local run, a Dask run and a run resumed (on the cluster) from a store that a
    local run left half-finished give the same indicators to the last bit, for a map and
    for a flow; escape maps agree as well."""
    from phaselab.scan import chaos_maps

    grid = state_grid(kicked_rotor, {"q": (0.1, 6.0, 8), "p": (0.1, 6.0, 6)})
    args = dict(indicator="fli", params={"K": 1.5})
    local = chaos_map(kicked_rotor, grid, 300, batch_size=7, **args)
    remote = chaos_map(kicked_rotor, grid, 300, client=client, **args)
    assert remote.run.where.startswith("tcp://127.0.0.1")
    np.testing.assert_array_equal(local.values, remote.values)

    store = tmp_path / "fli.zarr"
    real = chaos_maps._chunk
    calls = []

    def interrupted(*a, **k):
        if len(calls) == 3:
            raise KeyboardInterrupt
        calls.append(1)
        return real(*a, **k)

    monkeypatch.setattr(chaos_maps, "_chunk", interrupted)
    with pytest.raises(KeyboardInterrupt):
        chaos_map(kicked_rotor, grid, 300, batch_size=6, store=store, **args)
    monkeypatch.setattr(chaos_maps, "_chunk", real)
    resumed = chaos_map(kicked_rotor, grid, 300, client=client, store=store, **args)
    assert (resumed.run.reused, resumed.run.computed) == (3, 5)
    np.testing.assert_array_equal(resumed.values, local.values)

    # Henon-Heiles (E = 1/8, x = 0): MEGNO over a small shell grid
    shell = phaselab.shell_grid(hh, {"y": (-0.4, 0.6, 5), "py": (-0.4, 0.4, 4)}, energy=0.125,
                                plane={"x": 0.0}, solve_for="px")
    a = chaos_map(hh, shell, 10.0, method="yoshida4", dt=0.01)
    b = chaos_map(hh, shell, 10.0, method="yoshida4", dt=0.01, client=client, batch_size=3)
    np.testing.assert_array_equal(a.values, b.values)
    assert np.isfinite(a.values[shell.valid]).all()
    e1 = escape_map(kicked_rotor, grid, 200, box={"p": (0.0, 6.0)}, params={"K": 1.5})
    e2 = escape_map(kicked_rotor, grid, 200, box={"p": (0.0, 6.0)}, params={"K": 1.5}, client=client,
                    batch_size=5)
    np.testing.assert_array_equal(e1.survival, e2.survival)
    assert 0 < e1.survived.sum() < len(grid.states)


def test_a_killed_worker_does_not_change_the_result(client, kicked_rotor, tmp_path):
    """One of the two worker processes is killed (SIGKILL) once the scan has finished a
    chunk; the scheduler reruns its chunks on the other worker and on the one the nanny
    starts in its place, and the map equals the local run."""
    import zarr

    grid = state_grid(kicked_rotor, {"q": (0.1, 6.0, 24), "p": (0.1, 6.0, 24)})
    args = dict(indicator="megno", params={"K": 1.1}, batch_size=24)
    t = 20000                                 # about 0.1 s per chunk of 24 seeds on one thread
    chaos_map(kicked_rotor, grid.states[:4], 10, client=client, **args)     # warm both workers
    local = chaos_map(kicked_rotor, grid, t, **args)
    store = tmp_path / "megno.zarr"
    before = worker_pids(client)
    assert len(before) == 2
    killed = {}

    def kill_one():
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline:
            time.sleep(0.05)
            try:
                done = np.asarray(zarr.open_group(str(store), mode="r")["chunk_done"][:])
            except Exception:
                continue
            if done.any():
                killed["done_then"] = int(done.sum())
                killed["pid"] = sorted(before)[0]
                os.kill(killed["pid"], signal.SIGKILL)
                return

    watcher = threading.Thread(target=kill_one, daemon=True)
    watcher.start()
    remote = chaos_map(kicked_rotor, grid, t, client=client, store=store, progress=False, **args)
    watcher.join(timeout=5)
    assert "pid" in killed, "the scan ended before a worker could be killed"
    assert killed["done_then"] < remote.run.chunks           # killed mid-scan
    np.testing.assert_array_equal(remote.values, local.values)
    np.testing.assert_array_equal(remote.status, local.status)
    client.wait_for_workers(2, timeout=30)
    assert killed["pid"] not in worker_pids(client)
