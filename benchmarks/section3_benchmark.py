"""Speed of a three-degree-of-freedom surface of section: phaselab against a hand-written
numba loop for the same method and step, side by side in one run.

The system is a cubic three-mode potential of our own making (a Henon-Heiles pair with a
third mode coupled through y z^2),

    H = (px^2 + py^2 + pz^2)/2 + (x^2 + y^2 + z^2)/2 + x^2 y - y^3/3 + y z^2,

whose lowest saddles lie at energy 1/6; at E = 0.08 every orbit stays bound. The plane
z = 0 is crossed with pz > 0; 20 orbits seeded on it (x, y on a small grid, px = py = 0,
pz solved from H = E), 300 crossings each, computed

1. by ``phaselab.section`` (Yoshida 4, warm: after one untimed call);
2. by a hand-written numba Yoshida 4 loop specialised to this H, with sign-change
   crossing detection and the same Henon-step refinement (RK4 in z as the independent
   variable, step halving with Richardson's correction), one orbit per thread.

The 4-D section points (x, y, px, py) of the two agree on the first crossings. Energy
errors are computed with numpy for both. The structure follows
``benchmarks/section_benchmark.py`` (the 2-dof benchmark).

Run:  /work/venv/bin/python benchmarks/section3_benchmark.py [--repeat N] [--dt DT]
"""

from __future__ import annotations

import argparse
import os
import time

import numba
import numpy as np
from numba import njit, prange

# the compiled loops in the form they run in once warm (a system's kernels built into its
# loops); run with PHASELAB_LOOPS=generic to time the form a new system answers with first
os.environ.setdefault("PHASELAB_LOOPS", "inlined")

import phaselab  # noqa: E402

E = 0.08
N_ORBITS = 20
N_CROSS = 300

W1 = 1.0 / (2.0 - 2.0 ** (1.0 / 3.0))   # Yoshida 1990 fourth-order triple jump
W0 = 1.0 - 2.0 * W1

EXPR = ("(px**2 + py**2 + pz**2)/2 + (x**2 + y**2 + z**2)/2 + x**2*y - y**3/3 + y*z**2")


def potential(x, y, z):
    return (x**2 + y**2 + z**2) / 2 + x**2 * y - y**3 / 3 + y * z**2


def energy(Z):
    x, y, z, px, py, pz = (Z[..., i] for i in range(6))
    return (px**2 + py**2 + pz**2) / 2 + potential(x, y, z)


def seeds():
    """20 states on z = 0 with px = py = 0 and pz > 0 from H = E."""
    xs, ys = np.meshgrid(np.linspace(-0.2, 0.2, 5), np.linspace(-0.15, 0.2, 4), indexing="ij")
    x, y = xs.ravel(), ys.ravel()
    pz = np.sqrt(2.0 * (E - potential(x, y, 0.0)))
    Z0 = np.zeros((N_ORBITS, 6))
    Z0[:, 0], Z0[:, 1], Z0[:, 5] = x, y, pz
    assert np.all(np.isfinite(Z0))
    return Z0


def worst_rel_energy(points):
    pts = np.asarray(points).reshape(-1, 6)
    pts = pts[np.all(np.isfinite(pts), axis=1)]
    return float(np.max(np.abs(energy(pts) - E)) / E)


# ----------------------------------------------------------------------------- floor
@njit(cache=True, nogil=True, inline="always")
def _force(x, y, z):
    return -(x + 2.0 * x * y), -(y + x * x - y * y + z * z), -(z + 2.0 * y * z)


@njit(cache=True, nogil=True)
def _henon_rk4(s, t, ds, k, inv, w, out):
    # independent variable z: d(.)/dz = f / f_z with f_z = pz; s = (x, y, z, px, py, pz);
    # writes the new state into out (scratch k, inv, w allocated once per orbit)
    for stage in range(4):
        c = 0.0 if stage == 0 else (0.5 * ds if stage < 3 else ds)
        for i in range(6):
            w[i] = s[i] if stage == 0 else s[i] + c * k[stage - 1, i] * inv[stage - 1]
        fx, fy, fz = _force(w[0], w[1], w[2])
        k[stage, 0], k[stage, 1], k[stage, 2] = w[3], w[4], w[5]
        k[stage, 3], k[stage, 4], k[stage, 5] = fx, fy, fz
        inv[stage] = 1.0 / w[5]
    for i in range(6):
        out[i] = s[i] + ds * (k[0, i] * inv[0] + 2 * k[1, i] * inv[1] + 2 * k[2, i] * inv[2]
                              + k[3, i] * inv[3]) / 6.0
    return t + ds * (inv[0] + 2 * inv[1] + 2 * inv[2] + inv[3]) / 6.0


@njit(cache=True, nogil=True)
def _floor_refine(s, t, k, inv, w, y0, ya, yb, res):
    ds = -s[2]
    scale = 1.0
    for i in range(6):
        scale = max(scale, abs(s[i]))
    t0 = _henon_rk4(s, t, ds, k, inv, w, y0)
    n = 1
    while True:
        n *= 2
        d = ds / n
        for i in range(6):
            ya[i] = s[i]
        ta = t
        for _ in range(n):
            ta = _henon_rk4(ya, ta, d, k, inv, w, yb)
            for i in range(6):
                ya[i] = yb[i]
        diff = abs(ta - t0)
        for i in range(6):
            diff = max(diff, abs(ya[i] - y0[i]))
        if diff <= 1e-12 * scale or n >= 256:
            break
        for i in range(6):
            y0[i] = ya[i]
        t0 = ta
    for i in range(6):
        res[i] = ya[i] + (ya[i] - y0[i]) / 15.0


@njit(cache=True, nogil=True, parallel=True)
def floor_section(Z0, h, n_cross, out):
    for o in prange(Z0.shape[0]):
        x, y, z, px, py, pz = Z0[o, 0], Z0[o, 1], Z0[o, 2], Z0[o, 3], Z0[o, 4], Z0[o, 5]
        prev = np.empty(6)
        now = np.empty(6)
        k = np.empty((4, 6))
        inv = np.empty(4)
        w = np.empty(6)
        y0 = np.empty(6)
        ya = np.empty(6)
        yb = np.empty(6)
        res = np.empty(6)
        c = 0
        step = 0
        while c < n_cross:
            prev[0], prev[1], prev[2], prev[3], prev[4], prev[5] = x, y, z, px, py, pz
            # Yoshida 4: three leapfrogs, adjacent half drifts merged
            x += 0.5 * W1 * h * px
            y += 0.5 * W1 * h * py
            z += 0.5 * W1 * h * pz
            fx, fy, fz = _force(x, y, z)
            px += W1 * h * fx
            py += W1 * h * fy
            pz += W1 * h * fz
            x += 0.5 * (W1 + W0) * h * px
            y += 0.5 * (W1 + W0) * h * py
            z += 0.5 * (W1 + W0) * h * pz
            fx, fy, fz = _force(x, y, z)
            px += W0 * h * fx
            py += W0 * h * fy
            pz += W0 * h * fz
            x += 0.5 * (W0 + W1) * h * px
            y += 0.5 * (W0 + W1) * h * py
            z += 0.5 * (W0 + W1) * h * pz
            fx, fy, fz = _force(x, y, z)
            px += W1 * h * fx
            py += W1 * h * fy
            pz += W1 * h * fz
            x += 0.5 * W1 * h * px
            y += 0.5 * W1 * h * py
            z += 0.5 * W1 * h * pz
            step += 1
            if prev[2] < 0.0 and z >= 0.0:
                if -prev[2] < z:
                    _floor_refine(prev, (step - 1) * h, k, inv, w, y0, ya, yb, res)
                else:
                    now[0], now[1], now[2], now[3], now[4], now[5] = x, y, z, px, py, pz
                    _floor_refine(now, step * h, k, inv, w, y0, ya, yb, res)
                for i in range(6):
                    out[o, c, i] = res[i]
                out[o, c, 2] = 0.0
                c += 1


#: seconds of rest before each timed run: the floor's parallel loop runs on numba's OpenMP
#: threads, which keep spinning for a while after the loop ends and took a core from a
#: phaselab run started at once (3-dof, two threads: 43.0 ms right after the floor, 38.6 ms
#: after a 50 ms rest, 38.1 ms with no floor run before; the floor itself 30.6 ms either way)
SETTLE = 0.1


def timed(fn):
    t0 = time.perf_counter()
    res = fn()
    return time.perf_counter() - t0, res


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=7, help="timed runs of phaselab and the floor")
    ap.add_argument("--dt", type=float, default=0.0125, help="step of both Yoshida 4 runs")
    args = ap.parse_args()
    dt = args.dt

    H = phaselab.Hamiltonian(EXPR, ["x", "y", "z"], ["px", "py", "pz"], name="three-mode cubic")
    Z0 = seeds()
    n_threads = numba.config.NUMBA_NUM_THREADS
    print(f"three-mode cubic potential, E = {E}, plane z = 0 (pz > 0), {N_ORBITS} orbits x {N_CROSS} "
          f"crossings; Yoshida 4 with dt = {dt}; numba threads = {n_threads}")

    run = lambda: phaselab.section(H, Z0, plane={"z": 0.0}, direction=+1, crossings=N_CROSS, dt=dt,
                                   method="yoshida4", energy=E)
    out = np.full((N_ORBITS, N_CROSS, 6), np.nan)
    floor = lambda: floor_section(Z0, dt, N_CROSS, out)
    run()
    floor()

    def pair(repeat):
        # alternately, so that load from other processes hits both alike; best of each kept
        tp, tf = np.inf, np.inf
        for _ in range(repeat):
            time.sleep(SETTLE)
            tp = min(tp, timed(run)[0])
            time.sleep(SETTLE)
            tf = min(tf, timed(floor)[0])
        return tp, tf

    t_pl, t_fl = pair(args.repeat)
    sec = run()
    floor()
    n_pl, n_fl = int(sec.counts.sum()), int(np.isfinite(out[..., 0]).sum())
    e_pl, e_fl = worst_rel_energy(sec.points), worst_rel_energy(out)
    d = float(np.max(np.abs(sec.points[:, :5] - out[:, :5])))

    print(f"{'':30s}{'seconds':>10s}{'crossings':>11s}{'max |dH|/E':>13s}")
    print(f"{'phaselab.section (warm)':30s}{t_pl:10.4f}{n_pl:11d}{e_pl:13.2e}")
    print(f"{'numba floor (specialised)':30s}{t_fl:10.4f}{n_fl:11d}{e_fl:13.2e}")
    print(f"phaselab / floor = {t_pl / t_fl:.2f}   (target <= 1.3; loops in the {os.environ['PHASELAB_LOOPS']} form)")
    print(f"first 5 crossings, phaselab vs floor: max |difference| = {d:.1e}")
    if n_threads >= 2:
        numba.set_num_threads(1)
        run()
        floor()
        t1, f1 = pair(args.repeat)
        numba.set_num_threads(n_threads)
        print(f"one thread: phaselab {t1:.4f} s, floor {f1:.4f} s, phaselab / floor = {t1 / f1:.2f}")
    print(f"load average while running: {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores "
          "(timings are best-of-runs)")


if __name__ == "__main__":
    main()
