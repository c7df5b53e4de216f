"""The section result, shared by the compute layer, the data files and the explorer.

A :class:`Section` checks its own fields when it is made, carries a status code per orbit,
and selects (:meth:`Section.take`) and joins (:meth:`Section.concat`) itself, so no caller
slices or pads its arrays by hand. Plotting and saving are delegated to the export layer
(imported on first use), so computing never imports bokeh or matplotlib.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field

import numpy as np

from phaselab.engine import accuracy as step_accuracy
from phaselab.engine import status as codes
from phaselab.errors import ParameterError


def _array(value, dtype, shape, name):
    arr = np.asarray(value, dtype=dtype)
    want = tuple(shape)
    if arr.shape != want:
        raise ParameterError(f"Section.{name} must have shape {want}, got {arr.shape}")
    return arr


@dataclass(repr=False)
class Section(codes.StatusReport):
    """Points where orbits pierce a surface of section (or iterates of a map).

    Attributes
    ----------
    points : ndarray, shape (n_orbits, max_crossings, 2n)
        Full states at the crossings; rows past an orbit's last crossing are NaN.
    counts : ndarray of int, shape (n_orbits,)
        Number of crossings recorded per orbit.
    times : ndarray, shape (n_orbits, max_crossings)
        Time of each crossing (the iterate number for maps); NaN past the last one.
    axes : tuple of int
        Indices into the state of the two coordinates to show (horizontal, vertical).
    axis_symbols : tuple
        The sympy symbols of those two state components (for typeset labels).
    energy_error : ndarray, shape (n_orbits,)
        Worst relative energy error ``|H - H0| / max(|H0|, 1)`` over each orbit's crossings
        (0 for maps).
    status : ndarray of int, shape (n_orbits,)
        Why each orbit stopped (:mod:`phaselab.engine.status`; words in :attr:`status_text`).
    seeds : ndarray, shape (n_orbits, 2n)
        The initial states.
    plane : dict
        What was sectioned: ``{"kind": "plane", "index": i, "name": "x", "value": v,
        "direction": +1}``, ``{"kind": "stroboscopic", "period": T}`` or ``{"kind": "map"}``.
    energy : float or None
        The energy of the shell the seeds were put on, when known.
    method : str
        Integrator (or ``"map"``).
    dt : float
        Step used (NaN for maps).
    system : object
        The system.
    params : dict
        Parameter values used.
    """

    points: np.ndarray
    counts: np.ndarray
    times: np.ndarray
    axes: tuple
    axis_symbols: tuple
    energy_error: np.ndarray
    status: np.ndarray
    seeds: np.ndarray
    plane: dict
    energy: float | None
    method: str
    dt: float
    system: object = None
    params: dict = field(default_factory=dict)

    def __post_init__(self):
        pts = np.asarray(self.points, dtype=float)
        if pts.ndim != 3:
            raise ParameterError(f"Section.points must have shape (n_orbits, max_crossings, 2n), got {pts.shape}")
        n, c, m = pts.shape
        self.points = pts
        self.counts = _array(self.counts, np.int64, (n,), "counts")
        if np.any(self.counts < 0) or np.any(self.counts > c):
            raise ParameterError(f"Section.counts must lie in [0, {c}]")
        self.times = _array(self.times, float, (n, c), "times")
        self.energy_error = _array(self.energy_error, float, (n,), "energy_error")
        self.status = _array(self.status, np.int64, (n,), "status")
        self.seeds = _array(self.seeds, float, (n, m), "seeds")
        axes = tuple(int(a) for a in self.axes)
        if len(axes) != 2 or not all(0 <= a < m for a in axes):
            raise ParameterError(f"Section.axes must be two state indices below {m}, got {self.axes}")
        self.axes = axes
        self.axis_symbols = tuple(self.axis_symbols)
        self.params = dict(self.params or {})

    # ------------------------------------------------------------------ derived
    @property
    def n_orbits(self) -> int:
        return self.points.shape[0]



    def xy(self, orbit: int | None = None) -> tuple[np.ndarray, np.ndarray]:
        """The shown coordinates, flattened over orbits (or of one orbit), NaNs removed.

        Returns
        -------
        x, y : ndarray, shape (n_points,)
        """
        i, j = self.axes
        pts = self.points if orbit is None else self.points[orbit:orbit + 1]
        x = pts[..., i].ravel()
        y = pts[..., j].ravel()
        keep = np.isfinite(x) & np.isfinite(y)
        return x[keep], y[keep]

    def orbit_index(self) -> np.ndarray:
        """For each point returned by :meth:`xy`, the orbit it belongs to, shape (n_points,)."""
        i, j = self.axes
        idx = np.broadcast_to(np.arange(self.n_orbits)[:, None], self.points.shape[:2]).ravel()
        keep = np.isfinite(self.points[..., i].ravel()) & np.isfinite(self.points[..., j].ravel())
        return idx[keep]

    # ------------------------------------------------------------------ select and join
    def take(self, orbits) -> "Section":
        """The section of the selected orbits (an index, a sequence of indices or a boolean
        mask), arrays copied."""
        try:
            idx = np.atleast_1d(np.arange(self.n_orbits)[orbits])
        except (IndexError, TypeError, ValueError):
            raise ParameterError(f"cannot select orbits {orbits!r} of a section of {self.n_orbits}") from None
        return dataclasses.replace(
            self, points=self.points[idx].copy(), counts=self.counts[idx].copy(),
            times=self.times[idx].copy(), energy_error=self.energy_error[idx].copy(),
            status=self.status[idx].copy(), seeds=self.seeds[idx].copy(), params=dict(self.params))

    @classmethod
    def concat(cls, parts) -> "Section":
        """One section holding every orbit of ``parts``, in order, padded with NaN to the
        longest. The parts must share the plane, the axes and the state size; the energy is
        kept only when every part has the same one.

        Raises
        ------
        ParameterError
            No parts, or parts that do not fit together.
        """
        parts = [p for p in parts if p is not None]
        if not parts:
            raise ParameterError("Section.concat needs at least one section")
        first = parts[0]
        if len(parts) == 1:
            return first.take(slice(None))
        width = first.points.shape[2]
        for p in parts[1:]:
            if p.points.shape[2] != width or p.axes != first.axes or p.plane != first.plane:
                raise ParameterError("sections joined by Section.concat must share the plane, the shown "
                                     "axes and the state size")
        c = max(p.points.shape[1] for p in parts)

        def pad(a, shape):
            out = np.full(shape, np.nan)
            out[:, :a.shape[1]] = a
            return out

        energies = {p.energy for p in parts}
        return dataclasses.replace(
            first,
            points=np.concatenate([pad(p.points, (p.n_orbits, c, width)) for p in parts]),
            times=np.concatenate([pad(p.times, (p.n_orbits, c)) for p in parts]),
            counts=np.concatenate([p.counts for p in parts]),
            energy_error=np.concatenate([p.energy_error for p in parts]),
            status=np.concatenate([p.status for p in parts]),
            seeds=np.concatenate([p.seeds for p in parts]),
            energy=first.energy if len(energies) == 1 else None, params=dict(first.params))

    # ------------------------------------------------------------------ output
    def plot(self, **kwargs):
        """A static matplotlib figure of the section for reports (see
        :func:`phaselab.export.section_figure`); :meth:`bokeh` gives the live view."""
        from phaselab.export.figures import section_figure

        return section_figure(self, **kwargs)

    def bokeh(self, **kwargs):
        """An interactive bokeh figure of the section (see :func:`phaselab.export.bokeh_figure`)."""
        from phaselab.export.interactive import bokeh_figure

        return bokeh_figure(self, **kwargs)

    def to_xarray(self):
        """An ``xarray.Dataset`` with CF attributes: ``points`` over (``orbit``, ``crossing``,
        ``state``), ``times``, ``counts``, ``energy_error``, ``status``, ``seeds``."""
        from phaselab.orbits.labelled import section_dataset

        return section_dataset(self)

    def save(self, path, **kwargs):
        """Write the section to ``path``; the format follows the suffix.

        ``.svg``, ``.pdf``, ``.png`` give a static figure (matplotlib), ``.csv`` and ``.nc``
        a data file with the system, parameters, energy and method recorded, ``.html`` a
        self-contained interactive page. See :func:`phaselab.export.save`.
        """
        from phaselab.export import save

        return save(self, path, **kwargs)

    @property
    def error_estimate(self) -> float:
        """The relative timing error of the integration step over the longest orbit (step
        doubling, :func:`phaselab.engine.accuracy.estimate`): on a torus, the relative error of
        its frequencies. NaN for maps, dop853 or a section without its system. Measured on
        first use (a short pilot run) and kept."""
        cached = self.__dict__.get("_error_estimate")
        if cached is None:
            times = np.asarray(self.times, dtype=float)
            span = float(np.nanmax(np.abs(times))) if times.size and np.isfinite(times).any() else float("nan")
            if (self.system is None or getattr(self.system, "kind", "flow") == "map"
                    or not np.isfinite(self.dt) or not np.isfinite(span) or span <= 0):
                cached = float("nan")
            else:
                cached = step_accuracy.estimate(self.system, self.seeds, span, self.dt, self.params, self.method)
            self.__dict__["_error_estimate"] = cached
        return cached

    def describe_plane(self) -> str:
        """The plane in words: ``"x = 0 (increasing)"``, ``"stroboscopic, period 6.283"``,
        ``"map iterates"``."""
        kind = self.plane.get("kind")
        if kind == "plane":
            way = "increasing" if self.plane.get("direction", 1) > 0 else "decreasing"
            return f"{self.plane.get('name', '?')} = {self.plane.get('value', 0):g} ({way})"
        if kind == "stroboscopic":
            return f"stroboscopic, period {self.plane.get('period', float('nan')):.4g}"
        if kind == "map":
            return "map iterates"
        return str(kind or "unknown")

    def __repr__(self) -> str:
        stopped = int(self.escaped.sum())
        return (f"Section({self.n_orbits} orbits, {int(self.counts.sum())} points, plane "
                f"{self.describe_plane()}, method {self.method!r}"
                + (f", {stopped} stopped early" if stopped else "") + ")")
