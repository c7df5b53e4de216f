"""Surface of section speed: phaselab against scipy by hand and a specialised numba loop.

The same Henon-Heiles surface of section (E = 1/8, plane x = 0 crossed with px > 0, 20
orbits seeded along y at py = 0 inside the allowed region, 300 crossings each) computed
three ways in one run:

1. ``phaselab.section`` (Yoshida 4, warm: after one untimed call);
2. ``scipy.integrate.solve_ivp`` DOP853, rtol 1e-10, atol 1e-12, with an event function on a
   sympy-lambdified right-hand side (what one writes by hand today); when a full run would
   take long, a few orbits are timed and the time scaled to 20 (said so in the output);
3. a hand-written numba Yoshida 4 loop specialised to this Hamiltonian, with sign-change
   crossing detection and the same Henon-step refinement (the practical floor).

Energy errors are computed the same way for all three: max |H - E| / |E| over the
crossing points, with H evaluated by numpy. Also printed: one new orbit of 300 crossings
(warm) and the 20-orbit speed-up from 1 to 2 threads.

Run:  /work/venv/bin/python benchmarks/section_benchmark.py [--scipy-orbits N] [--dt DT]
"""

from __future__ import annotations

import argparse
import os
import time

import numba
import numpy as np
import sympy as sp
from numba import njit, prange
from scipy.integrate import solve_ivp

# the compiled loops in the form they run in once warm (a system's kernels built into its
# loops); run with PHASELAB_LOOPS=generic to time the form a new system answers with first
os.environ.setdefault("PHASELAB_LOOPS", "inlined")

import phaselab  # noqa: E402

E = 1.0 / 8.0
N_ORBITS = 20
N_CROSS = 300

W1 = 1.0 / (2.0 - 2.0 ** (1.0 / 3.0))   # Yoshida 1990 fourth-order triple jump
W0 = 1.0 - 2.0 * W1


def hh_energy(Z):
    x, y, px, py = Z[..., 0], Z[..., 1], Z[..., 2], Z[..., 3]
    return (px**2 + py**2) / 2 + (x**2 + y**2) / 2 + x**2 * y - y**3 / 3


def seeds_along_y(H):
    """20 seeds on x = 0, py = 0 with y strictly inside the allowed interval at E = 1/8."""
    r = np.roots([-1.0 / 3.0, 0.5, 0.0, -E])  # y^2/2 - y^3/3 = E
    r = np.sort(r[np.abs(r.imag) < 1e-12].real)
    lo, hi = r[0], r[1]  # the interval around y = 0
    y = np.linspace(lo, hi, N_ORBITS + 2)[1:-1]
    s = phaselab.shell_seeds(H, {"y": y, "py": 0.0}, energy=E, plane={"x": 0.0}, solve_for="px")
    assert s.valid.all()
    return s


def worst_rel_energy(points_list):
    pts = np.concatenate([np.asarray(p).reshape(-1, 4) for p in points_list])
    pts = pts[np.all(np.isfinite(pts), axis=1)]
    return float(np.max(np.abs(hh_energy(pts) - E)) / E)


# ----------------------------------------------------------------------------- floor
@njit(cache=True, nogil=True, inline="always")
def _hh_field(x, y, px, py):
    return px, py, -(x + 2.0 * x * y), -(y + x * x - y * y)


@njit(cache=True, nogil=True)
def _henon_rk4(x, y, px, py, t, ds):
    # independent variable s = x: d(.)/ds = f / f_x, f_x = px
    a1, b1, c1, d1 = _hh_field(x, y, px, py)
    i1 = 1.0 / a1
    a2, b2, c2, d2 = _hh_field(x + 0.5 * ds, y + 0.5 * ds * b1 * i1, px + 0.5 * ds * c1 * i1,
                               py + 0.5 * ds * d1 * i1)
    i2 = 1.0 / a2
    a3, b3, c3, d3 = _hh_field(x + 0.5 * ds, y + 0.5 * ds * b2 * i2, px + 0.5 * ds * c2 * i2,
                               py + 0.5 * ds * d2 * i2)
    i3 = 1.0 / a3
    a4, b4, c4, d4 = _hh_field(x + ds, y + ds * b3 * i3, px + ds * c3 * i3, py + ds * d3 * i3)
    i4 = 1.0 / a4
    y += ds * (b1 * i1 + 2 * b2 * i2 + 2 * b3 * i3 + b4 * i4) / 6.0
    px += ds * (c1 * i1 + 2 * c2 * i2 + 2 * c3 * i3 + c4 * i4) / 6.0
    py += ds * (d1 * i1 + 2 * d2 * i2 + 2 * d3 * i3 + d4 * i4) / 6.0
    t += ds * (i1 + 2 * i2 + 2 * i3 + i4) / 6.0
    return x + ds, y, px, py, t


@njit(cache=True, nogil=True)
def _floor_refine(x, y, px, py, t):
    ds = -x
    scale = max(1.0, abs(x), abs(y), abs(px), abs(py))
    _, y0, px0, py0, t0 = _henon_rk4(x, y, px, py, t, ds)
    n = 1
    while True:
        n *= 2
        d = ds / n
        xa, ya, pxa, pya, ta = x, y, px, py, t
        for _ in range(n):
            xa, ya, pxa, pya, ta = _henon_rk4(xa, ya, pxa, pya, ta, d)
        diff = max(abs(ya - y0), abs(pxa - px0), abs(pya - py0), abs(ta - t0))
        if diff <= 1e-12 * scale or n >= 256:
            break
        y0, px0, py0, t0 = ya, pxa, pya, ta
    return (ya + (ya - y0) / 15.0, pxa + (pxa - px0) / 15.0, pya + (pya - py0) / 15.0,
            ta + (ta - t0) / 15.0)


@njit(cache=True, nogil=True, parallel=True)
def floor_section(Z0, h, n_cross, out):
    for o in prange(Z0.shape[0]):
        x, y, px, py = Z0[o, 0], Z0[o, 1], Z0[o, 2], Z0[o, 3]
        c = 0
        step = 0
        while c < n_cross:
            xo, yo, pxo, pyo = x, y, px, py
            # Yoshida 4: three leapfrogs, adjacent half drifts merged
            x += 0.5 * W1 * h * px
            y += 0.5 * W1 * h * py
            px -= W1 * h * (x + 2.0 * x * y)
            py -= W1 * h * (y + x * x - y * y)
            x += 0.5 * (W1 + W0) * h * px
            y += 0.5 * (W1 + W0) * h * py
            px -= W0 * h * (x + 2.0 * x * y)
            py -= W0 * h * (y + x * x - y * y)
            x += 0.5 * (W0 + W1) * h * px
            y += 0.5 * (W0 + W1) * h * py
            px -= W1 * h * (x + 2.0 * x * y)
            py -= W1 * h * (y + x * x - y * y)
            x += 0.5 * W1 * h * px
            y += 0.5 * W1 * h * py
            step += 1
            if xo < 0.0 and x >= 0.0:
                if -xo < x:
                    yc, pxc, pyc, tc = _floor_refine(xo, yo, pxo, pyo, (step - 1) * h)
                else:
                    yc, pxc, pyc, tc = _floor_refine(x, y, px, py, step * h)
                out[o, c, 0] = 0.0
                out[o, c, 1] = yc
                out[o, c, 2] = pxc
                out[o, c, 3] = pyc
                c += 1


# ----------------------------------------------------------------------------- scipy
def scipy_orbits(H, Z0, n_orbits):
    args = list(H.state_symbols)
    f = sp.lambdify(args, H.vector_field(), modules="numpy")

    def rhs(t, z):
        return f(*z)

    def hit(t, z):
        return z[0]

    hit.direction = 1.0
    hit.terminal = N_CROSS + 1  # the seed itself (on x = 0, px > 0) is reported as an event at t = 0
    out = []
    for z0 in Z0[:n_orbits]:
        sol = solve_ivp(rhs, (0.0, 1e5), z0, method="DOP853", rtol=1e-10, atol=1e-12, events=hit)
        keep = sol.t_events[0] > 0.0
        out.append(sol.y_events[0][keep][:N_CROSS])
    return out


#: seconds of rest before each timed run: the floor's parallel loop runs on numba's OpenMP
#: threads, which keep spinning for a while after the loop ends and took a core from a
#: phaselab run started at once (3-dof, two threads: 43.0 ms right after the floor, 38.6 ms
#: after a 50 ms rest, 38.1 ms with no floor run before; the floor itself 30.6 ms either way)
SETTLE = 0.1


def timed(fn, repeat=3):
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        res = fn()
        best = min(best, time.perf_counter() - t0)
    return best, res


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--scipy-orbits", type=int, default=3, help="orbits timed with scipy (scaled to 20)")
    ap.add_argument("--repeat", type=int, default=7, help="timed runs of phaselab and the floor")
    ap.add_argument("--dt", type=float, default=0.0125, help="step of both Yoshida 4 runs")
    args = ap.parse_args()
    dt = args.dt

    H = phaselab.models.henon_heiles()
    seeds = seeds_along_y(H)
    Z0 = seeds.valid_states()
    n_threads = numba.config.NUMBA_NUM_THREADS
    print(f"Henon-Heiles, E = 1/8, plane x = 0 (px > 0), {N_ORBITS} orbits x {N_CROSS} crossings; "
          f"Yoshida 4 with dt = {dt}; numba threads = {n_threads}")

    # phaselab (warm) and the floor, timed alternately so that load from other processes
    # hits both alike; the best of several runs of each is kept
    run = lambda: phaselab.section(H, seeds, plane={"x": 0.0}, direction=+1, crossings=N_CROSS,
                                   dt=dt, method="yoshida4")
    out = np.full((N_ORBITS, N_CROSS, 4), np.nan)
    floor = lambda: floor_section(Z0, dt, N_CROSS, out)
    sec = run()
    floor()

    def pair(repeat):
        tp, tf = np.inf, np.inf
        for _ in range(repeat):
            time.sleep(SETTLE)
            tp = min(tp, timed(run, 1)[0])
            time.sleep(SETTLE)
            tf = min(tf, timed(floor, 1)[0])
        return tp, tf

    t_pl, t_fl = pair(args.repeat)
    sec = run()
    n_pl = int(sec.counts.sum())
    e_pl = worst_rel_energy([sec.points])
    floor()
    n_fl = int(np.isfinite(out[..., 1]).sum())
    e_fl = worst_rel_energy([out])

    # scipy by hand
    k = max(1, min(args.scipy_orbits, N_ORBITS))
    t0 = time.perf_counter()
    sc = scipy_orbits(H, Z0, k)
    t_sc_part = time.perf_counter() - t0
    t_sc = t_sc_part * N_ORBITS / k
    n_sc = sum(len(p) for p in sc)
    e_sc = worst_rel_energy(sc)
    scaled = "" if k == N_ORBITS else f"  (timed {k} orbits in {t_sc_part:.2f} s, scaled to {N_ORBITS})"

    # agreement of the first crossings with scipy (short-time check, before chaos separates them)
    d = max(float(np.max(np.abs(sec.points[i, :5] - sc[i][:5]))) for i in range(k))

    print(f"{'':28s}{'seconds':>10s}{'crossings':>11s}{'max |dH|/E':>13s}")
    print(f"{'phaselab.section (warm)':28s}{t_pl:10.4f}{n_pl:11d}{e_pl:13.2e}")
    print(f"{'numba floor (specialised)':28s}{t_fl:10.4f}{n_fl:11d}{e_fl:13.2e}")
    print(f"{'scipy DOP853 + events':28s}{t_sc:10.2f}{N_ORBITS * n_sc // k:11d}{e_sc:13.2e}{scaled}")
    print(f"phaselab / floor = {t_pl / t_fl:.2f}   (target <= 1.3; loops in the {os.environ['PHASELAB_LOOPS']} form)")
    print(f"scipy / phaselab = {t_sc / t_pl:.0f}   (target >= 200)")
    print(f"first 5 crossings of {k} orbits, phaselab vs scipy: max |difference| = {d:.1e}")
    print("(the floor steps one orbit at a time per thread; phaselab steps up to 4 orbits side by "
          "side per thread, which hides the latency of the array kernels)")

    # one new orbit, warm
    z_new = Z0[7:8] * (1 + 1e-3)
    z_new = phaselab.shell_seeds(H, z_new[:, [1, 3]], energy=E, plane={"x": 0.0}, solve_for="px").valid_states()
    t_one, one = timed(lambda: phaselab.section(H, z_new, plane={"x": 0.0}, crossings=N_CROSS,
                                                dt=dt, method="yoshida4"), repeat=5)
    print(f"one new orbit of {int(one.counts[0])} crossings (warm): {t_one * 1e3:.1f} ms   (target < 30 ms)")

    # thread scaling, and the floor comparison on one thread
    if n_threads >= 2:
        numba.set_num_threads(1)
        run()
        floor()
        t1, f1 = pair(args.repeat)
        numba.set_num_threads(2)
        t2, _ = pair(args.repeat)
        numba.set_num_threads(n_threads)
        print(f"one thread: phaselab {t1:.4f} s, floor {f1:.4f} s, phaselab / floor = {t1 / f1:.2f}")
        print(f"20-orbit section: 1 thread {t1:.4f} s, 2 threads {t2:.4f} s, speed-up {t1 / t2:.2f}x")
    else:
        print("only one numba thread available: no thread speed-up measured")

    print(f"load average while running: {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores "
          "(timings are best-of-runs; a loaded machine makes the 2-thread figures pessimistic)")


if __name__ == "__main__":
    main()
