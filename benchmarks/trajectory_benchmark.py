"""Time a warm phaselab.trajectory call and its speed-up from 1 to 2 threads.

20 Henon-Heiles orbits x 1e5 steps of Yoshida 4 (dt = 0.01, t = 1000, default sampling of
at most 10 000 samples per orbit). The first call compiles (or loads from the on-disk cache)
and is not timed; each figure is the best of ``--repeat`` warm calls. Both thread counts are
measured in this one run, side by side.

Run: /work/venv/bin/python benchmarks/trajectory_benchmark.py [--repeat 5]
"""

from __future__ import annotations

import argparse
import os
import time

import numba
import numpy as np

# the compiled loops in the form they run in once warm (a system's kernels built into its
# loops); run with PHASELAB_LOOPS=generic to time the form a new system answers with first
os.environ.setdefault("PHASELAB_LOOPS", "inlined")

from phaselab import Hamiltonian  # noqa: E402
from phaselab.orbits.trajectory import trajectory  # noqa: E402


def seeds(n: int, energy: float = 0.12) -> np.ndarray:
    """Bounded seeds on the shell H = energy: x = 0, y spread, px from H, py = 0."""
    y = np.linspace(-0.3, 0.4, n)
    v = y ** 2 / 2 - y ** 3 / 3
    px = np.sqrt(2 * (energy - v))
    return np.column_stack([np.zeros(n), y, px, np.zeros(n)])


def best_time(fn, repeat: int) -> float:
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args()
    H = Hamiltonian("(px**2 + py**2)/2 + (x**2 + y**2)/2 + x**2*y - y**3/3", ["x", "y"], ["px", "py"],
                    name="henon_heiles")
    Z = seeds(20)
    n_steps, dt = 100_000, 0.01

    def call():
        return trajectory(H, Z, n_steps * dt, dt=dt, method="yoshida4")

    t0 = time.perf_counter()
    tr = call()
    first = time.perf_counter() - t0
    assert not tr.escaped.any() and np.nanmax(np.abs(tr.energy_error)) < 1e-6
    available = numba.config.NUMBA_NUM_THREADS
    results = {}
    for threads in (1, 2):
        if threads > available:
            continue
        numba.set_num_threads(threads)
        results[threads] = best_time(call, args.repeat)
    numba.set_num_threads(available)
    steps = Z.shape[0] * n_steps
    print(f"20 Henon-Heiles orbits x {n_steps:.0e} steps, yoshida4, dt={dt}; first call "
          f"(compile or cache load) {first:.2f} s; max |dE| = {np.nanmax(np.abs(tr.energy_error)):.1e}")
    print(f"{'threads':>8} {'warm call [s]':>14} {'ns per orbit-step':>18} {'speed-up':>9}")
    for threads, sec in results.items():
        print(f"{threads:>8} {sec:>14.4f} {1e9 * sec / steps:>18.1f} {results[1] / sec:>9.2f}")


if __name__ == "__main__":
    main()
