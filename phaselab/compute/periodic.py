"""Periodic orbits: Newton's method on return maps, their stability and residues, a search
over a region, and Greene's residue criterion for the breakup of an invariant torus.

A period-k orbit is a fixed point of the k-th return map P (:mod:`phaselab.compute.returns`):
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

import warnings
from dataclasses import dataclass, field

import numpy as np

from phaselab.compute import codes, inputs
from phaselab.compute.labels import netcdf_attrs, provenance
from phaselab.compute.returns import OFF_SHELL, ReturnMap, return_map
from phaselab.errors import IntegrationError, ParameterError

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
    "singular": "singular Jacobian (P - I is not invertible here: a parabolic orbit or a family)",
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
    system, params, plane, method, dt
        How it was computed.
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
        return orbits_dataset([self])

    def plot(self, **kwargs):
        """A static figure of the orbit's points (see :func:`phaselab.export.save`)."""
        from phaselab.export.structures import structure_figure

        return structure_figure([self], **kwargs)

    def save(self, path, **kwargs):
        """Write the orbit: ``.nc`` (NetCDF), ``.json`` (a summary) or a figure (``.svg``,
        ``.pdf``, ``.png``)."""
        from phaselab.export import save

        return save(self, path, **kwargs)

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


# ----------------------------------------------------------------------------- Newton
@dataclass
class _Solve:
    U: np.ndarray          # (N, k, d) the orbits' points in reduced coordinates
    reason: list
    residual: np.ndarray
    iterations: np.ndarray
    images: object         # Images of the N*k points (row-major over orbits, then points)


def _evaluate(ret1: ReturnMap, U, shifts):
    """Residuals F (M, k, d) of the shooting equations P(u_i) - u_(i+1) - s_i = 0 (cyclic),
    the images of all points, and a status per orbit."""
    M, k, d = U.shape
    img = ret1.apply(U.reshape(M * k, d))
    P = img.u.reshape(M, k, d)
    F = P - np.roll(U, -1, axis=1) - shifts
    st = img.status.reshape(M, k)
    bad = st != codes.OK
    status = np.where(bad.any(axis=1), st[np.arange(M), np.argmax(bad, axis=1)], codes.OK)
    norm = np.where(status == codes.OK, np.max(np.abs(F.reshape(M, -1)), axis=1) if d else 0.0, np.inf)
    return F, img, status, norm


def _shooting_matrix(img, M, k, d):
    """The Jacobian of the shooting equations: block (i, i) dP(u_i), block (i, i+1) -I."""
    JB = img.jacobian.reshape(M, k, d, d)
    A = np.zeros((M, k * d, k * d))
    eye = np.eye(d)
    for i in range(k):
        A[:, i * d:(i + 1) * d, i * d:(i + 1) * d] += JB[:, i]
        j = (i + 1) % k
        A[:, i * d:(i + 1) * d, j * d:(j + 1) * d] -= eye
    return A


def newton(ret1: ReturnMap, U0, shifts, tol: float = 1e-11, maxit: int = 30) -> _Solve:
    """Damped Newton's method, by multiple shooting, for period-k orbits from many starts.

    Each orbit is k points u_0..u_(k-1) joined by one return each: P(u_i) = u_(i+1) + s_i
    (u_k = u_0). Splitting a long, unstable period into k short legs keeps the equations
    nearly linear where single shooting on the k-th return map would not converge (a close
    approach to a primary, a strongly unstable orbit). Every iteration is one compiled call
    over all points of all orbits still running; the step is halved (up to 12 times) until
    the residual falls, ``||F(U + a dU)|| <= (1 - a/4) ||F(U)||``.

    Parameters
    ----------
    ret1 : ReturnMap
        The single return map (one iterate, one drive period, one crossing).
    U0 : ndarray, shape (N, k, d)
    shifts : ndarray, shape (N, k, d)
        What each leg advances (winding of wrapped coordinates, or a given shift).

    Returns
    -------
    _Solve
    """
    U = np.array(U0, dtype=float)
    n, k, d = U.shape
    reason: list = [None] * n
    iters = np.zeros(n, dtype=np.int64)
    F, images, status, norm = _evaluate(ret1, U, shifts)
    scale = 1.0 + (np.max(np.abs(U.reshape(n, -1)), axis=1) if d else np.zeros(n))
    for i in range(n):
        if status[i] != codes.OK:
            reason[i] = int(status[i])
    active = np.array([r is None for r in reason])
    for it in range(maxit + 1):
        done = active & (norm <= tol * scale)
        for i in np.flatnonzero(done):
            reason[i] = "converged"
        active &= ~done
        if not active.any() or it == maxit:
            break
        idx = np.flatnonzero(active)
        sub_img = _take_images(images, idx, k)
        A = _shooting_matrix(sub_img, len(idx), k, d)
        with np.errstate(all="ignore"):
            cond = np.linalg.cond(A)
        singular = ~np.isfinite(cond) | (cond > 1e14)
        for i in idx[singular]:
            reason[i] = "singular"
            active[i] = False
        keep = ~singular
        idx = idx[keep]
        if idx.size == 0:
            break
        step = np.linalg.solve(A[keep], -F[idx].reshape(len(idx), k * d)[..., None])[..., 0]
        step = step.reshape(len(idx), k, d)
        lam = np.ones(idx.size)
        accepted = np.zeros(idx.size, dtype=bool)
        for _ in range(13):
            todo = np.flatnonzero(~accepted)
            trial_U = U[idx[todo]] + lam[todo, None, None] * step[todo]
            Ft, trial_img, st_t, nt = _evaluate(ret1, trial_U, shifts[idx[todo]])
            ok = nt <= (1.0 - 0.25 * lam[todo]) * norm[idx[todo]]
            for j, r in enumerate(todo):
                if ok[j]:
                    accepted[r] = True
                    i = idx[r]
                    U[i], F[i], norm[i] = trial_U[j], Ft[j], nt[j]
                    _put_images(images, i, trial_img, j, k)
            lam[~accepted] *= 0.5
            if accepted.all():
                break
        for r in np.flatnonzero(~accepted):
            reason[idx[r]] = "line search"
            active[idx[r]] = False
        iters[idx[accepted]] += 1
    for i in np.flatnonzero(active):
        reason[i] = "budget"
    return _Solve(U=U, reason=reason, residual=norm, iterations=iters, images=images)


def _take_images(images, idx, k):
    from phaselab.compute.returns import Images

    rows = (np.asarray(idx)[:, None] * k + np.arange(k)[None, :]).ravel()
    return Images(u=images.u[rows], jacobian=images.jacobian[rows], state=images.state[rows],
                  time=images.time[rows], status=images.status[rows])


def _put_images(images, i, other, j, k):
    dst = slice(i * k, (i + 1) * k)
    src = slice(j * k, (j + 1) * k)
    images.u[dst] = other.u[src]
    images.jacobian[dst] = other.jacobian[src]
    images.state[dst] = other.state[src]
    images.time[dst] = other.time[src]
    images.status[dst] = other.status[src]


def _explain(reason) -> str:
    return REASONS.get(reason, str(reason))


# ----------------------------------------------------------------------------- assembling
def _given_shift(ret: ReturnMap, shift) -> np.ndarray:
    """A shift per period given by coordinate name, as an array over the coordinates."""
    out = np.zeros(ret.dim)
    if shift is None:
        return out
    if not isinstance(shift, dict):
        raise ParameterError("shift must be a mapping name -> amount per period, e.g. {'q': 2*pi}")
    names = ret.names
    for key, value in shift.items():
        name = getattr(key, "name", key)
        if name not in names:
            raise ParameterError(f"shift names {name!r}, which is not one of the coordinates "
                                 f"{', '.join(names)}")
        out[names.index(name)] = inputs.number(value, f"shift of {name!r}")
    return out


def _legs(ret1: ReturnMap, u0, k: int, shift):
    """Starting points of multiple shooting from starts ``u0`` (N, d): each start followed by
    its k-1 images, and the shift of each leg ``(U0 (N, k, d), shifts (N, k, d), status)``.

    A given shift goes on the last leg. For a map with wrapped components the legs follow the
    unwrapped iterates, so only the last leg winds: by the whole number of periods its image
    advanced past the start."""
    u0 = np.atleast_2d(u0)
    n, d = u0.shape
    U = np.full((n, k, d), np.nan)
    U[:, 0] = u0
    status = np.zeros(n, dtype=np.int64)
    last = None
    for i in range(k):
        img = ret1.apply(U[:, i])
        status = np.where(status == codes.OK, img.status, status)
        if i + 1 < k:
            U[:, i + 1] = img.u
        last = img.u
    shifts = np.zeros((n, k, d))
    if shift is not None:
        shifts[:, -1] = _given_shift(ret1, shift)
    elif ret1.kind == "map" and np.any(ret1.period > 0):
        # the legs follow the unwrapped iterates, so only the last one winds
        wraps = ret1.period > 0
        adv = np.where(np.isfinite(last), last - U[:, 0], 0.0)
        shifts[:, -1, wraps] = np.round(adv[:, wraps] / ret1.period[wraps]) * ret1.period[wraps]
    return U, shifts, status


def _assemble(ret: ReturnMap, u, images, shift, residual, iterations) -> PeriodicOrbit:
    """A PeriodicOrbit from a fixed point ``u`` of the k-th return map ``ret`` (single
    shooting; its points are found by sectioning the orbit)."""
    z0 = ret.lift(u[None, :])[0][0]
    points = _orbit_points(ret, z0)
    return _orbit(ret, ret.k, points, images.jacobian, float(images.time), shift, residual, iterations)


def _assemble_shooting(ret1: ReturnMap, U, images, shifts, residual, iterations) -> PeriodicOrbit:
    """A PeriodicOrbit from the k points ``U`` (k, d) of a multiple-shooting solution."""
    k = U.shape[0]
    M = np.eye(ret1.dim)
    for i in range(k):
        M = images.jacobian[i] @ M
    z = ret1.lift(U)[0]
    if ret1.kind == "map":
        z = ret1.wrap(z)
    return _orbit(ret1, k, z, M, float(np.sum(images.time)), shifts.sum(axis=0), residual, iterations)


def _orbit(ret, k, points, M, period, shift, residual, iterations) -> PeriodicOrbit:
    from phaselab.compute.trajectory import trajectory

    system = ret.system
    mult, word, residue, rotation = classify(M)
    orbit = None
    if ret.kind in ("plane", "stroboscopic"):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            n_steps = max(1, int(round(period / ret.h)))
            orbit = trajectory(system, points[0], period, dt=period / n_steps, method=ret.method.name,
                               params=ret.params, check_step=False)
    params = dict(zip((p.name for p in system.parameters), ret.prm.tolist()))
    return PeriodicOrbit(
        points=np.ascontiguousarray(points), period=period, crossings=k, monodromy=M, multipliers=mult,
        stability=word, residue=residue, rotation_number=rotation, coordinates=ret.names,
        shift=np.asarray(shift, dtype=float), orbit=orbit, energy=getattr(ret, "energy", None),
        residual=float(residual), iterations=int(iterations), system=system, params=params,
        plane=getattr(ret, "plane", None) if ret.kind == "plane" else ret.kind,
        method="map" if ret.kind == "map" else ret.method.name,
        dt=float(getattr(ret, "h", float("nan"))), settings=_settings(ret))


def _settings(ret: ReturnMap) -> dict:
    """What rebuilds the same return map (see :meth:`PeriodicOrbit.return_map`)."""
    out = {"box": (ret.box_lo, ret.box_hi)}
    if ret.kind == "plane":
        out.update(plane=ret.plane, energy=ret.energy, direction=ret.direction,
                   solve_for=ret.system.state_symbols[ret.solve_index].name, dt=ret.h,
                   method=ret.method.name, t_max=ret.t_max)
    elif ret.kind == "stroboscopic":
        out.update(dt=ret.h, method=ret.method.name)
    return out


def _orbit_points(ret: ReturnMap, z0) -> np.ndarray:
    """The k points of the orbit through ``z0`` on its section (single shooting)."""
    from phaselab.compute.section import section

    k = ret.k
    system = ret.system
    if k == 1:
        pts = z0[None, :]
    else:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            if ret.kind == "map":
                pts = np.vstack([z0, ret.iterates(z0, k - 1)])
            elif ret.kind == "stroboscopic":
                sec = section(system, z0, "stroboscopic", crossings=k - 1, params=ret.params, dt=ret.h,
                              method=ret.method.name)
                pts = np.vstack([z0, sec.points[0]])
            else:
                sec = section(system, z0, ret.plane, direction=ret.direction, crossings=k - 1,
                              params=ret.params, dt=ret.h, method=ret.method.name, t_max=ret.t_max)
                pts = np.vstack([z0, sec.points[0]])
    if ret.kind == "map":
        pts = ret.wrap(pts)
    return np.ascontiguousarray(pts)


def _image(images, i):
    from phaselab.compute.returns import Images

    return Images(u=images.u[i], jacobian=images.jacobian[i], state=images.state[i], time=images.time[i],
                  status=images.status[i])


# ----------------------------------------------------------------------------- public calls
def periodic_orbit(system, guess, period=1, plane=None, energy=None, params=None, *, direction=+1,
                   solve_for=None, dt=None, method="auto", shift=None, symmetric=False, tol=1e-11,
                   maxit=30, box=None, t_max=None) -> PeriodicOrbit:
    """Find a periodic orbit near ``guess`` by Newton's method on the return map.

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
    guess : array_like, shape (2n,)
        A state near the orbit. For a section plane it is put on the plane and on the energy
        shell (the solved component is recomputed).
    period : int
        ``k``: iterates of a map, drive periods of a time-periodic H, or crossings of the
        plane of an autonomous flow per period of the orbit.
    plane : mapping, optional
        The section plane of an autonomous flow, ``{"x": 0.0}`` (as for
        :func:`phaselab.section`). Not used for maps and driven systems.
    energy : float, optional
        The energy of the orbit of an autonomous flow (default: H at the guess).
    params : mapping, optional
    direction : {+1, -1}
        Crossing direction through the plane.
    solve_for : str, optional
        The component solved from H = E on the plane (default: the partner of the plane's
        component, px for x = 0).
    dt : float, optional
        Step, fixed for the whole search (default from the linearisation at the guess).
    method : str
        Integrator (``"auto"`` or a name of the method table).
    shift : mapping, optional
        What the orbit advances per period, by coordinate name, for orbits that close on a
        cylinder (``{"theta": 2*pi}``). For a map with wrapped components it is found from
        the guess's iterates.
    symmetric : bool
        For a map with a reversor (``AreaPreservingMap(..., reversor=...)``): search along the
        symmetry lines (Greene's method), robust for long periods of twist maps. See
        :func:`phaselab.compute.symmetric.symmetric_orbit`.
    tol : float
        Converged when every leg closes to tol (1 + max |u|).
    maxit : int
        Most Newton steps.
    box : float or mapping, optional
        Escape region; an orbit leaving it ends the search with a clear error.
    t_max : float, optional
        Time cap for reaching each crossing (flows; default 5000 steps).

    Returns
    -------
    PeriodicOrbit

    Raises
    ------
    IntegrationError
        Newton's method did not converge; the message says why (left the box, no crossing,
        off the energy shell, singular Jacobian, iteration budget, no decrease).
    ParameterError, ModelError
        Bad arguments, or a system that cannot do this.

    Notes
    -----
    A period of k returns is solved by multiple shooting: the k points of the orbit are the
    unknowns, each joined to the next by one return (see :func:`newton`). The monodromy is
    the product of the k one-return Jacobians, exact derivatives from the tangent maps of the
    integrator.
    """
    tol = inputs.positive_number(tol, "tol")
    maxit = inputs.count(maxit, "maxit", minimum=1, maximum=1000)
    k = inputs.count(period, "period")
    names = [s.name for s in system.state_symbols]
    g = inputs.states(guess, len(names), names, "guess")
    if len(g) != 1:
        raise ParameterError("guess must be one state; use find_periodic_orbits for many")
    if symmetric:
        from phaselab.compute.symmetric import symmetric_orbit

        return symmetric_orbit(system, g[0], k, params=params, tol=tol, maxit=maxit, box=box)
    ret1 = return_map(system, 1, plane=plane, energy=energy, guess=g, direction=direction,
                      solve_for=solve_for, params=params, dt=dt, method=method, box=box, t_max=t_max)
    U0, shifts, status = _legs(ret1, ret1.coordinates(g), k, shift)
    if status[0] != codes.OK:
        raise IntegrationError(f"no period-{k} orbit found from this guess: following the guess, "
                               f"{_explain(int(status[0]))}")
    sol = newton(ret1, U0, shifts, tol=tol, maxit=maxit)
    why = sol.reason[0]
    if why != "converged":
        raise IntegrationError(
            f"no period-{k} orbit found from this guess: {_explain(why)} (after "
            f"{int(sol.iterations[0])} Newton steps, residual {sol.residual[0]:.3g}); try a closer guess"
            + (", another energy" if ret1.kind == "plane" else "")
            + (" or a smaller dt" if ret1.kind != "map" else ""))
    return _assemble_shooting(ret1, sol.U[0], _take_images(sol.images, [0], k), shifts[0], sol.residual[0],
                              sol.iterations[0])


@dataclass(repr=False)
class PeriodicOrbits:
    """The distinct periodic orbits found by :func:`find_periodic_orbits`.

    Attributes
    ----------
    orbits : list of PeriodicOrbit
        Sorted by stability, then by their first coordinate.
    tried : int
        Starting points.
    failed : dict of str to int
        Starting points that did not converge, by reason.
    """

    orbits: list
    tried: int
    failed: dict

    def __len__(self):
        return len(self.orbits)

    def __iter__(self):
        return iter(self.orbits)

    def __getitem__(self, i):
        return self.orbits[i]

    def by_stability(self, word: str) -> list:
        """The orbits whose stability is ``word``."""
        return [o for o in self.orbits if o.stability == word]

    def table(self) -> str:
        """A plain text table: stability, residue, period and first point of each orbit."""
        if not self.orbits:
            return "no orbits"
        names = [s.name for s in self.orbits[0].system.state_symbols]
        lines = [f"{'#':>3}  {'stability':17s} {'residue':>12s} {'period':>12s}  " + "  ".join(
            f"{n:>10s}" for n in names)]
        for i, o in enumerate(self.orbits):
            res = "" if o.residue is None else f"{o.residue:.6g}"
            lines.append(f"{i:3d}  {o.stability:17s} {res:>12s} {o.period:12.6g}  "
                         + "  ".join(f"{v:10.6g}" for v in o.points[0]))
        return "\n".join(lines)

    def to_xarray(self):
        """Every orbit in one ``xarray.Dataset`` (dimension ``orbit``)."""
        return orbits_dataset(self.orbits)

    def save(self, path, **kwargs):
        """Write every orbit (``.nc``, ``.json`` or a figure)."""
        from phaselab.export import save

        return save(self, path, **kwargs)

    def plot(self, **kwargs):
        from phaselab.export.structures import structure_figure

        return structure_figure(self.orbits, **kwargs)

    def __repr__(self) -> str:
        failed = sum(self.failed.values())
        return (f"PeriodicOrbits({len(self.orbits)} distinct orbits from {self.tried} starts, "
                f"{failed} starts did not converge)\n" + self.table())


def find_periodic_orbits(system, period, region=None, seeds=None, plane=None, energy=None, params=None, *,
                         resolution=8, direction=+1, solve_for=None, dt=None, method="auto", shift=None,
                         tol=1e-11, maxit=30, box=None, t_max=None, same=1e-7) -> PeriodicOrbits:
    """Every distinct periodic orbit of period ``k`` found from many starting points.

    Newton's method (:func:`periodic_orbit`) runs from every point of a grid over ``region``
    (or from ``seeds``) at once, in one compiled call per iteration; orbits found twice (the
    same orbit from another start, or another point of the same orbit) are kept once, and
    orbits whose least period divides ``k`` (a fixed point in a period-2 search) are left
    out.

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
    period : int
    region : mapping, optional
        Two coordinates with ranges, ``{"y": (-0.4, 0.6), "py": (-0.5, 0.5)}`` (the others 0
        or on the plane): a ``resolution x resolution`` grid of starts.
    seeds : array_like, shape (N, 2n), optional
        Starting states instead of a grid.
    same : float
        Two orbits are the same when a point of one is within ``same`` (1 + |z|) of a point
        of the other.
    Other parameters are those of :func:`periodic_orbit`.

    Returns
    -------
    PeriodicOrbits
    """
    names = [s.name for s in system.state_symbols]
    k = inputs.count(period, "period")
    if (region is None) == (seeds is None):
        raise ParameterError("give either region={name: (low, high), ...} or seeds=...")
    if seeds is None:
        starts = _grid(system, region, inputs.count(resolution, "resolution", 1, 1000), plane)
    else:
        starts = inputs.states(seeds, len(names), names, "seeds")
    starts = starts[np.all(np.isfinite(starts), axis=1)]
    if not len(starts):
        raise ParameterError("no finite starting points")
    ret1 = return_map(system, 1, plane=plane, energy=energy, guess=starts[:1], direction=direction,
                      solve_for=solve_for, params=params, dt=dt, method=method, box=box, t_max=t_max)
    U0, shifts, status = _legs(ret1, ret1.coordinates(starts), k, shift)
    failed: dict = {}
    for st in status[status != codes.OK]:
        key = _explain(int(st))
        failed[key] = failed.get(key, 0) + 1
    run = np.flatnonzero(status == codes.OK)
    sol = newton(ret1, U0[run], shifts[run], tol=tol, maxit=maxit) if run.size else None
    orbits: list = []
    for j in range(run.size):
        why = sol.reason[j]
        if why != "converged":
            key = _explain(why)
            failed[key] = failed.get(key, 0) + 1
            continue
        cand = _assemble_shooting(ret1, sol.U[j], _take_images(sol.images, [j], k), shifts[run[j]],
                                  sol.residual[j], sol.iterations[j])
        if _least_period(ret1, cand, same) < k:
            failed["least period smaller than asked"] = failed.get("least period smaller than asked", 0) + 1
            continue
        if any(_same_orbit(ret1, cand, o, same) for o in orbits):
            continue
        orbits.append(cand)
    orbits.sort(key=lambda o: (STABILITY.index(o.stability), tuple(np.round(o.points[0], 9))))
    return PeriodicOrbits(orbits, tried=len(starts), failed=failed)


def _grid(system, region, resolution, plane):
    if not isinstance(region, dict) or not region:
        raise ParameterError("region must map coordinate names to (low, high), e.g. {'y': (-0.5, 0.5)}")
    names = [s.name for s in system.state_symbols]
    axes = []
    for key, rng in region.items():
        j = inputs.state_index(system, key, "region coordinate")
        try:
            lo, hi = float(rng[0]), float(rng[1])
        except (TypeError, ValueError, IndexError):
            raise ParameterError(f"region range of {key!r} must be (low, high), got {rng!r}") from None
        if not (np.isfinite(lo) and np.isfinite(hi) and lo < hi):
            raise ParameterError(f"region range of {key!r} needs finite low < high, got ({lo}, {hi})")
        axes.append((j, np.linspace(lo, hi, resolution)))
    mesh = np.meshgrid(*[a for _, a in axes], indexing="ij")
    starts = np.zeros((mesh[0].size, len(names)))
    for (j, _), values in zip(axes, mesh):
        starts[:, j] = values.ravel()
    if isinstance(plane, dict):
        for key, value in plane.items():
            starts[:, inputs.state_index(system, key, "plane component")] = float(value)
    return starts


def _least_period(ret, orbit, same):
    pts = orbit.points
    z0 = pts[0]
    tol = same * (1.0 + np.max(np.abs(z0)))
    k = len(pts)
    for j in range(1, k):
        if k % j == 0 and np.max(np.abs(_wrapped_difference(ret, pts[j], z0))) <= tol:
            return j
    return k


def _wrapped_difference(ret, a, b):
    diff = np.asarray(a, float) - np.asarray(b, float)
    if ret.kind == "map":
        per = np.zeros(len(diff))
        per[ret.index] = ret.period
        w = per > 0
        diff[w] = (diff[w] + 0.5 * per[w]) % per[w] - 0.5 * per[w]
    return diff


def _same_orbit(ret, a, b, same):
    z = a.points[0]
    tol = same * (1.0 + np.max(np.abs(z)))
    return any(np.max(np.abs(_wrapped_difference(ret, p, z))) <= tol for p in b.points)
