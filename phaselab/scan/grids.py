"""Grids of initial conditions: ``state_grid`` and ``shell_grid`` lay seeds on a rectangle of
two state components (the second on an energy shell). The scans over them are in
:mod:`phaselab.scan.chaos_maps`, :mod:`phaselab.scan.escape` and
:mod:`phaselab.scan.frequency_map`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

import numpy as np

from phaselab.engine import inputs, limits
from phaselab.errors import ParameterError

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

    def __repr__(self) -> str:
        (xn, yn), (x, y) = self.axis_names, (self.x, self.y)
        shell = f" on the shell E = {self.energy:g}" if self.energy is not None else ""
        return (f"StateGrid({xn}: {len(x)} points in [{x[0]:g}, {x[-1]:g}], {yn}: {len(y)} points in "
                f"[{y[0]:g}, {y[-1]:g}]{shell}; {int(np.count_nonzero(self.valid))} of {len(self.valid)} valid)")


def _index(system, name) -> int:
    return inputs.state_index(system, name, "state component")


def _two_ranges(ranges, resolution):
    if not isinstance(ranges, Mapping) or len(ranges) != 2:
        raise ParameterError("ranges must name exactly two state components, e.g. "
                             "{'y': (-0.5, 0.5), 'py': (-0.5, 0.5)}")
    (xn, xs), (yn, ys) = ranges.items()
    x = inputs.grid_axis(xn, xs, resolution)
    y = inputs.grid_axis(yn, ys, resolution)
    if len(x) * len(y) > MAX_GRID_POINTS:
        raise ParameterError(f"a grid of {len(x)} x {len(y)} points is larger than the limit of "
                             f"{MAX_GRID_POINTS} points; ask for fewer points per axis")
    return xn, x, yn, y


def state_grid(system, ranges, *, resolution: int = 100, fixed=None) -> StateGrid:
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
    inputs.system(system)
    xn, x, yn, y = _two_ranges(ranges, resolution)
    ix, iy = _index(system, xn), _index(system, yn)
    width = len(system.state_symbols)
    limits.grid_budget(len(x) * len(y), width, "state_grid")
    base = np.zeros(width)
    for name, value in (inputs.mapping(fixed, "fixed") or {}).items():
        base[_index(system, name)] = inputs.number(value, f"fixed value of {name!r}")
    X, Y = np.meshgrid(x, y)
    states = np.tile(base, (X.size, 1))
    states[:, ix] = X.ravel()
    states[:, iy] = Y.ravel()
    return StateGrid(states, np.ones(len(states), dtype=bool), x, y, (ix, iy), (xn, yn))


def shell_grid(system, ranges, *, energy, plane, solve_for, resolution: int = 100, params=None,
               sign: int = +1) -> StateGrid:
    """Seeds on a grid of two components, on the energy shell H = E in a section plane.

    The component ``solve_for`` is solved from H = E (see :func:`phaselab.shell_seeds`);
    grid points in the energetically forbidden region are marked invalid.
    """
    from phaselab.orbits.seeds import shell_seeds

    inputs.system(system)
    xn, x, yn, y = _two_ranges(ranges, resolution)
    limits.grid_budget(len(x) * len(y), len(system.state_symbols), "shell_grid")
    X, Y = np.meshgrid(x, y)
    seeds = shell_seeds(system, {xn: X.ravel(), yn: Y.ravel()}, energy=energy, plane=plane,
                        solve_for=solve_for, params=params, sign=sign)
    return StateGrid(seeds.states, np.asarray(seeds.valid, dtype=bool), x, y,
                     (_index(system, xn), _index(system, yn)), (xn, yn), float(energy))


def scan_rows(system, seeds) -> tuple[np.ndarray, np.ndarray, StateGrid | None]:
    """The seeds of a scan as ``(states, valid, grid)``.

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
    seeds : StateGrid or array_like, shape (n_seeds, 2n) or (2n,)
        A grid (its invalid points are not run) or seeds (rows with NaN or infinite
        entries are not run).

    Returns
    -------
    states : ndarray, shape (n_seeds, 2n)
    valid : ndarray of bool, shape (n_seeds,)
    grid : StateGrid or None

    Raises
    ------
    ParameterError
        Seeds that are not real numbers of shape (n_seeds, 2n), or none at all.
    """
    from phaselab.engine import inputs

    inputs.system(system)
    grid = seeds if isinstance(seeds, StateGrid) else None
    names = [s.name for s in system.state_symbols]
    given = grid.states if grid is not None else seeds
    try:
        shape = np.shape(given)
    except ValueError:  # ragged rows
        shape = None
    if shape is not None and (len(shape) not in (1, 2) or shape[-1] != len(names)):
        raise ParameterError(f"states must have shape (n_seeds, {len(names)}), ordered "
                             f"({', '.join(names)}); got shape {shape}")
    states = inputs.states(given, len(names), names, "states")
    valid = grid.valid.copy() if grid is not None else np.ones(len(states), dtype=bool)
    valid &= np.all(np.isfinite(states), axis=1)
    return states, valid, grid
