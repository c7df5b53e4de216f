"""Structure finding speed: periodic orbits, a long symmetric orbit, a manifold.

Run:  python benchmarks/periodic_benchmark.py [--repeat N]

Three measurements (warm: after one untimed call), each in the generic and the inlined form
of the loops (PHASELAB_LOOPS, separate processes, printed side by side):

1. the stable period-1 orbit of Henon-Heiles at E = 1/8 on x = 0 from a guess 1e-2 away
   (targets: at most 8 Newton steps, under 50 ms);
2. a symmetric period-89 orbit of the standard map at K = 0.9 (rotation number 55/89) by
   Greene's method (target: under 100 ms);
3. the unstable manifold of the standard map's hyperbolic fixed point at K = 1.2, arclength
   50 with no segment longer than 1e-3 (target: under 1 s), with the time per refined point
   beside a plain numpy iteration of as many points (one vectorised map step each: the
   least work a point can cost).
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import time

CHILD = r"""
import json, sys, time
import numpy as np
import phaselab
repeat = int(sys.argv[1])
H = phaselab.models.henon_heiles()
sm = phaselab.models.standard_map()
guess = [0.0, 0.302667 + 0.01, 0.42, 0.01]
def timed(fn):
    fn()
    out = []
    for _ in range(repeat):
        t = time.perf_counter(); r = fn(); out.append(time.perf_counter() - t)
    return r, sorted(out)[len(out) // 2]
orbit, t1 = timed(lambda: phaselab.periodic_orbit(H, guess, plane={"x": 0.0}, energy=1 / 8))
sym, t2 = timed(lambda: phaselab.periodic_orbit(sm, [0.0, 2 * np.pi * 55 / 89], 89,
                                                params={"K": 0.9}, symmetric=True))
fixed = phaselab.periodic_orbit(sm, [0.01, 0.0], params={"K": 1.2})
man, t3 = timed(lambda: phaselab.manifold(fixed, length=50.0, max_segment=1e-3))
pts = man.lifted[0]
seg = float(np.max(np.linalg.norm(np.diff(pts, axis=0), axis=1)))
K = 1.2
def numpy_step(z):
    p = z[:, 1] + K * np.sin(z[:, 0])
    return np.column_stack([z[:, 0] + p, p])
numpy_step(pts)
t0 = time.perf_counter()
for _ in range(repeat):
    numpy_step(pts)
t_np = (time.perf_counter() - t0) / repeat
print(json.dumps({"hh_time": t1, "hh_steps": orbit.iterations, "hh_stability": orbit.stability,
                  "sym_time": t2, "sym_residue": sym.residue, "man_time": t3, "man_points": len(pts),
                  "man_max_segment": seg, "man_length": man.length, "numpy_per_point": t_np / len(pts)}))
"""


def run(form, repeat):
    env = dict(os.environ, PHASELAB_LOOPS=form, PHASELAB_QUIET="1")
    res = subprocess.run([sys.executable, "-c", CHILD, str(repeat)], env=env, capture_output=True, text=True,
                         timeout=3600)
    if res.returncode != 0:
        raise RuntimeError(res.stderr[-3000:])
    return json.loads(res.stdout.strip().splitlines()[-1])


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args()
    print(f"{os.cpu_count()} cores, load average {os.getloadavg()[0]:.2f}; medians of {args.repeat} warm calls")
    rows = {form: run(form, args.repeat) for form in ("generic", "inlined")}
    g, i = rows["generic"], rows["inlined"]
    print(f"{'':52s}{'generic':>14s}{'inlined':>14s}  target")
    print(f"{'Henon-Heiles period-1 orbit (guess 1e-2 away)':52s}{1e3 * g['hh_time']:11.1f} ms"
          f"{1e3 * i['hh_time']:11.1f} ms  < 50 ms")
    print(f"{'  Newton steps':52s}{g['hh_steps']:14d}{i['hh_steps']:14d}  <= 8")
    print(f"{'standard map symmetric period-89 orbit':52s}{1e3 * g['sym_time']:11.1f} ms"
          f"{1e3 * i['sym_time']:11.1f} ms  < 100 ms")
    print(f"{'standard map unstable manifold, arclength 50':52s}{g['man_time']:12.3f} s"
          f"{i['man_time']:12.3f} s  < 1 s")
    print(f"{'  points / longest segment':52s}{g['man_points']:>14d}{i['man_points']:>14d}  "
          f"{g['man_max_segment']:.2e} (<= 1e-3)")
    for form, r in rows.items():
        per = r["man_time"] / r["man_points"]
        print(f"  {form}: {1e9 * per:.0f} ns per refined point; plain numpy iteration of the same points "
              f"{1e9 * r['numpy_per_point']:.1f} ns per point (ratio {per / r['numpy_per_point']:.1f})")


if __name__ == "__main__":
    main()
