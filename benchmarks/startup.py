"""Time to the first answer: a new system from ``import phaselab`` in a fresh process.

Run:  python benchmarks/startup.py [--repeat N] [--skip-machine-cold]
      python benchmarks/startup.py --cold [--compare-workers]    (only the empty-cache figures, one run)

``--cold`` prints, for a new 2-dof polynomial system in a fresh process with an empty kernel
cache, the first section, chaos indicators, trajectory, periodic orbit on a plane and
frequencies (each with its share of compiling), the explorer's first click alone in another
fresh process with an empty cache, then ``phaselab warm`` (its worker count, wall time and
seconds per path) with another empty cache; ``--compare-workers`` adds ``phaselab warm
--workers 1``. The load average is printed beside each figure.

For each system (Henon-Heiles from the catalogue, a new string Hamiltonian that no cache
has seen, the FPUT chain with n = 10) a fresh Python process imports phaselab and times its
first section, first chaos indicators, first trajectory and the explorer's first click (one
new orbit of 300 crossings through the widget's own path), in that order, and the share of
each spent compiling (numba's compile events, counted by a listener on its event API). The
cases, each in fresh processes, side by side in one run:

``machine cold``
    an empty kernel cache: the loops every system shares are compiled too (once per
    machine; ``phaselab warm`` does this ahead of time);
``new system``
    the shared loops are cached, the system is new: only its kernel is compiled (the goal:
    section < 3 s, chaos indicators < 5 s, trajectory < 2 s; FPUT within twice that);
``warm``
    a second process for the same system: everything is loaded from the cache;
``warm, inlined``
    after the background build of the system's inlined loops has finished.

Also printed: ``import phaselab`` alone, and the bare ``import numpy, sympy`` it rests on.
Figures are medians over ``--repeat`` runs.
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
import uuid

CHILD = r"""
import json, sys, time
t0 = time.perf_counter()
import numpy as np
import phaselab
t_import = time.perf_counter() - t0
from numba.core import event

compile_seconds = [0.0]

class Listener(event.Listener):
    depth = 0
    def on_start(self, ev):
        if self.depth == 0:
            self.t = time.perf_counter()
        self.depth += 1
    def on_end(self, ev):
        self.depth -= 1
        if self.depth == 0:
            compile_seconds[0] += time.perf_counter() - self.t

listener = Listener()
event.register("numba:compile", listener)

which, tag = sys.argv[1], sys.argv[2]
if which == "henon_heiles":
    H = phaselab.models.henon_heiles()
    E, plane, solve, free = 1 / 8, {"x": 0.0}, "px", {"y": np.linspace(-0.3, 0.4, 20), "py": 0.0}
elif which == "string":
    H = phaselab.Hamiltonian(f"(px**2 + py**2)/2 + (x**2 + {tag}*y**2)/2 + x**2*y/2 - y**3/5",
                             ["x", "y"], ["px", "py"])
    E, plane, solve, free = 0.05, {"x": 0.0}, "px", {"y": np.linspace(-0.2, 0.2, 20), "py": 0.0}
else:
    H = phaselab.models.fput_chain(10)
    n = H.dof
    E, plane, solve = 0.5, {H.coords[0].name: 0.0}, H.momenta[0].name
    free = {s.name: 0.05 * np.sin(np.linspace(0, 3, 20) + k) for k, s in
            enumerate(H.state_symbols) if s.name not in (H.coords[0].name, H.momenta[0].name)}
seeds = phaselab.shell_seeds(H, free, energy=E, plane=plane, solve_for=solve)
out = {"import": t_import}

def timed(name, fn):
    c0 = compile_seconds[0]
    t = time.perf_counter()
    fn()
    out[name] = time.perf_counter() - t
    out[name + " compiling"] = compile_seconds[0] - c0

if "--click-only" in sys.argv:      # the explorer's first click, alone in a fresh process
    box = {}
    timed("explorer open", lambda: box.setdefault("ex", phaselab.explore(H, energy=E, plane=plane,
                                                                         solve_for=solve, crossings=300)))
    ex = box["ex"]

    def drawn():                    # the clicked orbit's crossings computed and drawn
        ex.add_seed(0.05, 0.01)
        while ex.jobs.wait(300) and ex.jobs.busy:
            pass

    timed("explorer first click", drawn)
    timed("explorer click's trace and frequencies", lambda: ex.wait(300))
    print(json.dumps(out))
    sys.exit(0)
timed("section", lambda: phaselab.section(H, seeds, 300, plane=plane))
timed("chaos indicators", lambda: phaselab.chaos_indicators(H, seeds.valid_states(), 200.0))
timed("trajectory", lambda: phaselab.trajectory(H, seeds.valid_states(), 100.0))
if "--cold" in sys.argv:
    z0 = seeds.valid_states()[0]
    timed("periodic orbit (plane)", lambda: phaselab.periodic_orbit(H, z0, plane=plane, energy=E))
    timed("frequencies", lambda: phaselab.frequencies(H, seeds.valid_states()[:4], t=102.4, samples=1024))
if which != "fput" and "--cold" not in sys.argv:
    ex = phaselab.explore(H, energy=E, plane=plane, solve_for=solve, crossings=300)
    def click():
        ex.add_seed(0.05, 0.01)
        ex.wait(300)
    timed("explorer first click", click)
out["total"] = time.perf_counter() - t0
print(json.dumps(out))
"""

IMPORT_CHILD = "import time; t = time.perf_counter(); import phaselab; print(time.perf_counter() - t)"
BASE_CHILD = "import time; t = time.perf_counter(); import numpy, sympy; print(time.perf_counter() - t)"
CALLS = ("section", "chaos indicators", "trajectory", "explorer first click")


COLD_CALLS = ("section", "chaos indicators", "trajectory", "periodic orbit (plane)", "frequencies")


def child(env, which, tag, *extra):
    res = subprocess.run([sys.executable, "-c", CHILD, which, tag, *extra], env=env, capture_output=True,
                         text=True, timeout=3600)
    if res.returncode != 0:
        raise RuntimeError(res.stderr[-3000:])
    return json.loads(res.stdout.strip().splitlines()[-1])


def wait_for_builds(cache, timeout=1800.0):
    """Wait until no background build of this cache is running (its job files are gone)."""
    t0 = time.time()
    while time.time() - t0 < timeout:
        if not any(name.startswith(".build-") for name in os.listdir(cache)):
            return
        time.sleep(1.0)


def median(rows, key):
    values = [r[key] for r in rows if key in r]
    return statistics.median(values) if values else float("nan")


def cold(base, compare_workers=False):
    """The empty-cache figures: five first calls of a new system, the explorer's first click
    (alone, in another fresh process), then ``phaselab warm`` (default workers; with
    ``compare_workers`` also one worker), each with the load average beside it."""
    print(f"{os.cpu_count()} cores")
    empty = tempfile.mkdtemp(prefix="phaselab-empty-")
    tag = "1." + uuid.uuid4().hex[:6].translate(str.maketrans("abcdef", "123456"))
    t0, load = time.perf_counter(), os.getloadavg()[0]
    out = child(dict(base, PHASELAB_CACHE_DIR=empty, PHASELAB_LOOPS="generic"), "string", tag, "--cold")
    print(f"empty cache, fresh process, new system (import {out['import']:.2f} s, "
          f"process {time.perf_counter() - t0:.1f} s, load average {load:.2f} -> {os.getloadavg()[0]:.2f}):")
    for c in COLD_CALLS:
        print(f"  {c:28s} {out[c]:7.2f} s  ({out[c + ' compiling']:6.2f} s compiling)")
    shutil.rmtree(empty, ignore_errors=True)
    empty = tempfile.mkdtemp(prefix="phaselab-empty-")
    load = os.getloadavg()[0]
    out = child(dict(base, PHASELAB_CACHE_DIR=empty, PHASELAB_LOOPS="generic"),
                "string", tag, "--click-only")
    print(f"explorer on an empty cache, fresh process (load average {load:.2f} -> {os.getloadavg()[0]:.2f}):")
    for c in ("explorer open", "explorer first click", "explorer click's trace and frequencies"):
        print(f"  {c:28s} {out[c]:7.2f} s  ({out[c + ' compiling']:6.2f} s compiling)")
    shutil.rmtree(empty, ignore_errors=True)
    for workers in ([None, 1] if compare_workers else [None]):
        empty = tempfile.mkdtemp(prefix="phaselab-empty-")
        extra = [] if workers is None else ["--workers", str(workers)]
        t0, load = time.perf_counter(), os.getloadavg()[0]
        res = subprocess.run([sys.executable, "-m", "phaselab.cli", "warm", *extra],
                             env=dict(base, PHASELAB_CACHE_DIR=empty), capture_output=True, text=True, timeout=3600)
        lines = res.stdout.rstrip().splitlines()
        said = "default" if workers is None else str(workers)
        print(f"phaselab warm, empty cache, workers {said}: {time.perf_counter() - t0:.1f} s of wall time "
              f"(load average {load:.2f} -> {os.getloadavg()[0]:.2f})")
        print("\n".join(lines))
        if res.returncode != 0:
            print(res.stderr[-3000:])
        shutil.rmtree(empty, ignore_errors=True)


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--skip-machine-cold", action="store_true")
    ap.add_argument("--cold", action="store_true", help="only the empty-cache figures, one run")
    ap.add_argument("--compare-workers", action="store_true",
                    help="with --cold: phaselab warm also on one worker, for comparison")
    args = ap.parse_args()
    base = dict(os.environ, PHASELAB_QUIET="1")
    if args.cold:
        cold(base, compare_workers=args.compare_workers)
        return
    shared = tempfile.mkdtemp(prefix="phaselab-startup-")
    print(f"cache folder: {shared}; {os.cpu_count()} cores; load average {os.getloadavg()[0]:.2f}")

    imports = [float(subprocess.run([sys.executable, "-c", IMPORT_CHILD], capture_output=True, text=True,
                                    env=base).stdout) for _ in range(args.repeat)]
    bases = [float(subprocess.run([sys.executable, "-c", BASE_CHILD], capture_output=True, text=True,
                                  env=base).stdout) for _ in range(args.repeat)]
    print(f"import phaselab: {statistics.median(imports):.2f} s (import numpy, sympy: "
          f"{statistics.median(bases):.2f} s)\n")

    rows = {}
    if not args.skip_machine_cold:
        runs = []
        for _ in range(min(args.repeat, 2)):
            empty = tempfile.mkdtemp(prefix="phaselab-empty-")
            tag = "1." + uuid.uuid4().hex[:6].translate(str.maketrans("abcdef", "123456"))
            runs.append(child(dict(base, PHASELAB_CACHE_DIR=empty, PHASELAB_LOOPS="generic"), "string", tag))
            shutil.rmtree(empty, ignore_errors=True)
        rows[("string", "machine cold")] = runs
    # the shared loops, once
    subprocess.run([sys.executable, "-m", "phaselab.cli", "warm"], env=dict(base, PHASELAB_CACHE_DIR=shared),
                   capture_output=True, check=True, timeout=3600)
    for which in ("henon_heiles", "string", "fput"):
        new, warm, inlined = [], [], []
        for r in range(args.repeat):
            tag = f"1.{r + 1}{int(time.time() * 1000) % 100000}"   # a coefficient no cache has seen
            cache = tempfile.mkdtemp(prefix="phaselab-sys-")
            shutil.copytree(shared, cache, dirs_exist_ok=True)      # shared loops cached, system new
            env = dict(base, PHASELAB_CACHE_DIR=cache, PHASELAB_LOOPS="auto")
            new.append(child(env, which, tag))
            wait_for_builds(cache)       # the background build must not share the cores
            warm.append(child(dict(env, PHASELAB_LOOPS="generic"), which, tag))
            inlined.append(child(env, which, tag))
            wait_for_builds(cache)       # a path first used above may have started one more build
            inlined[-1] = child(env, which, tag)
            shutil.rmtree(cache, ignore_errors=True)
        rows[(which, "new system")] = new
        rows[(which, "warm")] = warm
        rows[(which, "warm, inlined")] = inlined

    head = f"{'system':14s} {'case':15s}" + "".join(f"{c:>24s}" for c in CALLS)
    print(head)
    print("-" * len(head))
    for (which, case), runs in rows.items():
        cells = []
        for c in CALLS:
            t, comp = median(runs, c), median(runs, c + " compiling")
            cells.append("-" if t != t else f"{t:8.3f} s ({100 * comp / t if t > 0 else 0:3.0f}% comp)")
        print(f"{which:14s} {case:15s}" + "".join(f"{x:>24s}" for x in cells))
    print("\n(% comp: share of the call spent in numba compilation, loading from the cache included)")
    shutil.rmtree(shared, ignore_errors=True)


if __name__ == "__main__":
    main()
