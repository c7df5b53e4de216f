"""What the explorer's main plot shows, and how a click becomes an orbit.

One class per kind of system, all with the same small surface used by the explorer:

=====================  ==========================================================
:class:`SectionView`   autonomous flow, two or more degrees of freedom: a surface of
                       section at fixed energy; a click gives the two shown components
                       and the remaining momentum is solved from H = E
:class:`PortraitView`  autonomous flow, one degree of freedom: level curves of H (the
                       phase portrait); a click is a full state, its orbit is traced
:class:`StrobeView`    time-periodic H: stroboscopic section, a click is the state at t = 0
:class:`MapView`       area-preserving map: a click is a state, its iterates are shown
=====================  ==========================================================

Everything here calls the compute layer and returns numbers; nothing imports bokeh or
ipywidgets, so the views are tested and timed without a display.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np

from phaselab.errors import ModelError, ParameterError, PhaselabError

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
    empty : bool
        No point of the shown window is allowed at this energy.
    """

    lines: list = field(default_factory=list)
    accents: list = field(default_factory=list)
    forbidden: np.ndarray | None = None
    grid_x: np.ndarray | None = None
    grid_y: np.ndarray | None = None
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


class _View:
    kind = "view"
    uses_energy = False
    #: how the plot's orbits are called in messages
    noun = "points"

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
        """The plain label of state component ``k`` (as the HTML export writes it)."""
        from phaselab.export.describe import plain_label

        return plain_label(self.system.state_symbols[k])

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
        st = tr.states[0, ::step]
        t = np.asarray(tr.t[::step], float)
        n = len(self.names) // 2
        first = (st[:, 0], st[:, 1]) if n >= 2 else (t, st[:, 0])
        return first, (t, np.asarray(tr.energy_error[0, ::step], float))


class SectionView(_View):
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
        fixed = ", ".join(f"{k} = {v:g}" for k, v in self.plane.items())
        way = "increasing" if self.sign > 0 else "decreasing"
        return f"section {fixed}, {self.solve_for} from H = E, crossings with {way} {next(iter(self.plane))}"

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
        self.ranges = chosen
        return chosen

    def frame(self, energy, params) -> Frame:
        ls = self._level_set(params, self.ranges)
        allowed = ls.allowed(energy)
        return Frame(lines=[], accents=ls.contour(energy), forbidden=~allowed, grid_x=ls.x, grid_y=ls.y,
                     empty=not allowed.any())

    # ---------------------------------------------------------------- orbits
    def seeds(self, points, energy, params) -> Seeding:
        from phaselab.orbits.seeds import shell_seeds

        pts = np.atleast_2d(np.asarray(points, dtype=float))
        if pts.ndim != 2 or pts.shape[1] != 2:
            raise ParameterError(f"seeds must be ({self.axis_names[0]}, {self.axis_names[1]}) pairs, got shape {pts.shape}")
        s = shell_seeds(self.system, energy, self.plane, self.solve_for, pts, params=params, sign=self.sign)
        return Seeding(s.states, s.valid, list(s.reasons))

    def compute(self, states, energy, params, crossings=None):
        from phaselab.orbits.section import section

        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            return section(self.system, states, self.plane, direction=self.sign, crossings=crossings or self.crossings,
                           params=params, dt=self.dt, method=self.method, energy=energy,
                           axes=self.axis_names)

    def trace(self, state, params, until):
        from phaselab.orbits.trajectory import trajectory

        t_end = float(until) if until and np.isfinite(until) and until > 0 else 50.0
        t_end = min(t_end, 400.0)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            return trajectory(self.system, state, t_end, dt=self.dt, method=self.method, params=params)



class PortraitView(_View):
    """Phase portrait of one degree of freedom: level curves of H; a click traces an orbit."""

    kind = "portrait"
    uses_energy = True
    noun = "samples"

    def __init__(self, system, crossings=300, ranges=None, duration=None, method="auto", dt=None):
        super().__init__(system, crossings, ranges, method, dt)
        self._set_axes(0, 1)
        self.ranges = self._ranges_from(ranges, ((-math.pi, math.pi), (-3.0, 3.0)))
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
        pts = tr.states
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



class StrobeView(_View):
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
        self.ranges = self._ranges_from(ranges, ((-math.pi, math.pi), (-3.0, 3.0)))

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
        self.ranges = ((float(lo[0] - pad[0]), float(hi[0] + pad[0])), (float(lo[1] - pad[1]), float(hi[1] + pad[1])))
        return self.ranges

    def panels(self):
        return [("Orbit in phase space, first periods", self.label(0), self.label(1)),
                ("Energy over time (driven: not conserved)", "t", "H")]

    def panel_curves(self, tr, params):
        step = max(1, len(tr.t) // TRACE_SAMPLES)
        st = tr.states[0, ::step]
        t = np.asarray(tr.t[::step], float)
        h = np.asarray(self.system.energy(st, params, t=t), float)
        return (st[:, 0], st[:, 1]), (t, h)

    def compute(self, states, energy, params, crossings=None):
        from phaselab.orbits.section import section

        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            return section(self.system, states, "stroboscopic", crossings=crossings or self.crossings, params=params,
                           dt=self.dt, method=self.method)

    def trace(self, state, params, until):
        from phaselab.orbits.trajectory import trajectory

        period = self.system.driving_period(params)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            return trajectory(self.system, state, 20 * period, dt=self.dt, method=self.method, params=params)



class MapView(_View):
    """Iterates of an area-preserving map."""

    kind = "map"
    noun = "iterates"

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


def make_view(system, plane=None, solve_for=None, crossings=300, ranges=None, sign=+1, duration=None,
              method="auto", dt=None):
    """The view for ``system``: map, stroboscopic, phase portrait or surface of section."""
    if getattr(system, "kind", "flow") == "map":
        if plane is not None or solve_for is not None:
            raise ModelError("a map has no section plane or energy: leave plane and solve_for out")
        return MapView(system, crossings, ranges)
    if not system.is_autonomous:
        if system.period is None:
            raise ModelError(f"{system.name!r} depends on time but has no driving period; give period= "
                             "when building it so that a stroboscopic section can be drawn")
        return StrobeView(system, crossings, ranges, method, dt)
    if system.dof == 1 and plane is None and solve_for is None:
        return PortraitView(system, crossings, ranges, duration, method, dt)
    return SectionView(system, plane, solve_for, crossings, ranges, sign, method, dt)
