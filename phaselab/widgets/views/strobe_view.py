"""The stroboscopic section of a time-periodic H (one degree of freedom): a click is the
state at t = 0, the state is shown once per driving period."""

from __future__ import annotations

import math
import warnings

import numpy as np

from phaselab.errors import ModelError, PhaselabError
from phaselab.widgets.views.base import TRACE_SAMPLES, BaseView


class StrobeView(BaseView):
    """Stroboscopic section of a time-periodic H: a click is the state at t = 0."""

    kind = "strobe"
    noun = "periods"

    def __init__(self, system, crossings=300, ranges=None, method="auto", dt=None):
        super().__init__(system, crossings, ranges, method, dt)
        if system.dof != 1:
            # more degrees of freedom need a plane to click on; keep to one here
            raise ModelError("the explorer shows stroboscopic sections of one degree of freedom; "
                             f"this driven system has {system.dof}")
        self._set_axes(0, 1)
        self.ranges = self._ranges_from(ranges, self._angle_window(((-math.pi, math.pi), (-3.0, 3.0))))

    def describe(self) -> str:
        return "stroboscopic section: the state once per driving period"

    def fit_ranges(self, energy, params):
        """The given ranges, else a box around the bounded orbits of a probe: 24 seeds on
        the axes followed for 40 driving periods (orbits that run off are left out)."""
        if self._ranges_given is not None:
            return self.ranges
        a = np.linspace(-2.0, 2.0, 12)
        seeds = np.array([[v, 0.0] for v in a] + [[0.0, v] for v in a])
        try:
            sec = self.compute(seeds, energy, params, crossings=40)
        except PhaselabError:
            return self.ranges
        pts = sec.points[..., :2]
        bounded = np.all(np.isfinite(pts), axis=(1, 2)) & np.all(np.abs(np.nan_to_num(pts)) < 10.0, axis=(1, 2))
        if bounded.sum() < 3:
            return self.ranges
        p = pts[bounded].reshape(-1, 2)
        lo, hi = p.min(axis=0), p.max(axis=0)
        pad = 0.08 * (hi - lo) + 1e-6
        self.ranges = self._angle_window(((float(lo[0] - pad[0]), float(hi[0] + pad[0])),
                                          (float(lo[1] - pad[1]), float(hi[1] + pad[1]))))
        return self.ranges

    def panels(self):
        return [("Orbit in phase space, first periods", self.label(0), self.label(1)),
                ("Energy over time (driven: not conserved)", "t", "H")]

    def panel_curves(self, tr, params):
        step = max(1, len(tr.t) // TRACE_SAMPLES)
        st = tr.states[0, ::step]
        t = np.asarray(tr.t[::step], float)
        h = np.asarray(self.system.energy(st, params, t=t), float)
        _, shown = tr.wrapped_path(0, every=step)        # angles wrapped, broken where they jump
        return (shown[:, 0], shown[:, 1]), (t, h)

    def compute(self, states, energy, params, crossings=None):
        from phaselab.orbits.section import section

        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            return section(self.system, states, plane="stroboscopic",
                           crossings=crossings or self.crossings, params=params, dt=self.dt,
                           method=self.method)

    def trace(self, state, params, until):
        from phaselab.orbits.trajectory import trajectory

        period = self.system.driving_period(params)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            return trajectory(self.system, state, 20 * period, dt=self.dt, method=self.method, params=params)
