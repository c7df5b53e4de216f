"""Frequency analysis speed and accuracy, side by side in one run.

1. Speed: 10^4 Henon-Heiles orbits (seeds on the energy shell E = 1/10, section plane
   x = 0), 4096 samples each, 0.5 time units apart (about 12 samples per period, 325
   periods), integrated by ``phaselab.trajectory`` with its default method and step, in
   batches of 1000 orbits (the system's inlined loops unless PHASELAB_LOOPS says otherwise);
   then the same samples analysed by
   ``phaselab.frequency.frequencies.analyse_samples`` (what ``phaselab.frequencies`` does after
   sampling: both degrees of freedom, leading line, diffusion from the two halves). Both
   warm (after one untimed small call). Target: analysis time <= integration time.
2. Accuracy: the leading frequency of a clean quasi-periodic signal of 4096 samples (three
   lines with incommensurate frequencies, amplitudes 1, 0.5, 0.2), window order 1 and 2.
   Target: error below 1e-12 cycles per sample.

The machine's load average is printed: on a shared machine the two timings are taken in
the same run, so their ratio is what to read, not the absolute seconds.

Run:  PYTHONPATH=$PWD PHASELAB_CACHE_DIR=/tmp/bench-cache python benchmarks/frequency_benchmark.py [--orbits N]
"""

from __future__ import annotations

import argparse
import os
import time

import numpy as np

# integrate with the system's inlined loops, built before the first call (the faster form, so
# the comparison is conservative for the analysis); PHASELAB_LOOPS=generic to compare with that
os.environ.setdefault("PHASELAB_LOOPS", "inlined")

import phaselab  # noqa: E402
from phaselab.frequency.frequencies import analyse_samples  # noqa: E402
from phaselab.frequency.spectral import leading_lines  # noqa: E402

N_SAMPLES = 4096
SPACING = 0.5
BATCH = 1000


def seeds(H, n_orbits, energy=0.1):
    """Seeds on the shell at x = 0, spread over the allowed (y, py) disc."""
    rng = np.random.default_rng(7)
    out = []
    while sum(len(s) for s in out) < n_orbits:
        y = rng.uniform(-0.4, 0.6, 4 * n_orbits)
        py = rng.uniform(-0.45, 0.45, 4 * n_orbits)
        s = phaselab.shell_seeds(H, {"y": y, "py": py}, energy=energy, plane={"x": 0.0},
                                 solve_for="px")
        out.append(s.states[np.asarray(s.valid)])
    return np.concatenate(out)[:n_orbits]


def speed(n_orbits):
    H = phaselab.models.henon_heiles()
    Z = seeds(H, n_orbits)
    times = np.arange(N_SAMPLES) * SPACING
    # warm-up: compile the integrator and the analysis once, untimed
    warm = phaselab.trajectory(H, Z[:4], times[:64])
    analyse_samples(warm.states, [0, 1], step=SPACING)

    t_int = t_ana = 0.0
    nu = []
    for a in range(0, n_orbits, BATCH):
        t0 = time.perf_counter()
        tr = phaselab.trajectory(H, Z[a:a + BATCH], times)
        t1 = time.perf_counter()
        res = analyse_samples(tr.states, [0, 1], step=SPACING)
        t2 = time.perf_counter()
        t_int += t1 - t0
        t_ana += t2 - t1
        nu.append(res.nu)
    nu = np.concatenate(nu)
    steps = int(round(SPACING / tr.dt))
    print(f"{n_orbits} Henon-Heiles orbits x {N_SAMPLES} samples ({tr.method}, dt = {tr.dt:.4g}, "
          f"{steps} steps per sample), batches of {BATCH}")
    print(f"  integration (phaselab.trajectory)      {t_int:8.2f} s")
    print(f"  frequency analysis (2 dof + halves)    {t_ana:8.2f} s")
    print(f"  analysis / integration                 {t_ana / t_int:8.3f}   (target <= 1)")
    print(f"  frequencies found: {np.isfinite(nu).all(axis=1).sum()} of {n_orbits} orbits, "
          f"nu_x in [{np.nanmin(nu[:, 0]):.4f}, {np.nanmax(nu[:, 0]):.4f}] cycles per unit time")


def accuracy():
    k = np.arange(N_SAMPLES)
    nus = np.array([0.1234567891234, -0.3141592653, 0.2718281828])
    amps = np.array([1.0, 0.5, 0.2])
    x = sum(a * np.exp(2j * np.pi * f * k + 1j * ph) for f, a, ph in zip(nus, amps, (0.3, 1.1, -0.4)))
    for p in (1, 2):
        err = abs(leading_lines(x, 1, window_order=p).nu[0, 0] - nus[0])
        print(f"  clean 3-line signal, {N_SAMPLES} samples, window order {p}: leading frequency "
              f"error {err:.2e} cycles per sample   (target < 1e-12)")


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--orbits", type=int, default=10_000)
    args = parser.parse_args()
    print(f"load average before: {os.getloadavg()[0]:.2f} (2 cores shared); "
          f"loops: {os.environ['PHASELAB_LOOPS']}")
    speed(args.orbits)
    accuracy()
    print(f"load average after: {os.getloadavg()[0]:.2f}")


if __name__ == "__main__":
    main()
