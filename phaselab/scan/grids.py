"""Grids of initial conditions and of parameters, and the scans that run over them.

``state_grid`` and ``shell_grid`` lay seeds on a rectangle of two shown state components
(the second on an energy shell); ``chaos_map`` computes a chaos indicator for every seed,
in batches, locally or on a Dask client; ``parameter_scan`` evaluates any function over a
Cartesian grid of parameter values.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass, field
from functools import partial
from typing import Callable, Mapping

import numpy as np

from phaselab.compute import inputs
from phaselab.errors import ModelError, ParameterError
from phaselab.scan.runner import run_batches

INDICATORS = ("lyapunov", "megno", "fli", "sali")
MAX_GRID_POINTS = 4_000_000


@dataclass
class StateGrid:
    """Seeds on a rectangular grid of two state components.

    Attributes
    ----------
    states : ndarray, shape (ny * nx, 2n)
        Seeds in row-major order of the picture (y index slow); NaN rows where invalid.
    valid : ndarray of bool, shape (ny * nx,)
    x, y : ndarray, shapes (nx,) and (ny,)
        Grid values of the horizontal and vertical components.
    axes : tuple of int
        State indices of the horizontal and vertical components.
    axis_names : tuple of str
    energy : float or None
        The energy of the shell, for ``shell_grid``.
    """

    states: np.ndarray
    valid: np.ndarray
    x: np.ndarray
    y: np.ndarray
    axes: tuple
    axis_names: tuple
    energy: float | None = None

    @property
    def shape(self) -> tuple[int, int]:
        """(ny, nx), the shape of a picture of the grid."""
        return (len(self.y), len(self.x))


def _index(system, name: str) -> int:
    names = [s.name for s in system.state_symbols]
    if name not in names:
        raise ModelError(f"unknown state component {name!r}; the state is ({', '.join(names)})")
    return names.index(name)


def _axis(name, spec, n_default):
    try:
        if len(spec) == 2:
            lo, hi = spec
            n = n_default
        else:
            lo, hi, n = spec
    except TypeError:
        raise ModelError(f"range of {name!r} must be (low, high) or (low, high, n), got {spec!r}") from None
    lo, hi, n = float(lo), float(hi), int(n)
    if not (np.isfinite(lo) and np.isfinite(hi) and lo < hi):
        raise ModelError(f"range of {name!r} must be finite with low < high, got ({lo}, {hi})")
    if n < 1:
        raise ModelError(f"range of {name!r} needs at least one point, got {n}")
    return np.linspace(lo, hi, n)


def _two_ranges(ranges, resolution):
    if not isinstance(ranges, Mapping) or len(ranges) != 2:
        raise ModelError("ranges must name exactly two state components, e.g. {'y': (-0.5, 0.5), 'py': (-0.5, 0.5)}")
    (xn, xs), (yn, ys) = ranges.items()
    x = _axis(xn, xs, resolution)
    y = _axis(yn, ys, resolution)
    if len(x) * len(y) > MAX_GRID_POINTS:
        raise ModelError(f"a grid of {len(x)} x {len(y)} points is larger than the limit of {MAX_GRID_POINTS}")
    return xn, x, yn, y


def state_grid(system, ranges, resolution: int = 100, fixed=None) -> StateGrid:
    """Seeds on a grid of two state components, the others fixed.

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
    ranges : mapping of two names to (low, high) or (low, high, n)
        The horizontal component first.
    resolution : int
        Points per axis where a range gives no count.
    fixed : mapping of str to float, optional
        Values of the other components (default 0).
    """
    xn, x, yn, y = _two_ranges(ranges, resolution)
    ix, iy = _index(system, xn), _index(system, yn)
    width = len(system.state_symbols)
    base = np.zeros(width)
    for name, value in (fixed or {}).items():
        base[_index(system, name)] = float(value)
    X, Y = np.meshgrid(x, y)
    states = np.tile(base, (X.size, 1))
    states[:, ix] = X.ravel()
    states[:, iy] = Y.ravel()
    return StateGrid(states, np.ones(len(states), dtype=bool), x, y, (ix, iy), (xn, yn))


def shell_grid(system, energy, plane, solve_for, ranges, resolution: int = 100, params=None,
               sign: int = +1) -> StateGrid:
    """Seeds on a grid of two components, on the energy shell H = E in a section plane.

    The component ``solve_for`` is solved from H = E (see :func:`phaselab.shell_seeds`);
    grid points in the energetically forbidden region are marked invalid.
    """
    from phaselab.compute.seeds import shell_seeds

    xn, x, yn, y = _two_ranges(ranges, resolution)
    X, Y = np.meshgrid(x, y)
    seeds = shell_seeds(system, energy, plane, solve_for, {xn: X.ravel(), yn: Y.ravel()},
                        params=params, sign=sign)
    return StateGrid(seeds.states, np.asarray(seeds.valid, dtype=bool), x, y,
                     (_index(system, xn), _index(system, yn)), (xn, yn), float(energy))


@dataclass
class ChaosMap:
    """A chaos indicator over a set of seeds.

    Attributes
    ----------
    indicator : str
    values : ndarray, shape (n_seeds,)
        The indicator's final value per seed (NaN for invalid or stopped seeds).
    escaped : ndarray of bool, shape (n_seeds,)
    grid : StateGrid or None
        The grid the seeds came from, if any.
    t : float
        Integration time (iterates for maps).
    """

    indicator: str
    values: np.ndarray
    escaped: np.ndarray
    grid: StateGrid | None
    t: float

    @property
    def image(self) -> np.ndarray:
        """The values as a picture of shape (ny, nx) (needs a grid)."""
        if self.grid is None:
            raise ModelError("this chaos map was computed from a list of seeds, not a grid")
        return self.values.reshape(self.grid.shape)


def _indicator_batch(states, system, t, indicator, params, seed, options):
    from phaselab.compute.chaos import chaos_indicators

    result = chaos_indicators(system, states, t, params=params, vectors=2 if indicator == "sali" else 1,
                              seed=seed, **options)
    return getattr(result, indicator), result.escaped


def chaos_map(system, seeds, t, indicator: str = "megno", params=None, batch_size: int = 1024,
              client=None, progress: bool = False, seed: int = 0, **options) -> ChaosMap:
    """A chaos indicator for every seed, computed in batches.

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
    seeds : StateGrid or array_like, shape (n_seeds, 2n)
    t : float
        Integration time (model time units), or iterates for a map.
    indicator : {"lyapunov", "megno", "fli", "sali"}
    params : mapping, optional
    batch_size : int
        Seeds per compiled call (and per Dask task).
    client : distributed.Client, optional
        Run the batches on a Dask cluster; default: the local cores.
    progress : bool
        Show a progress bar.
    seed : int
        Seed of the random initial deviation vectors.
    **options
        Passed to :func:`phaselab.compute.chaos.chaos_indicators` (``dt``, ``method``, ...).

    Returns
    -------
    ChaosMap
    """
    if indicator not in INDICATORS:
        raise ModelError(f"unknown indicator {indicator!r}; choose one of {', '.join(INDICATORS)}")
    batch_size = inputs.count(batch_size, "batch_size")
    grid = seeds if isinstance(seeds, StateGrid) else None
    states = np.asarray(grid.states if grid else seeds, dtype=float)
    if states.ndim != 2:
        raise ModelError(f"seeds must have shape (n_seeds, 2n), got {states.shape}")
    valid = grid.valid.copy() if grid else np.all(np.isfinite(states), axis=1)
    todo = np.flatnonzero(valid)
    system.param_values(params)  # refuse unknown parameters before any work
    # each orbit's deviation vectors depend on the seed and its own state only, so results
    # do not depend on batching
    batches = [states[idx] for idx in (todo[i:i + batch_size] for i in range(0, len(todo), batch_size))]
    work = partial(_indicator_batch, system=system, t=t, indicator=indicator, params=params, seed=seed,
                   options=options)
    results = run_batches(work, batches, client=client, progress=progress, desc=indicator)
    values = np.full(len(states), np.nan)
    escaped = np.zeros(len(states), dtype=bool)
    if results:
        values[todo] = np.concatenate([r[0] for r in results])
        escaped[todo] = np.concatenate([r[1] for r in results])
    values[escaped] = np.nan
    return ChaosMap(indicator, values, escaped, grid, float(t))


@dataclass
class ParameterScan:
    """Results of a function evaluated over a Cartesian grid of parameter values.

    Attributes
    ----------
    names : tuple of str
        Parameter names, in grid order.
    axes : tuple of ndarray
        The values of each parameter.
    points : list of dict
        The parameter values of each evaluation (the last name varies fastest).
    results : list
        The function's return value at each point, in the order of ``points``.
    """

    names: tuple
    axes: tuple
    points: list
    results: list = field(default_factory=list)

    @property
    def shape(self) -> tuple[int, ...]:
        return tuple(len(a) for a in self.axes)

    def array(self) -> np.ndarray:
        """The results as an array of shape ``self.shape`` (for scalar results)."""
        return np.asarray(self.results, dtype=float).reshape(self.shape)


def _call_point(point, function):
    return function(point)


def parameter_scan(function: Callable, grid: Mapping, client=None, progress: bool = False) -> ParameterScan:
    """Evaluate ``function(params)`` at every point of a grid of parameter values.

    Parameters
    ----------
    function : callable
        Takes a dict of parameter values (e.g. ``lambda p: section(H, seeds, ..., params=p)``).
        With a Dask client it must be picklable.
    grid : mapping of str to sequence of float
    client : distributed.Client, optional
    progress : bool

    Returns
    -------
    ParameterScan
    """
    if not isinstance(grid, Mapping) or not grid:
        raise ParameterError("grid must map parameter names to sequences of values")
    names = tuple(str(k) for k in grid)
    axes = []
    for name, values in grid.items():
        arr = np.atleast_1d(np.asarray(values, dtype=float))
        if arr.ndim != 1 or arr.size == 0 or not np.all(np.isfinite(arr)):
            raise ParameterError(f"values of {name!r} must be a non-empty 1-d sequence of finite numbers")
        axes.append(arr)
    points = [dict(zip(names, map(float, combo))) for combo in itertools.product(*axes)]
    results = run_batches(partial(_call_point, function=function), points, client=client,
                          progress=progress, desc="parameters")
    return ParameterScan(names, tuple(axes), points, results)
