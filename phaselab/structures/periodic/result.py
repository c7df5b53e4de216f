"""The periodic-orbit result: :class:`PeriodicOrbit`, its stability from the monodromy, and
the labelled dataset of a list of orbits.

A period-k orbit is a fixed point of the k-th return map P (:mod:`phaselab.structures.returns`):
k iterates of a map, k periods of a drive, or the k-th crossing of a section plane at fixed
energy. Newton's method solves P(u) - u - s = 0 (``s`` a shift for orbits that close on a
cylinder, e.g. rotations of an angle) with the exact derivative of P from the tangent maps of
the integrator, damped by a backtracking line search.

Its linearisation, the monodromy matrix M = dP/du, says how nearby orbits move: for a 2x2
section map Greene's residue R = (2 - tr M) / 4 (Greene 1979, J. Math. Phys. 20, 1183) is
between 0 and 1 for a stable (elliptic) orbit, negative for an unstable (hyperbolic) one and
above 1 for an inverse-unstable (reflection hyperbolic) one.

These are model results. Where a computed orbit informs a design (a spacecraft trajectory,
the working point of a machine), confirm it with validated tools and the responsible
engineers.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from phaselab.engine import accuracy as step_accuracy
from phaselab.engine import status as codes
from phaselab.engine.provenance import netcdf_attrs, provenance
from phaselab.errors import ParameterError
from phaselab.structures.periodic.symmetries import DEGENERATE, NEARLY_DEGENERATE
from phaselab.structures.returns import OFF_SHELL, ReturnMap, return_map
from phaselab.engine.provenance import cf_dataset


STABILITY = ("stable", "unstable", "inverse-unstable", "parabolic")
PARABOLIC_TOL = 1e-7
"""Multipliers within this of the unit circle count as on it (relative to their size)."""

REASONS = {
    "converged": "converged",
    codes.LEFT_BOX: "an orbit left the box",
    codes.NOT_FINITE: "an orbit became non-finite",
    codes.SINGULAR: "an orbit reached a singularity of the system",
    codes.NOT_CONVERGED: "an implicit step did not converge",
    codes.TIME_LIMIT: "no crossing of the plane came within the time cap",
    OFF_SHELL: "left the energy shell (no real solution of H = E for the solved component)",
    "singular": ("singular Jacobian (P - I is not invertible here: a parabolic orbit or a family of "
                 "periodic orbits, where a closer guess will not help)"),
    "degenerate": DEGENERATE,
    "nearly singular": NEARLY_DEGENERATE,
    "budget": "iteration budget used up",
    "line search": "the line search found no decrease (the guess is too far)",
}




# ----------------------------------------------------------------------------- result
@dataclass(repr=False)
class PeriodicOrbit:
    """A periodic orbit with its linear stability.

    Attributes
    ----------
    points : ndarray, shape (k, 2n)
        The orbit's points on the section (map iterates, crossings of the plane, states once
        per drive period), starting with the solved one; wrapped into a map's intervals.
    period : float
        Model time of one full period (``k`` for maps).
    crossings : int
        ``k``: returns per period.
    monodromy : ndarray, shape (d, d)
        The Jacobian of the k-th return map at the orbit, in the reduced coordinates
        ``coordinates`` (d = 2 for a 2-dof section or a 1-dof drive or a 2-D map).
    multipliers : ndarray of complex, shape (d,)
        Eigenvalues of the monodromy.
    stability : str
        ``"stable"`` (all multipliers on the unit circle, none at +-1), ``"unstable"`` (a real
        multiplier above 1 in size, positive), ``"inverse-unstable"`` (negative),
        ``"parabolic"`` (a multiplier at +-1).
    residue : float or None
        Greene's residue (2 - tr M) / 4 when d = 2.
    rotation_number : float or None
        For a stable orbit with d = 2: theta / (2 pi) in (0, 1/2), where exp(+-i theta) are
        the multipliers (the turn per period of the linearised motion around it).
    coordinates : tuple of str
        Names of the reduced coordinates of ``monodromy``.
    shift : ndarray, shape (d,)
        What the orbit advances per period in those coordinates (winding on a cylinder).
    orbit : Trajectory or None
        The full trajectory over one period (flows).
    energy : float or None
    residual : float
        max |P(u) - u - shift| at the solution.
    iterations : int
        Newton steps taken.
    rounding : float
        The measured rounding noise of the residual where Newton's method stopped short of
        ``tol`` because the residual could not fall further (the orbit is then converged as far
        as floating point allows, and ``residual`` is what was reached); NaN when ``tol`` was met.
    distance_from_guess : float
        max |z - guess| over the state components, between the first point and the guess (or
        the start of :func:`find_periodic_orbits`) as placed on the section; NaN for orbits not
        found by :func:`periodic_orbit` or :func:`find_periodic_orbits`. :func:`periodic_orbit`
        warns (:class:`~phaselab.errors.PhaselabWarning`) when it is large for the orbit's size.
    period_change : float
        period - the return time of the guess (NaN likewise).
    symmetries : int
        Continuous symmetries (conserved momenta) of the flow that move this orbit along a
        family of copies; their 2 trivial multipliers at +1 each are left out of
        ``multipliers``, ``stability`` and ``residue`` (``monodromy`` is the full matrix).
    system, params, plane, method, dt
        How it was computed.
    stability_indices : ndarray of complex, shape (d/2,)
        Broucke's index b = lambda + 1/lambda of each multiplier pair, any d (see
        :mod:`phaselab.structures.multipliers`); b = tr M = 2 - 4 residue when d = 2.
    """

    points: np.ndarray
    period: float
    crossings: int
    monodromy: np.ndarray
    multipliers: np.ndarray
    stability: str
    residue: float | None
    rotation_number: float | None
    coordinates: tuple
    shift: np.ndarray
    orbit: object = None
    energy: float | None = None
    residual: float = 0.0
    iterations: int = 0
    system: object = None
    params: dict = field(default_factory=dict)
    plane: object = None
    method: str = ""
    dt: float = float("nan")
    settings: dict = field(default_factory=dict)
    stability_indices: np.ndarray | None = None
    rounding: float = float("nan")
    distance_from_guess: float = float("nan")
    period_change: float = float("nan")
    symmetries: int = 0

    def return_map(self, k: int | None = None) -> ReturnMap:
        """The return map this orbit is a fixed point of (or its ``k``-th return map), with
        the same section, energy, step and method."""
        s = dict(self.settings)
        box = s.pop("box", None)
        ret = return_map(self.system, self.crossings if k is None else k, params=self.params, **s)
        if box is not None:
            ret.box_lo, ret.box_hi = box
        if ret.kind in ("plane", "stroboscopic"):
            ret.set_step(self.points[:1])
        return ret

    @property
    def state(self) -> np.ndarray:
        """The first point, shape (2n,)."""
        return self.points[0]

    def to_xarray(self):
        """The orbit as a labelled ``xarray.Dataset`` (points, monodromy, multipliers)."""
        return cf_dataset(orbits_dataset([self]))

    def plot(self, **kwargs):
        """A static figure of the orbit's points (see :func:`phaselab.export.save`)."""
        from phaselab.export.structures import structure_figure

        return structure_figure([self], **kwargs)

    def save(self, path, **kwargs):
        """Write the orbit: ``.nc`` (NetCDF), ``.json`` (a summary) or a figure (``.svg``,
        ``.pdf``, ``.png``)."""
        from phaselab.export import save

        return save(self, path, **kwargs)

    @property
    def error_estimate(self) -> float:
        """The relative timing error of the integration step over one period (step doubling,
        :func:`phaselab.engine.accuracy.estimate`): the relative error of the period it implies.
        NaN for maps. Measured on first use (a short pilot run) and kept; ``residual`` is the
        separate closure error of Newton's method."""
        cached = self.__dict__.get("_error_estimate")
        if cached is None:
            if (self.system is None or self.method in ("", "map") or not np.isfinite(self.dt)
                    or not np.isfinite(self.period) or self.period <= 0):
                cached = float("nan")
            else:
                cached = step_accuracy.estimate(self.system, np.asarray(self.points)[:1], float(self.period),
                                                self.dt, self.params, self.method)
            self.__dict__["_error_estimate"] = cached
        return cached

    def __repr__(self) -> str:
        res = "" if self.residue is None else f", residue {self.residue:.6g}"
        if self.crossings == self.period:
            per = f"period {self.crossings}"
        else:
            per = f"period {self.period:.10g} ({self.crossings} return{'s' if self.crossings > 1 else ''})"
        first = ", ".join(f"{c:.6g}" for c in self.points[0])
        return f"PeriodicOrbit({self.stability}, {per}{res}, through ({first}))"


# ----------------------------------------------------------------------------- labelled data
def orbits_dataset(orbits):
    """Periodic orbits of one system as an ``xarray.Dataset``: ``points`` (orbit, point,
    component; NaN past an orbit's period), ``monodromy`` (orbit, row, column),
    ``multipliers`` (real and imaginary parts), ``period``, ``residue`` and ``stability``
    per orbit, with the provenance as attributes."""
    import xarray as xr

    if not orbits:
        raise ParameterError("no orbits to label")
    system = orbits[0].system
    names = [s.name for s in system.state_symbols]
    k = max(o.points.shape[0] for o in orbits)
    d = max(o.monodromy.shape[0] if o.monodromy.ndim == 2 else 0 for o in orbits)
    pts = np.full((len(orbits), k, len(names)), np.nan)
    mono = np.full((len(orbits), d, d), np.nan)
    mult = np.full((len(orbits), d, 2), np.nan)
    for a, o in enumerate(orbits):
        pts[a, :len(o.points)] = o.points
        if d and o.monodromy.ndim == 2:
            dd = o.monodromy.shape[0]
            mono[a, :dd, :dd] = o.monodromy
            mm = np.atleast_1d(o.multipliers)
            mult[a, :len(mm), 0], mult[a, :len(mm), 1] = mm.real, mm.imag
    coords = list(orbits[0].coordinates)[:d]
    ds = xr.Dataset(
        data_vars={
            "points": (("orbit", "point", "component"), pts),
            "monodromy": (("orbit", "row", "column"), mono),
            "multipliers": (("orbit", "multiplier", "part"), mult),
            "period": (("orbit",), np.array([o.period for o in orbits], float)),
            "residue": (("orbit",), np.array([np.nan if o.residue is None else o.residue for o in orbits])),
            "stability": (("orbit",), np.array([o.stability for o in orbits], dtype=object)),
        },
        coords={"orbit": np.arange(len(orbits)), "component": names, "row": coords, "column": coords,
                "part": ["real", "imaginary"]},
        attrs=netcdf_attrs(provenance(system, orbits[0].params, method=orbits[0].method,
                                      dt=orbits[0].dt, energy=orbits[0].energy)))
    ds["points"].attrs["description"] = "the orbit's points on its section; NaN past its period"
    return ds


# ----------------------------------------------------------------------------- stability
def classify(M: np.ndarray) -> tuple[np.ndarray, str, float | None, float | None]:
    """Multipliers, stability word, residue and linear rotation number of a monodromy."""
    M = np.asarray(M, dtype=float)
    d = M.shape[0] if M.ndim == 2 else 0
    if d == 0:  # one degree of freedom: every orbit nearby is periodic too (a neutral family)
        return np.zeros(0, complex), "parabolic", None, None
    mult = np.linalg.eigvals(M)
    residue = rotation = None
    if d == 2:
        tr = float(np.trace(M))
        residue = (2.0 - tr) / 4.0
        tol = PARABOLIC_TOL * max(1.0, abs(tr))
        if abs(tr - 2.0) <= tol or abs(tr + 2.0) <= tol:
            word = "parabolic"
        elif abs(tr) < 2.0:
            word = "stable"
            rotation = float(np.arccos(np.clip(tr / 2.0, -1.0, 1.0)) / (2.0 * np.pi))
        elif tr > 2.0:
            word = "unstable"
        else:
            word = "inverse-unstable"
        return mult, word, residue, rotation
    size = np.abs(mult)
    outside = size > 1.0 + PARABOLIC_TOL
    if outside.any():
        real_out = mult[outside & (np.abs(mult.imag) <= PARABOLIC_TOL * size)]
        word = "inverse-unstable" if real_out.size and np.all(real_out.real < 0) else "unstable"
    elif d and np.any(np.abs(np.abs(mult.real) - 1.0) <= PARABOLIC_TOL) \
            and np.any(np.abs(mult.imag) <= PARABOLIC_TOL):
        word = "parabolic"
    else:
        word = "stable"
    return mult, word, residue, rotation
