"""Every public function refuses bad arguments with phaselab's own errors (issue 24, item 4).

One table per function: a cheap valid call and, per argument, values that must be refused
(wrong types, NaN, infinities, negative and huge counts, wrong shapes, objects of the wrong
kind). A case passes when the call raises a :class:`~phaselab.PhaselabError` subclass; a call
that returns or raises anything else (Python's own ``TypeError``, ``AttributeError``,
``ValueError``, numpy's ``MemoryError``) fails. Values that are legal corner cases (a NaN
entry in a seed, which becomes that orbit's status) are not in the table.

The arguments are refused before anything is compiled or integrated, so the fast part of the
table runs in a few seconds on a cold kernel cache; the part that needs a real periodic orbit
(``manifold``, ``continue_family`` with a real orbit) is marked slow.
"""

from __future__ import annotations

import inspect
import math

import numpy as np
import pytest

import phaselab
from phaselab import PhaselabError

NAN, INF = math.nan, math.inf

H1 = phaselab.Hamiltonian("p**2/2 + q**2/2 + a*q**4", ["q"], ["p"], params={"a": 0.1})
H2 = phaselab.Hamiltonian("(px**2 + py**2)/2 + (x**2 + y**2)/2", ["x", "y"], ["px", "py"])
MAP = phaselab.models.standard_map()

NOT_SYSTEMS = [None, "p**2/2", 1.0, [1, 2], object(), np.zeros(3), {"H": "p**2"}]
NUMBERS = [NAN, INF, -INF, "1.0", [1.0], 1j, True]
REQUIRED = NUMBERS + [None]
POSITIVE = NUMBERS + [0.0, -1.0]
COUNTS = [-1, 0, 1.5, NAN, INF, 10**30, "10", True]
HUGE = [10**12, 10**15]
STATES1 = ["abc", [[1.0, 2.0, 3.0]], [[[1.0]]], [], None, object(), [[1.0, "a"]], [[1j, 0]]]
MAPPINGS = ["x", [("x", 0.0)], 5, object()]
NAMES = [3, None, ["q"], "no_such_name"]
PARAMS = ["a=1", [1.0], {"nope": 1.0}, {"a": "big"}, {"a": NAN}, {"a": INF}, {3: 1.0}]
METHODS = [3, None, "no_such_method", ["yoshida4"]]
DIRECTIONS = [0, 2, NAN, "+1", None, True]
BOXES = [-1.0, NAN, "wide", [1.0, 2.0], {"q": (1.0, -1.0)}, {"q": "ab"}, {"nope": (0, 1)}]
GRID1 = phaselab.state_grid(H1, {"q": (-0.5, 0.5), "p": (-0.5, 0.5)}, resolution=3)
RANGES = ["q", {"q": (-1, 1)}, {"q": (1, -1), "p": (0, 1)}, {"q": (0, NAN), "p": (0, 1)},
          {"q": (0, 1, -3), "p": (0, 1)}, {"q": (0, 1, 10**9), "p": (0, 1)}, {"q": "ab", "p": (0, 1)},
          {"q": (0, 1, 2, 3), "p": (0, 1)}, {"zz": (0, 1), "p": (0, 1)}]


def _case(fn, args, kwargs, bad):
    """(function, valid positional args, valid keywords, {argument: bad values})"""
    return fn, args, kwargs, bad


def _table():
    """Rows of (name, function, args, kwargs, argument, bad value)."""
    seeds_h2 = [[0.0, 0.1, 0.3, 0.0]]
    rows = {
        "Hamiltonian": _case(phaselab.Hamiltonian, ("p**2/2 + a*q**2", ["q"], ["p"]), {"params": {"a": 1.0}},
                             {"expr": [None, ["p"], object(), b"p**2", "p**2 +", "__import__('os')"],
                              "coords": [None, 3, ["1x"], ["q", "q"], [None]], "momenta": [None, 3, ["p", "r"]],
                              "params": PARAMS[:2] + [{"a": "x"}, {"a": NAN}, {"a": INF}, {"a": None}],
                              "time": [3, "q"]}),
        "AreaPreservingMap": _case(phaselab.AreaPreservingMap, (["q + p", "p + sin(q)"], ["q"], ["p"]), {},
                                   {"update": [None, 3, ["q + p"], [["q", "q + p", "x"]], [3, 4], ["q", "p*2"]],
                                    "coords": [None, 3], "modulus": ["x", [1, 2, 3], -1.0, NAN, {"q": "a"}]}),
        "trajectory": _case(phaselab.trajectory, (H1, [[0.1, 0.0]], 1.0), {"dt": 0.1},
                            {"system": NOT_SYSTEMS, "states": STATES1, "t": REQUIRED + [1e300],
                             "dt": POSITIVE + [1e-300], "method": METHODS, "params": PARAMS,
                             "box": BOXES, "save_every": COUNTS, "tol": POSITIVE,
                             "maxit": COUNTS}),
        "shell_seeds": _case(phaselab.shell_seeds, (H2, {"y": [0.1], "py": [0.0]}),
                             {"energy": 0.1, "plane": {"x": 0.0}, "solve_for": "px"},
                             {"system": NOT_SYSTEMS, "energy": REQUIRED, "plane": MAPPINGS + [{"x": NAN}],
                              "solve_for": NAMES, "points": MAPPINGS + [{"y": "a", "py": [0.0]}],
                              "params": PARAMS[:2], "sign": DIRECTIONS}),
        "section": _case(phaselab.section, (H2, seeds_h2), {"plane": {"x": 0.0}, "crossings": 3, "dt": 0.05},
                         {"system": NOT_SYSTEMS, "states": STATES1, "plane": MAPPINGS + [{"x": NAN}],
                          "direction": DIRECTIONS, "crossings": COUNTS + HUGE, "params": PARAMS[:3],
                          "dt": POSITIVE, "method": METHODS, "t_max": POSITIVE,
                          "energy": NUMBERS, "axes": [3, ["q"], "no_such_name"], "box": BOXES[:3],
                          "energy_limit": POSITIVE}),
        "level_set": _case(phaselab.level_set, (H1, {"q": (-1, 1), "p": (-1, 1)}, [0.1]), {"resolution": 20},
                           {"system": NOT_SYSTEMS, "ranges": RANGES, "levels": ["a", [NAN], None, INF],
                            "params": PARAMS, "resolution": COUNTS + HUGE, "plane": MAPPINGS,
                            "separatrices": ["yes", None, 2]}),
        "equilibria": _case(phaselab.equilibria, (H1,), {"starts": 2},
                            {"system": NOT_SYSTEMS, "params": PARAMS, "ranges": BOXES[1:],
                             "starts": [c for c in COUNTS if c != 0] + HUGE, "seed": [NAN, "1", -1, 1.5]}),
        "lyapunov": _case(phaselab.lyapunov, (H1, [0.1, 0.0], 1.0), {"dt": 0.1},
                          {"system": NOT_SYSTEMS, "states": STATES1, "t": REQUIRED + [1e300],
                           "params": PARAMS, "dt": POSITIVE, "method": METHODS}),
        "chaos_indicators": _case(phaselab.chaos_indicators, (H1, [[0.1, 0.0]], 1.0), {"dt": 0.1},
                                  {"system": NOT_SYSTEMS, "states": STATES1, "t": REQUIRED + [1e300],
                                   "params": PARAMS, "dt": POSITIVE, "method": METHODS,
                                   "seed": [NAN, "1", -1], "save_every": COUNTS, "box": BOXES,
                                   "history": ["yes", 2]}),
        "chaos_map": _case(phaselab.chaos_map, (H1, GRID1, 1.0), {"dt": 0.1},
                           {"system": NOT_SYSTEMS, "states": STATES1, "t": REQUIRED + [1e300],
                            "indicator": NAMES, "params": PARAMS, "dt": POSITIVE, "method": METHODS,
                            "box": BOXES, "batch_size": COUNTS, "seed": [NAN, "1", -1]}),
        "escape_map": _case(phaselab.escape_map, (H1, GRID1, 1.0), {"dt": 0.1, "box": 2.0},
                            {"system": NOT_SYSTEMS, "states": STATES1, "t": NUMBERS + [1e300, 10**11],
                             "box": BOXES + [None], "params": PARAMS, "dt": POSITIVE,
                             "method": METHODS, "batch_size": COUNTS}),
        "parameter_scan": _case(phaselab.parameter_scan, (lambda a: {"x": a}, {"a": [1.0, 2.0]}), {},
                                {"function": [None, 3, "abs"], "grid": MAPPINGS + [{"a": "x"}, {"a": [[1, 2]]}, {"a": []}],
                                 "batch_size": COUNTS}),
        "shell_grid": _case(phaselab.shell_grid, (H2, {"y": (-0.1, 0.1), "py": (-0.1, 0.1)}),
                            {"energy": 0.1, "plane": {"x": 0.0}, "solve_for": "px", "resolution": 3},
                            {"system": NOT_SYSTEMS, "energy": REQUIRED, "plane": MAPPINGS, "solve_for": NAMES,
                             "ranges": RANGES[:2] + [{"y": (0, 1, 10**9), "py": (0, 1)}],
                             "resolution": COUNTS + HUGE, "params": PARAMS[:3], "sign": DIRECTIONS}),
        "state_grid": _case(phaselab.state_grid, (H1, {"q": (-1, 1), "p": (-1, 1)}), {"resolution": 3},
                            {"system": NOT_SYSTEMS, "ranges": RANGES, "resolution": COUNTS + [10**9],
                             "fixed": MAPPINGS + [{"q": "a"}, {"nope": 1.0}, {"q": NAN}]}),
        "frequencies": _case(phaselab.frequencies, (H1, [[0.1, 0.0]]), {"t": 10.0, "dt": 0.1},
                             {"system": NOT_SYSTEMS, "states": STATES1, "t": REQUIRED + [1e300],
                              "samples": COUNTS + HUGE, "params": PARAMS, "dt": POSITIVE, "method": METHODS,
                              "lines": COUNTS + HUGE, "window": [NAN, "1", -1, 99], "fold": NAMES,
                              "angles": [3, "nope", ["nope"]]}),
        "rotation_number": _case(phaselab.rotation_number, (MAP, [[0.1, 0.1]]), {"samples": 16},
                                 {"system": NOT_SYSTEMS, "states": STATES1, "samples": COUNTS + HUGE,
                                  "angle": NAMES[:1] + NAMES[2:], "params": PARAMS[:3], "center": MAPPINGS}),
        "frequency_map": _case(phaselab.frequency_map, (H1, GRID1), {"t": 10.0, "dt": 0.1},
                               {"system": NOT_SYSTEMS, "states": STATES1, "t": REQUIRED + [1e300],
                                "samples": COUNTS + HUGE, "params": PARAMS, "dt": POSITIVE, "method": METHODS,
                                "batch_size": COUNTS}),
        "periodic_orbit": _case(phaselab.periodic_orbit, (MAP, [3.14, 0.0]), {"returns": 1},
                                {"system": NOT_SYSTEMS, "states": STATES1, "returns": COUNTS + [10**5, 10**9],
                                 "params": PARAMS[:3], "direction": DIRECTIONS, "tol": POSITIVE,
                                 "maxit": COUNTS, "box": BOXES[:3], "shift": MAPPINGS,
                                 "symmetric": ["yes", 2]}),
        "find_periodic_orbits": _case(phaselab.find_periodic_orbits, (MAP, 1),
                                      {"ranges": {"q": (3.0, 3.3), "p": (-0.1, 0.1)}, "resolution": 2},
                                      {"system": NOT_SYSTEMS, "returns": COUNTS + [10**5],
                                       "ranges": RANGES[:1] + RANGES[2:3], "resolution": COUNTS + HUGE,
                                       "same": POSITIVE, "tol": POSITIVE, "maxit": COUNTS}),
        "continue_family": _case(phaselab.continue_family, (None, "K", (0.5, 1.0)), {},
                                 {"orbit": NOT_SYSTEMS + [MAP]}),
        "manifold": _case(phaselab.manifold, (None,), {}, {"orbit": NOT_SYSTEMS + [MAP]}),
        "torus_breakup": _case(phaselab.torus_breakup, (MAP, 0.618, "K", (0.5, 1.0)), {"max_returns": 5},
                               {"system": NOT_SYSTEMS + [H1], "rotation_number": REQUIRED,
                                "parameter": NAMES, "span": [(0.5, 1.0, 2.0), (NAN, 1.0), "ab", 0.5, None,
                                                                (1.0, 1.0)],
                                "params": PARAMS[:3], "max_returns": COUNTS + [10**9],
                                "threshold": POSITIVE, "steps": COUNTS + [10**9],
                                "tol": POSITIVE, "xtol": POSITIVE}),
        "explore": _case(phaselab.explore, (H2,), {"energy": 0.1, "plane": {"x": 0.0}},
                         {"system": NOT_SYSTEMS, "crossings": COUNTS + [10**9]}),
        "warm": _case(phaselab.warm, (), {}, {"verbose": ["yes", None, 2], "workers": [0, 1.5, "2", True]}),
        "set_limits": _case(phaselab.set_limits, (), {},
                            {"memory_bytes": POSITIVE,
                             "orbit_steps": POSITIVE}),
    }
    out = []
    for name, (fn, args, kwargs, bad) in rows.items():
        params = list(inspect.signature(fn).parameters)
        for arg, values in bad.items():
            for value in values:
                out.append(pytest.param(fn, args, kwargs, params, arg, value, id=f"{name}-{arg}-{_short(value)}"))
    return out


def _short(value) -> str:
    text = repr(value)
    return text if len(text) <= 24 else text[:21] + "..."


def _call(fn, args, kwargs, params, arg, value):
    args, kwargs = list(args), dict(kwargs)
    i = params.index(arg)
    if i < len(args):
        args[i] = value
    else:
        kwargs[arg] = value
    return fn(*args, **kwargs)


@pytest.fixture(autouse=True)
def _restore_limits():
    from phaselab.engine import limits

    before = limits.LIMITS
    yield
    limits.LIMITS = before


@pytest.mark.parametrize("fn, args, kwargs, params, arg, value", _table())
def test_bad_argument_is_refused_by_phaselab(fn, args, kwargs, params, arg, value):
    try:
        _call(fn, args, kwargs, params, arg, value)
    except PhaselabError:
        return
    except BaseException as exc:  # noqa: BLE001 - the point of the test
        pytest.fail(f"{type(exc).__name__} escaped: {exc}")
    pytest.fail(f"{arg} = {value!r:.60} was accepted")


# ----------------------------------------------------------------------------- with a real orbit
@pytest.fixture(scope="module")
def saddle():
    """The standard map's hyperbolic fixed point at the origin (multipliers 1 + K/2 +- ...)."""
    return phaselab.periodic_orbit(MAP, [0.0, 0.0], returns=1)


ORBIT_TABLE = {
    "manifold": (phaselab.manifold, {"length": 2.0},
                 {"branch": NAMES + ["sideways"], "side": DIRECTIONS, "length": POSITIVE + [1e300, 1e6],
                  "max_segment": POSITIVE + [1e3], "max_angle": POSITIVE, "first": POSITIVE,
                  "point": COUNTS[:1] + COUNTS[2:] + [5], "max_points": COUNTS + HUGE,
                  "min_segment": POSITIVE}),
    "continue_family": (phaselab.continue_family, {"parameter": "K", "span": (0.9, 1.0), "steps": 2},
                        {"parameter": NAMES + ["energy"], "span": [(0.5, 1.0, 2.0), (NAN, 1.0), "ab", 0.5, None,
                                                                   (1.0, 1.0), (2.0, 3.0)],
                         "steps": COUNTS + HUGE, "ds": POSITIVE, "ds_max": POSITIVE, "tol": POSITIVE,
                         "maxit": COUNTS + HUGE}),
}


def _orbit_rows():
    return [pytest.param(name, arg, value, id=f"{name}-{arg}-{_short(value)}")
            for name, (_, _, bad) in ORBIT_TABLE.items() for arg, values in bad.items() for value in values]


@pytest.mark.slow
@pytest.mark.parametrize("name, arg, value", _orbit_rows())
def test_bad_argument_with_a_real_orbit_is_refused(saddle, name, arg, value):
    fn, kwargs, _ = ORBIT_TABLE[name]
    kwargs = dict(kwargs, **{arg: value})
    try:
        fn(saddle, **kwargs)
    except PhaselabError:
        return
    except BaseException as exc:  # noqa: BLE001 - the point of the test
        pytest.fail(f"{type(exc).__name__} escaped: {exc}")
    pytest.fail(f"{arg} = {value!r:.60} was accepted")


def test_sizes_name_the_limit_and_how_to_raise_it():
    """The sizes of issue 24 are refused before anything is allocated or run, naming the limit
    and set_limits; a lowered limit refuses what the default lets through."""
    for period in (10**5, 10**9):
        with pytest.raises(phaselab.ParameterError, match=r"limit of .*phaselab\.set_limits\("):
            phaselab.periodic_orbit(MAP, [3.14, 0.0], returns=period)
    with pytest.raises(phaselab.ParameterError, match=r"at most 100000"):
        phaselab.state_grid(H1, {"q": (-1, 1), "p": (-1, 1)}, resolution=10**9)
    with pytest.raises(phaselab.ParameterError, match=r"set_limits\(orbit_steps"):
        phaselab.escape_map(H1, GRID1, 10**11, box=2.0, dt=0.1)
    before = phaselab.set_limits(orbit_steps=1e4)
    try:
        with pytest.raises(phaselab.ParameterError, match=r"limit of 1e\+04"):
            phaselab.escape_map(H1, GRID1, 1000.0, box=2.0, dt=0.1)
        with pytest.raises(phaselab.ParameterError, match=r"limit of 1e\+04"):
            phaselab.find_periodic_orbits(MAP, 50, ranges={"q": (0, 1), "p": (0, 1)}, resolution=4)
    finally:
        phaselab.set_limits(**vars(before))
