"""The phase portrait of one degree of freedom: level curves of H, a click traces an orbit."""

from __future__ import annotations

import math
import warnings

import numpy as np

from phaselab.errors import ParameterError, PhaselabError
from phaselab.widgets.views.base import GRID, BaseView, Frame


class PortraitView(BaseView):
    """Phase portrait of one degree of freedom: level curves of H; a click traces an orbit."""

    kind = "portrait"
    uses_energy = True
    noun = "samples"

    def __init__(self, system, crossings=300, ranges=None, duration=None, method="auto", dt=None):
        super().__init__(system, crossings, ranges, method, dt)
        self._set_axes(0, 1)
        self.ranges = self._ranges_from(ranges, self._angle_window(((-math.pi, math.pi), (-3.0, 3.0))))
        self.duration = 20.0 if duration is None else float(duration)
        if not (math.isfinite(self.duration) and self.duration > 0):
            raise ParameterError(f"duration must be a positive time, got {duration!r}")
        self._cache = {}

    def describe(self) -> str:
        return "phase portrait: level curves of H; a click traces the orbit through it"

    def fit_ranges(self, energy, params):
        return self.ranges

    def _level_set(self, params):
        key = tuple(sorted((params or {}).items()))
        ls = self._cache.get(key)
        if ls is None:
            from phaselab.structures.levels import level_set

            rng = {self.axis_names[0]: self.ranges[0], self.axis_names[1]: self.ranges[1]}
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                try:
                    ls = level_set(self.system, rng, [0.0], params=params, resolution=GRID, separatrices=True)
                except PhaselabError:
                    ls = level_set(self.system, rng, [0.0], params=params, resolution=GRID)
            if len(self._cache) > 16:
                self._cache.clear()
            self._cache[key] = ls
        return ls

    def frame(self, energy, params) -> Frame:
        ls = self._level_set(params)
        v = ls.values[np.isfinite(ls.values)]
        lines = []
        if v.size:
            for lev in np.quantile(v, np.linspace(0.04, 0.96, 13)):
                lines.extend(ls.contour(float(lev)))
        accents = ls.contour(energy) if energy is not None else []
        for sep in ls.separatrices:
            accents.extend(sep.lines)
        return Frame(lines=lines, accents=accents)

    def compute(self, states, energy, params, crossings=None):
        """The traced orbits as a Section-like record of samples (time as crossing index)."""
        from phaselab.orbits.section_result import Section
        from phaselab.orbits.trajectory import trajectory

        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            tr = trajectory(self.system, states, np.linspace(0.0, self.duration, crossings or self.crossings),
                            method=self.method, params=params)
        pts = self.system.wrap_angles(tr.states)    # shown points: angles in their intervals
        counts = np.isfinite(pts[..., 0]).sum(axis=1)
        times = np.broadcast_to(tr.t, pts.shape[:2]).copy()
        times[~np.isfinite(pts[..., 0])] = np.nan
        err = np.nanmax(np.abs(tr.energy_error), axis=1)
        return Section(points=pts, counts=counts, times=times, axes=self.axes, axis_symbols=self.axis_symbols,
                       energy_error=err, status=tr.status, seeds=np.asarray(states, float),
                       plane={"kind": "trajectory", "duration": self.duration}, energy=None,
                       method=tr.method, dt=tr.dt, system=self.system, params=tr.params)

    def trace(self, state, params, until):
        from phaselab.orbits.trajectory import trajectory

        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            return trajectory(self.system, state, self.duration, method=self.method, params=params)
