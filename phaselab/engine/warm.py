"""Compiling the generic loops ahead of time: :func:`warm` (``phaselab warm`` on the console).

The generic loops are the same for every system, so they can be compiled once per machine
before anyone waits for them: in a cluster image, a binder build, or after installing. Each
public path is run once on a tiny built-in problem, which compiles (or loads from the cache)
exactly what a user's first call of that path needs.
"""

from __future__ import annotations

import os
import time
import warnings

import numpy as np

from phaselab.errors import PhaselabWarning
from phaselab.engine import inputs


def _paths():
    import phaselab

    flow = phaselab.Hamiltonian("(px**2 + py**2)/2 + (x**2 + y**2)/2 + x**2*y/4", ["x", "y"], ["px", "py"],
                                name="warm-up flow")
    mixed = phaselab.Hamiltonian("p**2/2 + q**2/2 + q**2*p**2/8", ["q"], ["p"], name="warm-up mixed")
    mixed2 = phaselab.Hamiltonian("(px**2 + py**2)/2 + (x**2 + y**2)/2 + x**2*py**2/8", ["x", "y"], ["px", "py"],
                                  name="warm-up mixed plane")
    driven = phaselab.Hamiltonian("p**2/2 + q**2/2 - e*q*cos(t)", ["q"], ["p"], params={"e": 0.1},
                                  time="t", period="2*pi", name="warm-up driven")
    rotor = phaselab.AreaPreservingMap([("p", "p + k*sin(q)"), ("q", "q + p")], ["q"], ["p"],
                                       params={"k": 0.5}, modulus=[6.283185307179586, None],
                                       name="warm-up map")
    seeds = np.array([[0.0, 0.1, 0.3, 0.0], [0.0, -0.1, 0.3, 0.05]])
    return {
        "trajectory": lambda: phaselab.trajectory(flow, seeds, 1.0, dt=0.1),
        "section": lambda: phaselab.section(flow, seeds, plane={"x": 0.0}, crossings=2, dt=0.1),
        "section (one orbit)": lambda: phaselab.section(flow, seeds[:1], plane={"x": 0.0},
                                                        crossings=2, dt=0.1),
        "section (implicit)": lambda: phaselab.section(mixed2, seeds, plane={"x": 0.0}, crossings=2, dt=0.1),
        "trajectory (implicit)": lambda: phaselab.trajectory(mixed, [[0.1, 0.0], [0.2, 0.0]], 1.0, dt=0.1),
        "stroboscopic section": lambda: phaselab.section(driven, [[0.1, 0.0]], crossings=2, dt=0.5),
        "map iterates": lambda: phaselab.section(rotor, [[0.1, 0.2]], crossings=2),
        "chaos indicators": lambda: phaselab.chaos_indicators(flow, seeds, 1.0, dt=0.1),
        "chaos indicators (history)": lambda: phaselab.chaos_indicators(flow, seeds, 1.0, dt=0.1,
                                                                         history=True),
        "chaos indicators (implicit)": lambda: phaselab.chaos_indicators(mixed, [[0.1, 0.0]], 1.0, dt=0.1),
        "map indicators": lambda: phaselab.chaos_indicators(rotor, [[0.1, 0.2]], 4),
        "periodic orbit (plane)": lambda: phaselab.periodic_orbit(flow, [0.0, 0.1, 0.3, 0.0], plane={"x": 0.0},
                                                                  dt=0.1),
        "periodic orbit (plane, implicit)": lambda: phaselab.periodic_orbit(mixed2, [0.0, 0.1, 0.3, 0.0],
                                                                            plane={"x": 0.0}, dt=0.1),
        "periodic orbits (many starts)": lambda: phaselab.find_periodic_orbits(flow, 1,
                                                                               states=seeds,
                                                                               plane={"x": 0.0},
                                                                               energy=0.05, dt=0.1),
        "periodic orbit (drive)": lambda: phaselab.periodic_orbit(driven, [0.1, 0.0], dt=0.5),
        "periodic orbit (map)": lambda: phaselab.periodic_orbit(rotor, [0.01, 0.0]),
        "manifold (map)": lambda: phaselab.manifold(phaselab.periodic_orbit(rotor, [0.01, 0.0]), length=0.5),
        "manifold (map, stable)": lambda: phaselab.manifold(phaselab.periodic_orbit(rotor, [0.01, 0.0]),
                                                            branch="stable", length=0.5),
        "frequencies": lambda: phaselab.frequencies(flow, seeds, 25.6, samples=256, dt=0.1),
        "frequencies (map)": lambda: phaselab.frequencies(rotor, [[0.1, 0.2]], samples=256),
    }


def warm(*, verbose: bool = False) -> dict:
    """Compile (or load from the kernel cache) every generic loop of the public calls.

    Parameters
    ----------
    verbose : bool
        Print one line per path as it is done.

    Returns
    -------
    dict of str to float
        Seconds spent per path (compiling on the first run, loading afterwards).
    """
    inputs.flag(verbose, "verbose")
    before = os.environ.get("PHASELAB_LOOPS")
    os.environ["PHASELAB_LOOPS"] = "generic"
    report = {}
    try:
        for name, run in _paths().items():
            t0 = time.perf_counter()
            with warnings.catch_warnings():      # the answers are not the point here, the compiling is
                warnings.simplefilter("ignore", PhaselabWarning)
                run()
            report[name] = time.perf_counter() - t0
            if verbose:
                print(f"{name:32s} {report[name]:6.1f} s", flush=True)
    finally:
        if before is None:
            os.environ.pop("PHASELAB_LOOPS", None)
        else:
            os.environ["PHASELAB_LOOPS"] = before
    return report
