"""The iterates of an area-preserving map of the plane."""

from __future__ import annotations

import warnings

import numpy as np

from phaselab.errors import ModelError
from phaselab.widgets.views.base import BaseView


class MapView(BaseView):
    """Iterates of an area-preserving map."""

    kind = "map"
    noun = "iterates"
    panel_dots = True

    def __init__(self, system, crossings=300, ranges=None):
        super().__init__(system, crossings, ranges)
        if len(self.names) != 2:
            raise ModelError(f"the explorer shows maps of the plane; this map has {len(self.names)} components")
        self._set_axes(0, 1)
        default = []
        for k in range(2):
            period = system.modulus[k] if system.modulus else None
            low = system.modulus_low[k] if system.modulus_low else 0.0
            default.append((low, low + period) if period else (-1.0, 1.0))
        self.ranges = self._ranges_from(ranges, tuple(default))

    def describe(self) -> str:
        return "iterates of the map"

    def fit_ranges(self, energy, params):
        return self.ranges

    def compute(self, states, energy, params, crossings=None):
        from phaselab.orbits.section import section

        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            return section(self.system, states, crossings=crossings or self.crossings, params=params)

    def trace(self, state, params, until):
        """The iterates of one state (at most 2000), as a Section."""
        n = int(until) if until and np.isfinite(until) and until > 0 else self.crossings
        return self.compute(np.asarray(state, float)[None, :], None, params, crossings=min(max(n, 2), 2000))

    def panels(self):
        return [("Coordinate by iterate", "iterate", self.label(0)),
                ("Momentum by iterate", "iterate", self.label(1))]

    def panel_curves(self, sec, params):
        c = int(sec.counts[0])
        pts = sec.points[0, :c]
        n = np.arange(c, dtype=float)
        return (n, pts[:, 0]), (n, pts[:, 1])
