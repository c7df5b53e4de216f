"""MEGNO map speed: phaselab.chaos_map against a hand-written numba loop, side by side.

The case (issue 13): Henon-Heiles, E = 1/8, section plane x = 0 (px > 0 solved from H = E),
a 48 x 48 grid of (y, py) over [-0.5, 0.75] x [-0.5, 0.5] (points outside the energy shell
skipped), MEGNO to t = 200 with Yoshida 4 and dt = 0.01, both using both cores.

The floor (written out below, ``floor_megno``): one numba ``prange`` loop over orbits,
specialised to this Hamiltonian: the Yoshida 4 composition of leapfrogs and its exact
tangent map (drift dq += c dp, kick dp -= d Hess V(q) dq with the Hessian written by hand),
one deviation vector renormalised after every step, and the time-averaged MEGNO
accumulated as phaselab does it (Cincotta & Simo 2000). Both start from the same
deviation vectors (phaselab.compute.chaos.deviation_vectors), so their values agree to
round-off on regular orbits; the agreement is printed.

phaselab runs with its inlined loops (``PHASELAB_LOOPS=inlined``: the system's kernels
compiled into the loops, built in this process before timing) and, for comparison, with
the generic loops (kernels called through a function pointer, compiled once per machine).
Times are the best of several runs, taken alternately so that load from other processes
hits both alike; the load average is printed.

Floor measured on the 2-core development machine (2026-12, load about 2 from other
work; best of 5): 1.08 s. Target: phaselab inlined / floor <= 1.5.

Run:  PYTHONPATH=$PWD PHASELAB_CACHE_DIR=/tmp/bench-cache python benchmarks/chaos_map_benchmark.py [--repeat N]
"""

from __future__ import annotations

import argparse
import os
import time

import numba
import numpy as np
from numba import njit, prange

import phaselab
from phaselab.compute.chaos import deviation_vectors

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


# ----------------------------------------------------------------------------- the case
def grid(H):
    return phaselab.shell_grid(H, E, {"x": 0.0}, "px", {"y": (-0.5, 0.75, N), "py": (-0.5, 0.5, N)})


def timed(fn):
    t0 = time.perf_counter()
    res = fn()
    return time.perf_counter() - t0, res


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=5, help="timed runs of each")
    args = ap.parse_args()

    H = phaselab.models.henon_heiles()
    g = grid(H)
    Z = np.ascontiguousarray(g.states[g.valid])
    W = np.ascontiguousarray(deviation_vectors(Z, 0, 1, np.ones(4, dtype=bool))[:, :, 0])
    n_steps = int(round(T / DT))
    out = np.empty(len(Z))
    print(f"Henon-Heiles, E = 1/8, x = 0, {N} x {N} grid of (y, py): {len(Z)} seeds on the shell; "
          f"MEGNO to t = {T:g}, yoshida4, dt = {DT}; numba threads = {numba.get_num_threads()}")

    def run(tier):
        os.environ["PHASELAB_LOOPS"] = tier
        return phaselab.chaos_map(H, g, T, indicator="megno", method="yoshida4", dt=DT, progress=False)

    def floor():
        floor_megno(Z, W, DT, n_steps, out)
        return out

    # warm: compile the floor, the generic loops and the inlined module (in this process)
    for tier in ("generic", "inlined"):
        os.environ["PHASELAB_LOOPS"] = tier
        phaselab.chaos_map(H, Z[:8], 1.0, indicator="megno", method="yoshida4", dt=DT, progress=False)
    floor_megno(Z[:2], W[:2], DT, 10, out[:2])

    best = {"floor": np.inf, "inlined": np.inf, "generic": np.inf}
    results = {}
    for _ in range(args.repeat):
        for name in ("floor", "inlined", "generic"):
            dt_, res = timed(floor if name == "floor" else (lambda n=name: run(n)))
            best[name] = min(best[name], dt_)
            results[name] = res
    fl = results["floor"]
    vi = results["inlined"].values[g.valid]
    vg = results["generic"].values[g.valid]
    regular = np.abs(fl - 2.0) < 0.3
    agree = float(np.max(np.abs(vi[regular] - fl[regular]))) if regular.any() else float("nan")

    print(f"{'':34s}{'seconds':>9s}{'/ floor':>9s}")
    print(f"{'hand-written numba floor':34s}{best['floor']:9.3f}{1.0:9.2f}")
    print(f"{'chaos_map, inlined loops':34s}{best['inlined']:9.3f}{best['inlined'] / best['floor']:9.2f}"
          "   (target <= 1.5)")
    print(f"{'chaos_map, generic loops':34s}{best['generic']:9.3f}{best['generic'] / best['floor']:9.2f}")
    print(f"inlined and generic values identical: {bool(np.array_equal(vi, vg, equal_nan=True))}")
    print(f"regular orbits (|MEGNO - 2| < 0.3 in the floor): {int(regular.sum())}; max |phaselab - floor| "
          f"there = {agree:.1e}")
    print(f"chaotic fraction (MEGNO > 4): phaselab {np.mean(vi > 4):.3f}, floor {np.mean(fl > 4):.3f}")
    print(f"load average while running: {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores "
          "(best of runs, taken alternately)")


if __name__ == "__main__":
    main()
