"""The surface of section of an autonomous flow at fixed energy (two or more degrees of
freedom): the clicked pair of components, the remaining momentum solved from H = E."""

from __future__ import annotations

import warnings

import numpy as np

from phaselab.errors import ModelError, ParameterError, PhaselabError
from phaselab.widgets.views.base import GRID, BaseView, Frame, Seeding
from phaselab.widgets.shading import forbidden_polygons


class SectionView(BaseView):
    """Surface of section of an autonomous flow at fixed energy.

    Parameters
    ----------
    system : Hamiltonian
    plane : mapping of str to float, optional
        Fixed components; default ``{q1: 0.0}``. With more than two degrees of freedom the
        plane must fix enough components that exactly two are left free to click on.
    solve_for : str, optional
        The component solved from H = E; default the momentum conjugate to the first
        coordinate the plane fixes.
    sign : {+1, -1}
        Which root of H = E is taken, and the crossing direction recorded.
    """

    kind = "section"
    uses_energy = True
    noun = "crossings"

    def __init__(self, system, plane=None, solve_for=None, crossings=300, ranges=None, sign=+1,
                 method="auto", dt=None):
        super().__init__(system, crossings, ranges, method, dt)
        n = system.dof
        if plane is None:
            plane = {self.names[0]: 0.0}
        if not isinstance(plane, dict) or not plane:
            raise ModelError(f"plane must be a dict of fixed components such as {{{self.names[0]!r}: 0.0}}, got {plane!r}")
        for key in plane:
            if str(getattr(key, "name", key)) not in self.names:
                raise ModelError(f"plane names {key!r}, which is not a state component; this system has "
                                 + ", ".join(self.names))
        self.plane = {str(getattr(k, "name", k)): float(v) for k, v in plane.items()}
        if solve_for is None:
            first = next(iter(self.plane))
            i = self.names.index(first)
            solve_for = self.names[i + n] if i < n else self.names[i - n]
        solve_for = str(getattr(solve_for, "name", solve_for))
        if solve_for not in self.names:
            raise ModelError(f"solve_for {solve_for!r} is not a state component; this system has "
                             + ", ".join(self.names))
        if solve_for in self.plane:
            raise ModelError(f"{solve_for} is both fixed by the plane and solved for")
        self.solve_for = solve_for
        free = [i for i, nm in enumerate(self.names) if nm not in self.plane and nm != solve_for]
        if len(free) != 2:
            raise ModelError(
                f"the plane {self.plane} with {solve_for} solved leaves {len(free)} free components "
                f"({', '.join(self.names[i] for i in free)}); fix more in plane= so that two remain to click on")
        if sign not in (1, -1):
            raise ParameterError(f"sign must be +1 or -1, got {sign!r}")
        self.sign = int(sign)
        self._set_axes(*free)
        self._levels_cache = {}
        self.ranges = None  # set by fit_ranges()

    def describe(self) -> str:
        fixed = ", ".join(f"{self.label_of(k)} = {v:g}" for k, v in self.plane.items())
        way = "increasing" if self.sign > 0 else "decreasing"
        return (f"section {fixed}, {self.label_of(self.solve_for)} from H = E, crossings with {way} "
                f"{self.label_of(next(iter(self.plane)))}")

    # ---------------------------------------------------------------- window and boundary
    def _level_set(self, params, ranges):
        key = (tuple(sorted((params or {}).items())), ranges)
        ls = self._levels_cache.get(key)
        if ls is None:
            from phaselab.structures.levels import level_set

            rng = {self.axis_names[0]: ranges[0], self.axis_names[1]: ranges[1]}
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                ls = level_set(self.system, rng, [0.0], params=params, resolution=GRID, plane=self.plane)
            if len(self._levels_cache) > 16:
                self._levels_cache.clear()
            self._levels_cache[key] = ls
        return ls

    def fit_ranges(self, energy, params):
        """Choose the window: the given ranges, else a box around the allowed region.

        Boxes of half-width 0.5 * 2**k are tried until the allowed region sits inside with
        room to spare; an unbounded region keeps the box of half-width 4.
        """
        if self._ranges_given is not None:
            self.ranges = self._ranges_from(self._ranges_given, None)
            return self.ranges
        chosen = ((-4.0, 4.0), (-4.0, 4.0))
        for k in range(0, 9):
            h = 0.5 * 2.0 ** k
            box = ((-h, h), (-h, h))
            try:
                ls = self._level_set(params, box)
            except PhaselabError:
                break
            allowed = ls.allowed(energy)
            if not allowed.any():
                continue
            edge = allowed[0, :].any() or allowed[-1, :].any() or allowed[:, 0].any() or allowed[:, -1].any()
            if not edge:
                ys, xs = np.nonzero(allowed)
                x0, x1 = ls.x[xs.min()], ls.x[xs.max()]
                y0, y1 = ls.y[ys.min()], ls.y[ys.max()]
                px, py = 0.08 * (x1 - x0) + 1e-9, 0.08 * (y1 - y0) + 1e-9
                chosen = ((x0 - px, x1 + px), (y0 - py, y1 + py))
                break
            if h >= 4.0 and k >= 3:
                chosen = box
                break
        self.ranges = chosen = self._angle_window(chosen)
        return chosen

    def frame(self, energy, params) -> Frame:
        ls = self._level_set(params, self.ranges)
        allowed = ls.allowed(energy)
        return Frame(lines=[], accents=ls.contour(energy), forbidden=~allowed, grid_x=ls.x, grid_y=ls.y,
                     shade=forbidden_polygons(ls.x, ls.y, ls.values, energy), empty=not allowed.any())

    # ---------------------------------------------------------------- orbits
    def seeds(self, points, energy, params) -> Seeding:
        from phaselab.orbits.seeds import shell_seeds

        pts = np.atleast_2d(np.asarray(points, dtype=float))
        if pts.ndim != 2 or pts.shape[1] != 2:
            raise ParameterError(f"seeds must be ({self.axis_names[0]}, {self.axis_names[1]}) pairs, got shape {pts.shape}")
        s = shell_seeds(self.system, pts, energy=energy, plane=self.plane, solve_for=self.solve_for,
                        params=params, sign=self.sign)
        return Seeding(s.states, s.valid, list(s.reasons))

    def compute(self, states, energy, params, crossings=None):
        from phaselab.orbits.section import section

        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            return section(self.system, states, plane=self.plane, direction=self.sign,
                           crossings=crossings or self.crossings, params=params, dt=self.dt,
                           method=self.method, energy=energy, axes=self.axis_names)

    def trace(self, state, params, until):
        from phaselab.orbits.trajectory import trajectory

        t_end = float(until) if until and np.isfinite(until) and until > 0 else 50.0
        t_end = min(t_end, 400.0)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            return trajectory(self.system, state, t_end, dt=self.dt, method=self.method, params=params)
