"""Compiling the generic loops ahead of time: :func:`warm` (``phaselab warm`` on the console).

The generic loops are the same for every system, so they can be compiled once per machine
before anyone waits for them: in a cluster image, a binder build, or after installing. Each
public path is run once on a tiny built-in problem, which compiles (or loads from the cache)
exactly what a user's first call of that path needs.

The paths run on a few worker processes (one per core by default), the longest first
(:data:`LONGEST_FIRST`), each worker taking the next path as it becomes free, so the short ones
fill in around the long ones. A worker is a fresh interpreter running
:mod:`phaselab.engine.warm_worker` (never a fork, which would copy this process's compiler
state, threads and locks; and not a multiprocessing spawn, which would run the caller's
script again in each worker). Workers share the kernel cache: the file lock around each
compilation (:mod:`phaselab.base.locks`) makes a worker that needs a loop another worker is
compiling wait and load it, so no loop is compiled twice. With one worker, or a private
temporary cache (which another process could not see), the paths run in this process.
"""

from __future__ import annotations

import json
import os
import queue
import subprocess
import sys
import threading
import time
import warnings
from pathlib import Path

import numpy as np

from phaselab.codegen.cache import cache_dir, is_fallback
from phaselab.codegen.progress import compiler_passes
from phaselab.errors import PhaselabWarning
from phaselab.engine import inputs

LONGEST_FIRST = (
    ("chaos indicators (implicit)", "periodic orbit (plane, implicit)", "manifold (map, stable)"),
    ("section (implicit)",), ("section",), ("periodic orbit (plane)",), ("frequencies",), ("chaos indicators",),
    ("trajectory (implicit)",), ("trajectory",), ("stroboscopic section",), ("periodic orbit (drive)",),
    ("map indicators",), ("periodic orbit (map)",), ("map iterates",), ("frequencies (map)",),
    ("manifold (map)",), ("chaos indicators (history)",), ("periodic orbits (many starts)",),
    ("section (one orbit)",),
)
"""The paths in the order the workers start them, by their first compile on an empty cache
(2 cores, one process: 10.8 s for the implicit chaos indicators down to under 1.3 s from the
stroboscopic section on). A path that only loads what an earlier one compiled comes late, so it
does not wait on another worker's lock. Paths grouped together run on one worker, one after the
other: the implicit tangent paths and the stable manifold of a map solve with
``np.linalg.solve``, whose numba implementation (about 40 functions, compiled in each process
that needs it, never cached) then compiles once."""

_systems: dict = {}


def _system(which: str):
    """The tiny built-in system ``which`` of the warm-up (made once per process)."""
    import phaselab

    if which not in _systems:
        _systems[which] = {
            "flow": lambda: phaselab.Hamiltonian("(px**2 + py**2)/2 + (x**2 + y**2)/2 + x**2*y/4",
                                                 ["x", "y"], ["px", "py"], name="warm-up flow"),
            "mixed": lambda: phaselab.Hamiltonian("p**2/2 + q**2/2 + q**2*p**2/8", ["q"], ["p"],
                                                  name="warm-up mixed"),
            "mixed2": lambda: phaselab.Hamiltonian("(px**2 + py**2)/2 + (x**2 + y**2)/2 + x**2*py**2/8",
                                                   ["x", "y"], ["px", "py"], name="warm-up mixed plane"),
            "driven": lambda: phaselab.Hamiltonian("p**2/2 + q**2/2 - e*q*cos(t)", ["q"], ["p"],
                                                   params={"e": 0.1}, time="t", period="2*pi",
                                                   name="warm-up driven"),
            "rotor": lambda: phaselab.AreaPreservingMap([("p", "p + k*sin(q)"), ("q", "q + p")], ["q"], ["p"],
                                                        params={"k": 0.5},
                                                        modulus=[6.283185307179586, None], name="warm-up map"),
        }[which]()
    return _systems[which]


def paths() -> dict:
    """Path name -> a call running it (systems are made when a path first needs them)."""
    import phaselab

    s = _system
    seeds = np.array([[0.0, 0.1, 0.3, 0.0], [0.0, -0.1, 0.3, 0.05]])
    return {
        "trajectory": lambda: phaselab.trajectory(s("flow"), seeds, 1.0, dt=0.1),
        "section": lambda: phaselab.section(s("flow"), seeds, plane={"x": 0.0}, crossings=2, dt=0.1),
        "section (one orbit)": lambda: phaselab.section(s("flow"), seeds[:1], plane={"x": 0.0},
                                                        crossings=2, dt=0.1),
        "section (implicit)": lambda: phaselab.section(s("mixed2"), seeds, plane={"x": 0.0}, crossings=2,
                                                       dt=0.1),
        "trajectory (implicit)": lambda: phaselab.trajectory(s("mixed"), [[0.1, 0.0], [0.2, 0.0]], 1.0, dt=0.1),
        "stroboscopic section": lambda: phaselab.section(s("driven"), [[0.1, 0.0]], crossings=2, dt=0.5),
        "map iterates": lambda: phaselab.section(s("rotor"), [[0.1, 0.2]], crossings=2),
        "chaos indicators": lambda: phaselab.chaos_indicators(s("flow"), seeds, 1.0, dt=0.1),
        "chaos indicators (history)": lambda: phaselab.chaos_indicators(s("flow"), seeds, 1.0, dt=0.1,
                                                                         history=True),
        "chaos indicators (implicit)": lambda: phaselab.chaos_indicators(s("mixed"), [[0.1, 0.0]], 1.0, dt=0.1),
        "map indicators": lambda: phaselab.chaos_indicators(s("rotor"), [[0.1, 0.2]], 4),
        "periodic orbit (plane)": lambda: phaselab.periodic_orbit(s("flow"), [0.0, 0.1, 0.3, 0.0],
                                                                  plane={"x": 0.0}, dt=0.1),
        "periodic orbit (plane, implicit)": lambda: phaselab.periodic_orbit(s("mixed2"), [0.0, 0.1, 0.3, 0.0],
                                                                            plane={"x": 0.0}, dt=0.1),
        "periodic orbits (many starts)": lambda: phaselab.find_periodic_orbits(s("flow"), 1, states=seeds,
                                                                               plane={"x": 0.0},
                                                                               energy=0.05, dt=0.1),
        "periodic orbit (drive)": lambda: phaselab.periodic_orbit(s("driven"), [0.1, 0.0], dt=0.5),
        "periodic orbit (map)": lambda: phaselab.periodic_orbit(s("rotor"), [0.01, 0.0]),
        "manifold (map)": lambda: phaselab.manifold(phaselab.periodic_orbit(s("rotor"), [0.01, 0.0]),
                                                    length=0.5),
        "manifold (map, stable)": lambda: phaselab.manifold(phaselab.periodic_orbit(s("rotor"), [0.01, 0.0]),
                                                            branch="stable", length=0.5),
        "frequencies": lambda: phaselab.frequencies(s("flow"), seeds, 25.6, samples=256, dt=0.1),
        "frequencies (map)": lambda: phaselab.frequencies(s("rotor"), [[0.1, 0.2]], samples=256),
    }


def run_path(name: str) -> tuple[float, int]:
    """Run the warm-up path ``name`` in this process (generic loops).

    Returns
    -------
    (float, int)
        Seconds it took, and the numba compiler passes it ran (0 when everything it needs
        was loaded from the cache).
    """
    before = os.environ.get("PHASELAB_LOOPS")
    os.environ["PHASELAB_LOOPS"] = "generic"
    passes = compiler_passes()
    t0 = time.perf_counter()
    try:
        with warnings.catch_warnings():      # the answers are not the point here, the compiling is
            warnings.simplefilter("ignore", PhaselabWarning)
            paths()[name]()
    finally:
        if before is None:
            os.environ.pop("PHASELAB_LOOPS", None)
        else:
            os.environ["PHASELAB_LOOPS"] = before
    return time.perf_counter() - t0, compiler_passes() - passes


def run_paths(groups, *, workers: int = 1, done=None) -> dict:
    """Run the warm-up paths on ``workers`` processes (in this one when 1). ``groups`` is a
    sequence of tuples of path names: groups start in the order given, the paths of a group
    on one worker one after the other; ``done(name, seconds)`` is called as each path ends.

    Returns
    -------
    dict of str to (float, int)
        Per path, as :func:`run_path` returns.
    """
    groups = [tuple(g) for g in groups]
    report: dict = {}
    if workers > 1 and len(groups) > 1 and not is_fallback():
        _run_workers(groups, min(workers, len(groups)), report, done)
    for name in (n for g in groups for n in g):   # one worker; or what a worker could not run
        if name not in report:                     # (its error is raised here)
            report[name] = run_path(name)
            if done is not None:
                done(name, report[name][0])
    return report


def _run_workers(groups, workers, report, done) -> None:
    """Run ``groups`` of paths on ``workers`` worker processes (:mod:`phaselab.engine.warm_worker`),
    each taking the next group as it becomes free; results go to ``report``. A worker that
    cannot start or dies leaves its paths to the caller."""
    todo = queue.Queue()
    for group in groups:
        todo.put(group)
    lock = threading.Lock()
    here = str(Path(__file__).resolve().parents[2])          # the workers import this phaselab
    path = os.environ.get("PYTHONPATH")
    env = dict(os.environ, PHASELAB_CACHE_DIR=str(cache_dir()), PHASELAB_LOOPS="generic",
               PHASELAB_BACKGROUND_WARM="0", PYTHONPATH=here + (os.pathsep + path if path else ""))
    for name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
        env.setdefault(name, "1")       # the workers share the cores: no linear-algebra threads each

    def record(name, answer):
        if "seconds" in answer and answer.get("name") == name:
            with lock:
                report[name] = (answer["seconds"], answer["passes"])
                if done is not None:
                    done(name, answer["seconds"])

    def feed():
        try:
            proc = subprocess.Popen([sys.executable, "-m", "phaselab.engine.warm_worker"], env=env,
                                    stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True)
        except OSError:
            return
        with proc:
            while not todo.empty():
                try:
                    for name in todo.get_nowait():
                        proc.stdin.write(name + "\n")
                        proc.stdin.flush()
                        record(name, json.loads(proc.stdout.readline() or "{}"))
                except queue.Empty:
                    break
                except (OSError, ValueError):       # the worker died: the caller runs the rest
                    break
            try:
                proc.stdin.close()
            except OSError:
                pass

    threads = [threading.Thread(target=feed, daemon=True) for _ in range(workers)]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()


def warm(*, verbose: bool = False, workers=None) -> dict:
    """Compile (or load from the kernel cache) every generic loop of the public calls.

    Parameters
    ----------
    verbose : bool
        Print one line per path as it is done.
    workers : int, optional
        Worker processes compiling side by side (default: one per core, at most
        :data:`phaselab.engine.inputs.MAX_WORKERS`); 1 runs every path in this process.

    Returns
    -------
    dict of str to float
        Seconds spent per path (compiling on the first run, loading afterwards; waiting for
        another worker's compile of a shared loop included).
    """
    inputs.flag(verbose, "verbose")
    workers = inputs.workers(workers)
    table = paths()
    listed = {n for g in LONGEST_FIRST for n in g}
    groups = list(LONGEST_FIRST) + [(n,) for n in table if n not in listed]

    def say(name, seconds):
        if verbose:
            print(f"{name:32s} {seconds:6.1f} s", flush=True)

    report = run_paths(groups, workers=workers, done=say)
    return {name: report[name][0] for name in table}
