"""The surface of section of an autonomous flow with three or more degrees of freedom.

At fixed energy the plane ``{w: w0}`` fixes one state component and the energy the size of
its conjugate, so ``2n - 2`` *section coordinates* remain (four for three degrees of
freedom). The explorer shows them as linked projections; a click gives two of them (the
clicked pair), the others are set by sliders (the *held* coordinates), and the conjugate of
the plane's component is solved from H = E (:func:`phaselab.orbits.seeds.shell_seeds`).

Nothing here imports bokeh or ipywidgets: the view is numbers, tested and timed without a
display.
"""

from __future__ import annotations

import warnings

import numpy as np

from phaselab.errors import ModelError, ParameterError
from phaselab.widgets.views.base import BaseView, Seeding

#: Random points per try when the window of each section coordinate is fitted.
FIT_SAMPLES = 20_000
#: Margin around the allowed extent of each coordinate (fraction of the extent).
FIT_MARGIN = 0.08


def _window(rng, what):
    try:
        lo, hi = (float(v) for v in rng)
    except (TypeError, ValueError):
        raise ParameterError(f"{what} must be (low, high), got {rng!r}") from None
    if not (np.isfinite(lo) and np.isfinite(hi) and lo < hi):
        raise ParameterError(f"{what} must be finite with low < high, got {rng!r}")
    return lo, hi


class Section4View(BaseView):
    """A surface of section with ``2n - 2 >= 4`` coordinates (``n >= 3`` degrees of freedom).

    Parameters
    ----------
    system : Hamiltonian
        Autonomous, ``system.dof >= 3``.
    plane : mapping of str to float, optional
        One fixed component; default ``{q1: 0.0}``.
    solve_for : str, optional
        The component solved from H = E: the conjugate of the plane's component (the
        default; another choice is refused, the section coordinates would not be those the
        points vary in).
    crossings : int
    ranges : mapping of str to (float, float), optional
        Windows of section coordinates by name (the rest fitted to the allowed region).
    sign : {+1, -1}
        The root of H = E taken and the crossing direction recorded.
    axes : pair of str, optional
        The clicked pair of section coordinates; default the first coordinate of the
        section and its conjugate when both are section coordinates.
    """

    kind = "section4"
    uses_energy = True
    noun = "crossings"

    def __init__(self, system, plane=None, solve_for=None, crossings=300, ranges=None, sign=+1,
                 method="auto", dt=None, axes=None):
        super().__init__(system, crossings, ranges, method, dt)
        n = system.dof
        if n < 3:
            raise ModelError(f"{system.name!r} has {n} degrees of freedom; its section is drawn by the "
                             "plane explorer (the same call without axes=)")
        self.plane, k = self._one_component(plane)
        conjugate = self.names[k + n] if k < n else self.names[k - n]
        solve_for = conjugate if solve_for is None else str(getattr(solve_for, "name", solve_for))
        if solve_for != conjugate:
            raise ModelError(f"solve_for must be {conjugate}, the conjugate of the plane's component "
                             f"{self.names[k]}, for a section with {2 * n - 2} coordinates; got {solve_for!r}")
        self.solve_for = solve_for
        if sign not in (1, -1) or isinstance(sign, bool):
            raise ParameterError(f"sign must be +1 or -1, got {sign!r}")
        self.sign = int(sign)
        #: the section coordinates, in state order
        self.coordinates = tuple(nm for i, nm in enumerate(self.names) if i not in (k, self.names.index(conjugate)))
        pair = self._default_pair() if axes is None else self._checked_pair(axes)
        self._set_axes(self.names.index(pair[0]), self.names.index(pair[1]))
        #: the section coordinates set by sliders, in state order
        self.held = tuple(c for c in self.coordinates if c not in pair)
        self.windows = None  # set by fit_ranges(): name -> (low, high)
        self.ranges = None

    # ---------------------------------------------------------------- checks
    def _one_component(self, plane):
        if plane is None:
            plane = {self.names[0]: 0.0}
        if not isinstance(plane, dict) or len(plane) != 1:
            raise ModelError(f"plane must fix one component, e.g. {{{self.names[0]!r}: 0.0}}, got {plane!r}")
        (key, value), = plane.items()
        name = str(getattr(key, "name", key))
        if name not in self.names:
            raise ModelError(f"plane names {key!r}, which is not a state component; this system has "
                             + ", ".join(self.names))
        try:
            value = float(value)
        except (TypeError, ValueError):
            raise ParameterError(f"the plane's value must be a number, got {value!r}") from None
        if not np.isfinite(value):
            raise ParameterError(f"the plane's value must be finite, got {value!r}")
        return {name: value}, self.names.index(name)

    def _default_pair(self):
        n = self.system.dof
        for c in self.coordinates:
            i = self.names.index(c)
            if i < n and self.names[i + n] in self.coordinates:
                return c, self.names[i + n]
        return self.coordinates[0], self.coordinates[1]

    def _checked_pair(self, axes):
        try:
            a, b = (str(getattr(x, "name", x)) for x in axes)
        except (TypeError, ValueError):
            raise ParameterError(f"axes must be two section coordinates, got {axes!r}") from None
        for x in (a, b):
            if x not in self.coordinates:
                raise ParameterError(f"axes: {x!r} is not a coordinate of this section; its coordinates are "
                                     + ", ".join(self.coordinates))
        if a == b:
            raise ParameterError(f"axes names {a!r} twice")
        return a, b

    def describe(self) -> str:
        (name, value), = self.plane.items()
        way = "increasing" if self.sign > 0 else "decreasing"
        return (f"section {self.label_of(name)} = {value:g}, {self.label_of(self.solve_for)} from H = E, "
                f"crossings with {way} {self.label_of(name)}; {len(self.coordinates)} section coordinates")

    # ---------------------------------------------------------------- windows
    def _allowed(self, pts, energy, params):
        from phaselab.orbits.seeds import shell_seeds

        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return shell_seeds(self.system, pts, energy=energy, plane=self.plane, solve_for=self.solve_for,
                               params=params, sign=self.sign).valid

    def fit_ranges(self, energy, params):
        """Choose a window for every section coordinate.

        Random points in boxes of half-width ``0.5 * 2**k`` are put on the shell until the
        allowed ones stay off the box's faces; each window is their extent with a margin
        (an unbounded region keeps the box of half-width 4). Given ``ranges`` win; angles
        span their intervals.
        """
        given = self._given_windows()
        m = len(self.coordinates)
        rng = np.random.default_rng(20261205)
        lo, hi = np.full(m, -4.0), np.full(m, 4.0)
        for k in range(9):
            h = 0.5 * 2.0 ** k
            pts = rng.uniform(-h, h, (FIT_SAMPLES, m))
            ok = self._allowed(pts, energy, params)
            if not ok.any():
                continue
            a, b = pts[ok].min(axis=0), pts[ok].max(axis=0)
            if np.all(b < 0.9 * h) and np.all(a > -0.9 * h):
                # a second draw in the box just around the region: its thin ends are met
                # far more often than in the first box
                w = 0.15 * (b - a) + 1e-9
                pts = rng.uniform(a - w, b + w, (FIT_SAMPLES, m))
                ok = self._allowed(pts, energy, params)
                if ok.any():
                    a, b = np.minimum(a, pts[ok].min(axis=0)), np.maximum(b, pts[ok].max(axis=0))
                pad = FIT_MARGIN * (b - a) + 1e-9
                lo, hi = a - pad, b + pad
                break
            if h >= 4.0 and k >= 3:
                lo, hi = np.full(m, -h), np.full(m, h)
                break
        intervals = getattr(self.system, "angle_intervals", None) or {}
        windows = {}
        for j, c in enumerate(self.coordinates):
            w = given.get(c) or (tuple(float(v) for v in intervals[c]) if c in intervals else (float(lo[j]), float(hi[j])))
            windows[c] = w
        self.windows = windows
        self.ranges = (windows[self.axis_names[0]], windows[self.axis_names[1]])
        return self.ranges

    def _given_windows(self):
        g = self._ranges_given
        if g is None:
            return {}
        if not isinstance(g, dict):
            raise ParameterError("ranges must be a dict of section coordinate -> (low, high) for a section "
                                 f"with {len(self.coordinates)} coordinates, got {g!r}")
        out = {}
        for key, rng in g.items():
            name = str(getattr(key, "name", key))
            if name not in self.coordinates:
                raise ParameterError(f"ranges: {key!r} is not a coordinate of this section; its coordinates are "
                                     + ", ".join(self.coordinates))
            out[name] = _window(rng, f"range of {name}")
        return out

    def held_defaults(self) -> dict:
        """Starting values of the held coordinates: 0 where inside the window, else its middle."""
        out = {}
        for c in self.held:
            lo, hi = self.windows[c]
            out[c] = 0.0 if lo < 0.0 < hi else 0.5 * (lo + hi)
        return out

    # ---------------------------------------------------------------- orbits
    def seeds(self, points, energy, params, held=None) -> Seeding:
        """States on the shell from clicked pairs and the held coordinates' values.

        Parameters
        ----------
        points : array_like, shape (k, 2)
            Values of the clicked pair.
        held : mapping of str to float
            Values of every held coordinate.
        """
        from phaselab.orbits.seeds import shell_seeds

        pts = np.atleast_2d(np.asarray(points, dtype=float))
        if pts.ndim != 2 or pts.shape[1] != 2:
            raise ParameterError(f"seeds must be ({self.axis_names[0]}, {self.axis_names[1]}) pairs, got shape {pts.shape}")
        held = dict(held or {})
        missing = [c for c in self.held if c not in held]
        if missing:
            raise ParameterError(f"the values of {', '.join(missing)} are needed to seed this section")
        fixed = dict(self.plane)
        fixed.update({c: float(held[c]) for c in self.held})
        s = shell_seeds(self.system, pts, energy=energy, plane=fixed, solve_for=self.solve_for, params=params,
                        sign=self.sign)
        return Seeding(s.states, s.valid, list(s.reasons))

    def compute(self, states, energy, params, crossings=None):
        from phaselab.orbits.section import section

        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            return section(self.system, states, crossings or self.crossings, plane=self.plane,
                           direction=self.sign, params=params, dt=self.dt,
                           method=self.method, energy=energy, axes=self.axis_names)

    def coordinate_points(self, section) -> np.ndarray:
        """The section coordinates of every point of a one-orbit section, shape (m, 2n - 2)."""
        idx = [self.names.index(c) for c in self.coordinates]
        pts = section.points[0, : int(section.counts[0])][:, idx]
        return pts[np.all(np.isfinite(pts), axis=1)]
