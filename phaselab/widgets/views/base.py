"""What every view of the explorer shares: the static layer (Frame), clicked points turned
into states (Seeding) and the base class of the views."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from phaselab.errors import ParameterError

#: Grid points per axis for the allowed-region boundary and the phase portrait.
GRID = 160
#: Samples kept of a companion trace.
TRACE_SAMPLES = 800


@dataclass
class Frame:
    """The static layer of the plot for one energy and parameter set.

    Attributes
    ----------
    lines : list of ndarray, each (m, 2)
        Curves to draw: the boundary of the allowed region (sections) or the level curves
        (phase portraits).
    accents : list of ndarray, each (m, 2)
        Curves drawn more strongly: the level at the chosen energy and the separatrices.
    forbidden : ndarray of bool, shape (ny, nx), or None
        Grid points outside the allowed region (for a light fill), on ``grid_x, grid_y``.
    grid_x, grid_y : ndarray
    shade : list or None
        The forbidden region as filled polygons ending exactly on the boundary curve (see
        :func:`phaselab.widgets.shading.forbidden_polygons`).
    empty : bool
        No point of the shown window is allowed at this energy.
    """

    lines: list = field(default_factory=list)
    accents: list = field(default_factory=list)
    forbidden: np.ndarray | None = None
    grid_x: np.ndarray | None = None
    grid_y: np.ndarray | None = None
    shade: list | None = None
    empty: bool = False


@dataclass
class Seeding:
    """Clicked points turned into states: ``states`` (n, 2n) with NaN rows where refused,
    ``valid`` (n,), ``reasons`` (n,) (``""`` where valid)."""

    states: np.ndarray
    valid: np.ndarray
    reasons: list


def _finite_pair(rng, what):
    try:
        lo, hi = (float(v) for v in rng)
    except (TypeError, ValueError):
        raise ParameterError(f"{what} must be (low, high), got {rng!r}") from None
    if not (math.isfinite(lo) and math.isfinite(hi) and lo < hi):
        raise ParameterError(f"{what} must be finite with low < high, got {rng!r}")
    return lo, hi


class BaseView:
    """What every view shares: the clicked pair of axes, the window, seeds as full states,
    the companion panels (each kind of view overrides what differs)."""

    kind = "view"
    uses_energy = False
    #: how the plot's orbits are called in messages
    noun = "points"
    #: the companion panels draw each value as a dot, not a curve through them (a map's
    #: iterates: nothing lies between two of them)
    panel_dots = False

    def __init__(self, system, crossings, ranges, method="auto", dt=None):
        if isinstance(crossings, bool) or not isinstance(crossings, (int, np.integer)) or crossings < 1:
            raise ParameterError(f"crossings must be a positive integer, got {crossings!r}")
        self.system = system
        self.crossings = int(crossings)
        self.method = method
        self.dt = dt
        self.names = [s.name for s in system.state_symbols]
        self._ranges_given = ranges

    # helpers shared by the views
    def _set_axes(self, i, j):
        self.axes = (i, j)
        self.axis_names = (self.names[i], self.names[j])
        self.axis_symbols = (self.system.state_symbols[i], self.system.state_symbols[j])

    def _ranges_from(self, ranges, default):
        if ranges is None:
            return default
        if isinstance(ranges, dict):
            missing = [n for n in self.axis_names if n not in ranges]
            if missing:
                raise ParameterError(f"ranges must give {', '.join(self.axis_names)}; missing {', '.join(missing)}")
            return tuple(_finite_pair(ranges[n], f"range of {n}") for n in self.axis_names)
        try:
            a, b = ranges
        except (TypeError, ValueError):
            raise ParameterError(f"ranges must be ((xlow, xhigh), (ylow, yhigh)) or a dict by name, got {ranges!r}") from None
        return (_finite_pair(a, f"range of {self.axis_names[0]}"), _finite_pair(b, f"range of {self.axis_names[1]}"))

    def _angle_window(self, ranges):
        """``ranges`` with each shown angle of the model spanning its interval
        (``system.angle_intervals``), the convention sections and figures use."""
        intervals = getattr(self.system, "angle_intervals", None) or {}
        return tuple(tuple(float(v) for v in intervals[name]) if name in intervals else rng
                     for name, rng in zip(self.axis_names, ranges))

    def _full_states(self, points):
        pts = np.atleast_2d(np.asarray(points, dtype=float))
        if pts.shape[1] != 2:
            raise ParameterError(f"seeds must be (x, y) pairs in the shown plane, got shape {pts.shape}")
        states = np.zeros((len(pts), len(self.names)))
        states[:, self.axes[0]] = pts[:, 0]
        states[:, self.axes[1]] = pts[:, 1]
        return states

    def seeds(self, points, energy, params) -> Seeding:
        states = self._full_states(points)
        ok = np.all(np.isfinite(states), axis=1)
        states[~ok] = np.nan
        return Seeding(states, ok, ["" if v else "the point is not finite" for v in ok])

    def frame(self, energy, params) -> Frame:
        return Frame()

    def trace(self, state, params, until):
        return None

    def describe(self) -> str:
        return ""

    def label(self, k) -> str:
        """The plain label of state component ``k`` with its unit (as the HTML export writes it)."""
        from phaselab.export.describe import plain_label, unit_of
        from phaselab.model.units import with_unit

        sym = self.system.state_symbols[k]
        return with_unit(plain_label(sym), unit_of(self.system, sym))

    def label_of(self, name) -> str:
        """The label of the state component called ``name`` (as axes and readouts write it)."""
        return self.label(self.names.index(name))

    @property
    def axis_labels(self):
        return (self.label(self.axes[0]), self.label(self.axes[1]))

    def panels(self):
        """Title, x label and y label of the two companion panels."""
        n = len(self.names) // 2
        if n >= 2:
            first = ("Orbit in configuration space", self.label(0), self.label(1))
        else:
            first = ("Coordinate over time", "t", self.label(0))
        return [first, ("Energy error along the orbit", "t", "relative error")]

    def panel_curves(self, tr, params):
        """The two panels' (x, y) curves from a trajectory of the selected orbit."""
        step = max(1, len(tr.t) // TRACE_SAMPLES)
        t = np.asarray(tr.t[::step], float)
        tw, st = tr.wrapped_path(0, every=step)          # angles wrapped, broken where they jump
        n = len(self.names) // 2
        first = (st[:, 0], st[:, 1]) if n >= 2 else (tw, st[:, 0])
        return first, (t, np.asarray(tr.energy_error[0, ::step], float))
