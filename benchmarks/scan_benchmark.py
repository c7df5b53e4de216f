"""Scan speed, side by side in one run (issue 13): a MEGNO map against a hand-written numba
loop, the same map on two single-threaded Dask workers against the local run, and resuming
a half-done 128 x 128 scan against the full scan.

The case: Henon-Heiles, E = 1/8, section plane x = 0 (px > 0 solved from H = E), a grid of
(y, py) over [-0.5, 0.75] x [-0.5, 0.5] (points outside the energy shell skipped), MEGNO
with Yoshida 4 and dt = 0.01.

1. MEGNO map, 48 x 48 grid, t = 200, both cores: ``phaselab.chaos_map`` against the floor
   (``floor_megno`` below): one numba ``prange`` loop over orbits, specialised to this
   Hamiltonian: the Yoshida 4 composition of leapfrogs and its exact tangent map (drift
   dq += c dp, kick dp -= d Hess V(q) dq with the Hessian written by hand), one deviation
   vector renormalised after every step, and the time-averaged MEGNO accumulated as
   phaselab does it (Cincotta & Simo 2000). Both start from the same deviation vectors
   (phaselab.orbits.chaos.deviation_vectors), so their values agree to round-off on
   regular orbits; the agreement is printed. phaselab runs with its inlined loops
   (``PHASELAB_LOOPS=inlined``: the system's kernels compiled into the loops, built in this
   process before timing; for this H = p^2/2 + V(q) the loop stepping two orbits side by side,
   loops/tangent_lanes.py) and, for comparison, with the generic loops (kernels called
   through a function pointer, compiled once per machine). Target: inlined / floor <= 1.3
   (issue 20; 1.5 before). 2026-12, CPU time, 2 cores shared: 1.81 before, 1.19 after.
   The floor measured on the 2-core development machine (2026-12, shared, load average
   2-7 from other work; best of 3 runs): 1.07-1.13 CPU seconds, 0.63-1.7 s wall.
   Where ``../shared/benchmarks/megno_floor.py`` exists beside the checkout, that
   independent floor (its own Yoshida 4 loop and MEGNO sums) is timed on the same seeds
   too, with the ratio inlined / independent (target <= 1.3). The two floors take the same
   CPU time (2026-12: 1.09 and 1.10 s); read the CPU column on a shared machine.
2. The same map on a LocalCluster of two worker processes with one thread each (each
   chunk a task on one thread) against the local run (both cores, one process). Target:
   Dask / local <= 1.3, identical values.
3. MEGNO to t = 50 over a 128 x 128 grid with a Zarr store: the full scan, then a scan
   interrupted once half of the seeds on the shell are done (in this process, by raising
   KeyboardInterrupt from the chunk function) and run again: the rerun computes only the
   missing chunks. Target: resumed / full <= 0.55, identical values.

Times are the best of several runs, taken alternately so that load from other processes
hits all alike; the load average is printed (the machine is shared: ratios are what to
read, not the absolute seconds). Beside the wall times, the CPU time of the processes
involved (less sensitive to other work on a shared machine; idle OpenMP threads spinning
at the end of a parallel loop count as busy).

Run:  PYTHONPATH=$PWD PHASELAB_CACHE_DIR=/tmp/bench-cache python benchmarks/scan_benchmark.py [--repeat N] [--parts 123]
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time
from pathlib import Path

import numba
import numpy as np
from numba import njit, prange

import phaselab
from phaselab.orbits.chaos import deviation_vectors

E = 1.0 / 8.0
N = 48
T = 200.0
DT = 0.01

W1 = 1.0 / (2.0 - 2.0 ** (1.0 / 3.0))   # Yoshida 1990 fourth-order triple jump
W0 = 1.0 - 2.0 * W1


# ----------------------------------------------------------------------------- the floor
@njit(cache=True, nogil=True, inline="always")
def _drift(x, y, px, py, dx, dy, dpx, dpy, c):
    return x + c * px, y + c * py, dx + c * dpx, dy + c * dpy


@njit(cache=True, nogil=True, inline="always")
def _kick(x, y, px, py, dx, dy, dpx, dpy, d):
    # V = (x^2 + y^2)/2 + x^2 y - y^3/3; grad V = (x + 2xy, y + x^2 - y^2);
    # Hess V = [[1 + 2y, 2x], [2x, 1 - 2y]]
    hxx = 1.0 + 2.0 * y
    hxy = 2.0 * x
    hyy = 1.0 - 2.0 * y
    return (px - d * (x + 2.0 * x * y), py - d * (y + x * x - y * y),
            dpx - d * (hxx * dx + hxy * dy), dpy - d * (hxy * dx + hyy * dy))


@njit(cache=True, nogil=True, parallel=True)
def floor_megno(Z0, W0v, h, n_steps, out):
    """Time-averaged MEGNO of every orbit (Yoshida 4 and its tangent map), into ``out``."""
    for o in prange(Z0.shape[0]):
        x, y, px, py = Z0[o, 0], Z0[o, 1], Z0[o, 2], Z0[o, 3]
        dx, dy, dpx, dpy = W0v[o, 0], W0v[o, 1], W0v[o, 2], W0v[o, 3]
        g = np.sqrt(dx * dx + dy * dy + dpx * dpx + dpy * dpy)
        dx, dy, dpx, dpy = dx / g, dy / g, dpx / g, dpy / g
        y_int = 0.0
        y_mean = 0.0
        for step in range(1, n_steps + 1):
            x, y, dx, dy = _drift(x, y, px, py, dx, dy, dpx, dpy, 0.5 * W1 * h)
            px, py, dpx, dpy = _kick(x, y, px, py, dx, dy, dpx, dpy, W1 * h)
            x, y, dx, dy = _drift(x, y, px, py, dx, dy, dpx, dpy, 0.5 * (W1 + W0) * h)
            px, py, dpx, dpy = _kick(x, y, px, py, dx, dy, dpx, dpy, W0 * h)
            x, y, dx, dy = _drift(x, y, px, py, dx, dy, dpx, dpy, 0.5 * (W0 + W1) * h)
            px, py, dpx, dpy = _kick(x, y, px, py, dx, dy, dpx, dpy, W1 * h)
            x, y, dx, dy = _drift(x, y, px, py, dx, dy, dpx, dpy, 0.5 * W1 * h)
            g = np.sqrt(dx * dx + dy * dy + dpx * dpx + dpy * dpy)
            dx, dy, dpx, dpy = dx / g, dy / g, dpx / g, dpy / g
            t = step * h
            y_int += 2.0 * (t - 0.5 * h) * np.log(g)
            y_mean += (y_int / t - y_mean) * h / t
        out[o] = y_mean


def independent_floor():
    """The independent hand-written floor kept beside the project (``../shared/benchmarks/
    megno_floor.py``: its own Yoshida 4 loop and MEGNO sums), or None where it is absent."""
    import importlib.util

    path = Path(__file__).resolve().parents[2] / "shared" / "benchmarks" / "megno_floor.py"
    if not path.is_file():
        return None
    spec = importlib.util.spec_from_file_location("megno_floor", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


# ----------------------------------------------------------------------------- the case
def grid(H, n=N):
    return phaselab.shell_grid(H, {"y": (-0.5, 0.75, n), "py": (-0.5, 0.5, n)}, energy=E,
                               plane={"x": 0.0}, solve_for="px")


def timed(fn):
    """Wall time, and the CPU time of this process (all its threads), of ``fn()``."""
    t0, c0 = time.perf_counter(), time.process_time()
    res = fn()
    return time.perf_counter() - t0, res, time.process_time() - c0


def megno(H, seeds, t, **kw):
    return phaselab.chaos_map(H, seeds, t, indicator="megno", method="yoshida4", dt=DT, progress=False, **kw)


def load() -> str:
    return f"load average {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores"


def part_floor(H, repeat):
    g = grid(H)
    Z = np.ascontiguousarray(g.states[g.valid])
    W = np.ascontiguousarray(deviation_vectors(Z, 0, 1, np.ones(4, dtype=bool))[:, :, 0])
    n_steps = int(round(T / DT))
    out = np.empty(len(Z))
    print(f"1. MEGNO map: {N} x {N} grid of (y, py), {len(Z)} seeds on the shell; t = {T:g}, yoshida4, "
          f"dt = {DT}; numba threads = {numba.get_num_threads()}")

    def run(form):
        os.environ["PHASELAB_LOOPS"] = form
        return megno(H, g, T)

    def floor():
        floor_megno(Z, W, DT, n_steps, out)
        return out.copy()

    shared = independent_floor()

    def other():
        return shared.megno_floor(Z, T, DT, shared.C, shared.D)

    # warm: compile the floor, the generic loops and the inlined module (in this process)
    for form in ("generic", "inlined"):
        os.environ["PHASELAB_LOOPS"] = form
        megno(H, Z[:8], 1.0)
    floor_megno(Z[:2], W[:2], DT, 10, out[:2])
    if shared is not None:
        shared.megno_floor(Z[:2], 0.1, DT, shared.C, shared.D)

    best = {"floor": np.inf, "inlined": np.inf, "generic": np.inf}
    if shared is not None:
        best["independent"] = np.inf
    cpu = dict(best)
    results = {}
    for r in range(repeat):
        for name in best:
            if name == "generic" and r >= 1:
                continue                      # slow: one run is enough
            fn = {"floor": floor, "independent": other}.get(name, lambda n=name: run(n))
            dt_, res, c = timed(fn)
            best[name] = min(best[name], dt_)
            cpu[name] = min(cpu[name], c)
            results[name] = res
    os.environ["PHASELAB_LOOPS"] = "inlined"
    fl = results["floor"]
    vi = results["inlined"].values[g.valid]
    vg = results["generic"].values[g.valid]
    regular = np.abs(fl - 2.0) < 0.3
    agree = float(np.max(np.abs(vi[regular] - fl[regular]))) if regular.any() else float("nan")
    print(f"   {'':30s}{'seconds':>9s}{'/ floor':>9s}{'CPU s':>9s}{'/ floor':>9s}")
    for name, label in (("floor", "hand-written numba floor"), ("inlined", "chaos_map, inlined loops"),
                        ("generic", "chaos_map, generic loops")):
        print(f"   {label:30s}{best[name]:9.3f}{best[name] / best['floor']:9.2f}{cpu[name]:9.3f}"
              f"{cpu[name] / cpu['floor']:9.2f}" + ("   (target <= 1.3)" if name == "inlined" else ""))
    if shared is not None:
        print(f"   {'independent floor':30s}{best['independent']:9.3f}{'':9s}{cpu['independent']:9.3f}   "
              f"(../shared/benchmarks/megno_floor.py); inlined / independent: wall "
              f"{best['inlined'] / best['independent']:.2f}, CPU {cpu['inlined'] / cpu['independent']:.2f}"
              f"   (target <= 1.3)")
    print(f"   chunks: {results['inlined'].run.chunks} of {results['inlined'].run.chunk} seeds; inlined and "
          f"generic values identical: {bool(np.array_equal(vi, vg, equal_nan=True))}")
    print(f"   regular orbits (|MEGNO - 2| < 0.3 in the floor): {int(regular.sum())}; max |phaselab - floor| "
          f"there = {agree:.1e}; chaotic fraction (MEGNO > 4): phaselab {np.mean(vi > 4):.3f}, floor "
          f"{np.mean(fl > 4):.3f}")
    print(f"   {load()}")


def part_dask(H, repeat):
    import logging

    import distributed

    os.environ["PHASELAB_LOOPS"] = "inlined"
    g = grid(H)
    print(f"2. the same MEGNO map on two single-threaded Dask workers (LocalCluster, 2 processes on "
          f"127.0.0.1) against the local run (one process, {numba.get_num_threads()} threads)")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                                  dashboard_address=None, silence_logs=logging.ERROR) as cluster, \
            distributed.Client(cluster) as client:
        megno(H, g.states[g.valid][:8], 1.0, client=client)      # warm both workers
        megno(H, g.states[g.valid][:8], 1.0)
        best = {"local": np.inf, "dask": np.inf}
        cpu = dict(best)
        res = {}

        def workers_cpu():
            return sum(client.run(time.process_time).values())

        for _ in range(repeat):
            for name in ("local", "dask"):
                w0 = workers_cpu() if name == "dask" else 0.0
                dt_, res[name], c = timed(lambda n=name: megno(H, g, T, client=client if n == "dask" else None))
                c += workers_cpu() - w0 if name == "dask" else 0.0
                best[name] = min(best[name], dt_)
                cpu[name] = min(cpu[name], c)
    same = np.array_equal(res["local"].values, res["dask"].values, equal_nan=True)
    print(f"   local {best['local']:.3f} s ({res['local'].run.chunks} chunks), Dask {best['dask']:.3f} s "
          f"({res['dask'].run.chunks} chunks); Dask / local = {best['dask'] / best['local']:.2f}   "
          f"(target <= 1.3); identical values: {same}")
    print(f"   CPU seconds (client and workers): local {cpu['local']:.3f}, Dask {cpu['dask']:.3f}; "
          f"ratio {cpu['dask'] / cpu['local']:.2f}")
    print(f"   {load()}")


def part_resume(H, repeat, n=128, t=50.0):
    from phaselab.scan import chaos_maps

    os.environ["PHASELAB_LOOPS"] = "inlined"
    g = grid(H, n)
    print(f"3. resuming: MEGNO to t = {t:g} over a {n} x {n} grid ({int(g.valid.sum())} seeds on the shell) "
          "with a Zarr store")
    megno(H, g.states[g.valid][:8], 1.0)
    real = chaos_maps._chunk
    best = {"plain": np.inf, "full": np.inf, "resumed": np.inf}
    cpu = dict(best)
    fraction = []
    with tempfile.TemporaryDirectory() as tmp:
        for r in range(repeat):
            t_plain, _, c = timed(lambda: megno(H, g, t))
            best["plain"], cpu["plain"] = min(best["plain"], t_plain), min(cpu["plain"], c)
            t_full, full, c = timed(lambda: megno(H, g, t, store=Path(tmp) / f"full{r}.zarr"))
            best["full"], cpu["full"] = min(best["full"], t_full), min(cpu["full"], c)
            done = []

            def half(states, valid, *args, **kw):
                if sum(done) >= g.valid.sum() / 2:
                    raise KeyboardInterrupt
                done.append(int(valid.sum()))
                return real(states, valid, *args, **kw)

            chaos_maps._chunk = half
            try:
                megno(H, g, t, store=Path(tmp) / f"half{r}.zarr")
            except KeyboardInterrupt:
                pass
            finally:
                chaos_maps._chunk = real
            fraction.append(sum(done) / g.valid.sum())
            t_res, resumed, c = timed(lambda: megno(H, g, t, store=Path(tmp) / f"half{r}.zarr"))
            best["resumed"], cpu["resumed"] = min(best["resumed"], t_res), min(cpu["resumed"], c)
            same = np.array_equal(full.values, resumed.values, equal_nan=True)
    print(f"   full scan without a store {best['plain']:.3f} s; with a store {best['full']:.3f} s "
          f"({full.run.chunks} chunks of {full.run.chunk})")
    print(f"   interrupted after {fraction[-1]:.1%} of the seeds on the shell; the rerun computed "
          f"{resumed.run.computed} chunks and read {resumed.run.reused}: {best['resumed']:.3f} s")
    print(f"   resumed / full (both with a store) = {best['resumed'] / best['full']:.2f}   (target <= 0.55); "
          f"identical values: {same}")
    print(f"   CPU seconds: without a store {cpu['plain']:.3f}, full {cpu['full']:.3f}, resumed "
          f"{cpu['resumed']:.3f}; resumed / full = {cpu['resumed'] / cpu['full']:.2f}")
    print(f"   {load()}")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=3, help="timed runs of each")
    ap.add_argument("--parts", default="123", help="which parts to run (1, 2, 3)")
    args = ap.parse_args()
    H = phaselab.models.henon_heiles()
    if "1" in args.parts:
        part_floor(H, args.repeat)
    if "2" in args.parts:
        part_dask(H, args.repeat)
    if "3" in args.parts:
        part_resume(H, args.repeat)


if __name__ == "__main__":
    main()
