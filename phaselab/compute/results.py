"""Result objects of the compute layer: plain containers of arrays with named fields.

They hold numbers and metadata only. Plotting and saving are delegated to the export layer
(imported on first use), so computing never imports bokeh or matplotlib.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


@dataclass
class Trajectory:
    """Orbits sampled at common times.

    Attributes
    ----------
    t : ndarray, shape (n_times,)
        Sample times.
    states : ndarray, shape (n_orbits, n_times, 2n)
        States ``(q1..qn, p1..pn)``; samples after an orbit escaped are NaN.
    energy_error : ndarray, shape (n_orbits, n_times)
        ``(H(t) - H(0)) / max(|H(0)|, 1)``, relative where H(0) is not small.
    escaped : ndarray of bool, shape (n_orbits,)
        Orbits stopped because they left the box or produced non-finite values.
    escape_time : ndarray, shape (n_orbits,)
        Time of escape (NaN where the orbit did not escape).
    method : str
        The integrator used.
    dt : float
        The step (NaN for adaptive methods).
    system : object
        The system integrated.
    params : dict
        The parameter values used.
    status : ndarray of int, shape (n_orbits,), or None
        Why each orbit stopped: 0 ran to the end, 1 left the box, 2 non-finite state (or a
        non-finite seed), 3 implicit step did not converge.
    """

    t: np.ndarray
    states: np.ndarray
    energy_error: np.ndarray
    escaped: np.ndarray
    escape_time: np.ndarray
    method: str
    dt: float
    system: object = None
    params: dict = field(default_factory=dict)
    status: np.ndarray | None = None

    @property
    def n_orbits(self) -> int:
        return self.states.shape[0]

    def __repr__(self) -> str:
        return (f"Trajectory({self.n_orbits} orbits x {len(self.t)} samples, method={self.method!r}, "
                f"dt={self.dt:g}, escaped={int(self.escaped.sum())}, "
                f"max |dE|={np.nanmax(np.abs(self.energy_error)) if self.energy_error.size else 0:.2e})")


@dataclass
class Section:
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
        Worst relative energy error over each orbit (0 for maps).
    escaped : ndarray of bool, shape (n_orbits,)
        Orbits that left the box or went non-finite before reaching the crossing cap.
    seeds : ndarray, shape (n_orbits, 2n)
        The initial states.
    plane : dict
        What was sectioned: ``{"kind": "plane", "index": i, "value": v, "direction": +1}``,
        ``{"kind": "stroboscopic", "period": T}`` or ``{"kind": "map"}``.
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
    status : ndarray of int, shape (n_orbits,), or None
        Why each orbit stopped: 0 reached the crossing cap, 1 left the box, 2 non-finite
        state, 3 implicit step did not converge, 8 reached t_max (texts in
        ``phaselab.compute.section.STATUS_TEXT``).
    """

    points: np.ndarray
    counts: np.ndarray
    times: np.ndarray
    axes: tuple
    axis_symbols: tuple
    energy_error: np.ndarray
    escaped: np.ndarray
    seeds: np.ndarray
    plane: dict
    energy: float | None
    method: str
    dt: float
    system: object = None
    params: dict = field(default_factory=dict)
    status: np.ndarray | None = None

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

    def plot(self, **kwargs):
        """An interactive bokeh figure of the section (see :func:`phaselab.export.bokeh_figure`)."""
        from phaselab.export.interactive import bokeh_figure

        return bokeh_figure(self, **kwargs)

    def save(self, path, **kwargs):
        """Write the section to ``path``; the format follows the suffix.

        ``.svg``, ``.pdf``, ``.png`` give a static figure (matplotlib), ``.csv`` and ``.nc``
        a data file with the system, parameters, energy and method recorded, ``.html`` a
        self-contained interactive page. See :func:`phaselab.export.save`.
        """
        from phaselab.export import save

        return save(self, path, **kwargs)

    def __repr__(self) -> str:
        return (f"Section({self.n_orbits} orbits, {int(self.counts.sum())} points, plane={self.plane}, "
                f"method={self.method!r}, escaped={int(self.escaped.sum())})")
