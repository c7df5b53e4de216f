"""Families of periodic orbits: pseudo-arclength continuation in a parameter or the energy.

A periodic orbit is a fixed point of its return map, P(u; lambda) = u + s. As the parameter
lambda (a model parameter, or the energy of an autonomous flow's section) moves, the orbit
moves along a curve in (u, lambda). Pseudo-arclength continuation (Keller 1977, in
Applications of Bifurcation Theory, Academic Press, 359) follows that curve by its
arclength, not by lambda, so it passes turning points where the family folds back: from a
point x = (u, lambda) with unit tangent t, the predictor x + ds t is corrected by Newton's
method on [P(u; lambda) - u - s ; t . (x - x_predicted)] = 0, and the new tangent is the
null vector of [dP/du - I | dP/dlambda], oriented to keep the direction.

dP/du is the exact derivative from the tangent maps of the integrator. dP/dlambda is exact
for the energy (through the solved component of the section) and a central difference for a
model parameter (relative step 1e-6).

Along the family the residue R = (2 - tr M) / 4 of the monodromy tells the stability; where
R crosses 0 a multiplier passes +1 (a tangent or pitchfork bifurcation, or a fold of the
family), where it crosses 1 a multiplier passes -1 (period doubling) (Greene 1979). Both are
flagged, located by linear interpolation between neighbouring members.

These are model results; where a family informs a design (a mission's orbit family, the
working range of a machine) confirm it with validated tools and the responsible engineers.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import numpy as np

from phaselab.compute import codes, inputs
from phaselab.compute.periodic import PeriodicOrbit, _assemble, _image, classify
from phaselab.errors import ModelError, ParameterError

FD_STEP = 1e-6
"""Relative step of the central difference in a model parameter."""


@dataclass(repr=False)
class Family:
    """A family of periodic orbits along a parameter.

    Attributes
    ----------
    parameter : str
        The parameter name, or ``"energy"``.
    values : ndarray, shape (n,)
        Its value at each member, in the order followed.
    states : ndarray, shape (n, 2n)
        The first point of each member.
    period : ndarray, shape (n,)
    residue : ndarray, shape (n,)
        Greene's residue (NaN where the section map is not 2-D).
    stability : list of str
    multipliers : ndarray of complex, shape (n, d)
    arclength : ndarray, shape (n,)
        Distance along the family in (coordinates, parameter).
    bifurcations : list of dict
        ``{"kind": ..., "parameter": value, "between": (i, i + 1)}`` where the residue crosses
        0 (``"tangent (multiplier +1)"``) or 1 (``"period doubling (multiplier -1)"``), and
        ``"fold"`` where the parameter turns back.
    complete : bool
        False when the continuation stopped before the end of the span; ``note`` says why.
    """

    parameter: str
    values: np.ndarray
    states: np.ndarray
    period: np.ndarray
    residue: np.ndarray
    stability: list
    multipliers: np.ndarray
    arclength: np.ndarray
    bifurcations: list
    complete: bool = True
    note: str = ""
    first: PeriodicOrbit | None = None
    system: object = None
    params: dict = field(default_factory=dict)
    _members: list = field(default_factory=list)

    def __len__(self):
        return len(self.values)

    @property
    def orbits(self) -> list:
        """The members as :class:`PeriodicOrbit` objects (the first and every tenth, and
        those beside a bifurcation; use :meth:`orbit` for any)."""
        keep = {0, len(self.values) - 1} | set(range(0, len(self.values), 10))
        for b in self.bifurcations:
            keep |= set(b["between"])
        return [self.orbit(i) for i in sorted(keep) if i < len(self.values)]

    def orbit(self, i: int) -> PeriodicOrbit:
        """Member ``i`` as a :class:`PeriodicOrbit`."""
        ret, u, lam, shift = self._members[i]
        _set(ret, self.parameter, lam)
        img = ret.apply(u[None, :])
        return _assemble(ret, u, _image(img, 0), shift, 0.0, 0)

    def to_xarray(self):
        """The family as a labelled ``xarray.Dataset`` along dimension ``member``."""
        import xarray as xr

        from phaselab.compute.labels import netcdf_attrs, provenance

        names = [s.name for s in self.system.state_symbols]
        mult = np.atleast_2d(self.multipliers)
        ds = xr.Dataset(
            {"state": (("member", "component"), self.states),
             "period": (("member",), self.period),
             "residue": (("member",), self.residue),
             "stability": (("member",), np.array(self.stability, dtype=object)),
             "multiplier_real": (("member", "multiplier"), mult.real),
             "multiplier_imag": (("member", "multiplier"), mult.imag),
             "arclength": (("member",), self.arclength)},
            coords={self.parameter: (("member",), self.values), "component": names},
            attrs=netcdf_attrs(provenance(self.system, self.params, parameter=self.parameter,
                                          bifurcations=self.bifurcations, complete=self.complete,
                                          stopped=self.note)))
        return ds

    def plot(self, y="residue", **kwargs):
        """A stability diagram: the parameter against the residue (or ``y="period"``), stable
        and unstable members told apart by line style and marker, bifurcations marked."""
        from phaselab.export.families import family_figure

        return family_figure(self, y=y, **kwargs)

    def save(self, path, **kwargs):
        """Write the family: ``.nc``, ``.json`` or a stability diagram (``.svg``, ``.pdf``, ``.png``)."""
        from phaselab.export import save

        return save(self, path, **kwargs)

    def summary(self) -> dict:
        return {"parameter": self.parameter, "values": self.values.tolist(), "period": self.period.tolist(),
                "residue": [None if not np.isfinite(r) else float(r) for r in self.residue],
                "stability": self.stability, "bifurcations": self.bifurcations, "complete": self.complete,
                "note": self.note}

    def __repr__(self) -> str:
        bif = ", ".join(f"{b['kind']} at {self.parameter} = {b['parameter']:.8g}" for b in self.bifurcations)
        return (f"Family({len(self.values)} orbits, {self.parameter} from {self.values[0]:.8g} to "
                f"{self.values[-1]:.8g}" + (f"; {bif}" if bif else "") + ("" if self.complete else
                                                                              f"; stopped: {self.note}") + ")")


def _set(ret, name, value):
    if name == "energy":
        ret.energy = float(value)
        return
    i = [p.name for p in ret.system.parameters].index(name)
    ret.prm = ret.prm.copy()
    ret.prm[i] = value
    ret.params = dict(zip((p.name for p in ret.system.parameters), ret.prm.tolist()))
    if ret.kind == "stroboscopic":   # the drive's period may depend on the parameter
        ret.T = ret.system.driving_period(ret.params)
        ret.h = ret.T / ret.steps


def _get(ret, name):
    if name == "energy":
        return float(ret.energy)
    return float(ret.prm[[p.name for p in ret.system.parameters].index(name)])


def _residual_and_jacobian(ret, name, u, lam, shift):
    """F = P(u; lam) - u - shift (d,), dF/du (d, d), dF/dlam (d,), image status, period."""
    _set(ret, name, lam)
    img = ret.apply(u[None, :])
    if img.status[0] != codes.OK:
        return None
    F = img.u[0] - u - shift
    Ju = img.jacobian[0] - np.eye(len(u))
    if name == "energy":
        # d(image)/dE at fixed u, exactly: only the solved component of the start moves,
        # by 1 / (dH/dz_j)
        z, _, _ = ret.lift(u[None, :])
        f = ret.loops.evaluate("vector_field", z, ret.prm)[0]
        n = len(z[0]) // 2
        grad = np.concatenate([-f[n:], f[:n]])
        Fl = img.state_jacobian[0][:, ret.solve_index][ret.index] / grad[ret.solve_index]
    else:
        h = FD_STEP * max(1.0, abs(lam))
        _set(ret, name, lam + h)
        up = ret.apply(u[None, :])
        _set(ret, name, lam - h)
        dn = ret.apply(u[None, :])
        _set(ret, name, lam)
        if up.status[0] != codes.OK or dn.status[0] != codes.OK:
            return None
        Fl = (up.u[0] - dn.u[0]) / (2 * h)
    return F, Ju, Fl, img


def _tangent(Ju, Fl, previous=None, sign=1.0):
    A = np.hstack([Ju, Fl[:, None]])
    _, _, vt = np.linalg.svd(A)
    t = vt[-1]
    if previous is not None:
        if t @ previous < 0:
            t = -t
    elif t[-1] * sign < 0:
        t = -t
    return t / np.linalg.norm(t)


def continue_family(orbit: PeriodicOrbit, parameter, span, steps=200, ds=None, ds_max=None, tol=1e-10,
                    maxit=12) -> Family:
    """Follow the family of a periodic orbit along a parameter (or the energy).

    Parameters
    ----------
    orbit : PeriodicOrbit
        A member of the family (from :func:`phaselab.periodic_orbit`).
    parameter : str
        A model parameter, or ``"energy"`` for an orbit on a section plane of an autonomous
        flow.
    span : (float, float)
        The range of the parameter to cover; the continuation starts at the orbit's value
        (which must lie inside) and runs towards ``span[1]``, then from the start towards
        ``span[0]``.
    steps : int
        Most members in each direction.
    ds : float, optional
        First arclength step (default 1/50 of the span).
    ds_max : float, optional
        Largest step (default 1/10 of the span).
    tol : float
        Newton tolerance of the corrector.
    maxit : int
        Newton steps per member before the step is halved.

    Returns
    -------
    Family
    """
    inputs.instance(orbit, PeriodicOrbit, "orbit", "a PeriodicOrbit (from phaselab.periodic_orbit)")
    inputs.word(parameter, "parameter")
    lo, hi = inputs.pair(span, "span")
    tol, maxit = inputs.positive_number(tol, "tol"), inputs.count(maxit, "maxit", minimum=1, maximum=1000)
    system = orbit.system
    if parameter == "energy":
        if not isinstance(orbit.plane, dict):
            raise ModelError("the energy is a parameter of orbits on a section plane of an autonomous flow")
    elif parameter not in [p.name for p in system.parameters]:
        raise ParameterError(f"unknown parameter {parameter!r}; the model has: "
                             + ", ".join(["energy"] + [p.name for p in system.parameters]))
    steps = inputs.count(steps, "steps", minimum=1, maximum=100_000)
    inputs.check_budget(2 * steps, float(orbit.crossings) * (maxit + 1), 0, "continue_family")
    ret = orbit.return_map()
    lam0 = _get(ret, parameter)
    if not min(lo, hi) <= lam0 <= max(lo, hi):
        raise ParameterError(f"the orbit's {parameter} = {lam0:g} is outside the span ({lo:g}, {hi:g})")
    width = abs(hi - lo)
    ds = width / 50.0 if ds is None else inputs.positive_number(ds, "ds")
    ds_max = width / 10.0 if ds_max is None else inputs.positive_number(ds_max, "ds_max")
    u0 = ret.coordinates(orbit.points[:1])[0]
    shift = np.asarray(orbit.shift, dtype=float)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        ahead, note_a = _run(ret, parameter, u0, lam0, shift, hi, steps, ds, ds_max, tol, maxit)
        back, note_b = _run(ret, parameter, u0, lam0, shift, lo, steps, ds, ds_max, tol, maxit) \
            if lo != lam0 else ([], "")
    members = list(reversed(back[1:])) + ahead
    return _family(orbit, ret, parameter, shift, members, "; ".join(n for n in (note_b, note_a) if n))


def _run(ret, name, u0, lam0, shift, target, steps, ds, ds_max, tol, maxit):
    out = []
    first = _residual_and_jacobian(ret, name, u0, lam0, shift)
    if first is None:
        return [], "the return map fails at the starting orbit"
    F, Ju, Fl, img = first
    out.append((u0.copy(), lam0, img))
    direction = 1.0 if target >= lam0 else -1.0
    t = _tangent(Ju, Fl, sign=direction)
    x = np.concatenate([u0, [lam0]])
    h = ds
    note = ""
    for _ in range(steps):
        if (x[-1] - target) * direction >= 0:
            break
        pred = x + h * t
        done = None
        for _ in range(maxit):
            res = _residual_and_jacobian(ret, name, pred[:-1], pred[-1], shift)
            if res is None:
                break
            F, Ju, Fl, img = res
            G = np.concatenate([F, [t @ (pred - x) - h]])
            scale = 1.0 + np.max(np.abs(pred))
            if np.max(np.abs(G)) <= tol * scale:
                done = (pred, Ju, Fl, img)
                break
            A = np.vstack([np.hstack([Ju, Fl[:, None]]), t[None, :]])
            try:
                pred = pred - np.linalg.solve(A, G)
            except np.linalg.LinAlgError:
                break
        if done is None:
            h *= 0.5
            if h < 1e-9 * max(ds, 1e-300):
                note = f"the corrector did not converge near {name} = {x[-1]:.8g}"
                break
            continue
        x_new, Ju, Fl, img = done
        t = _tangent(Ju, Fl, previous=t)
        x = x_new
        out.append((x[:-1].copy(), x[-1], img))
        h = min(ds_max, h * 1.5)
    else:
        note = note or f"the step budget ended near {name} = {x[-1]:.8g}"
    return out, note


def _family(orbit, ret, name, shift, members, note) -> Family:
    values = np.array([m[1] for m in members])
    states = np.array([ret.lift(m[0][None, :])[0][0] for m in members])
    period = np.array([float(m[2].time[0]) for m in members])
    mons = [m[2].jacobian[0] for m in members]
    info = [classify(M) for M in mons]
    residue = np.array([np.nan if r is None else r for _, _, r, _ in info])
    d = mons[0].shape[0] if mons else 0
    mult = np.array([np.pad(mu, (0, d - len(mu)), constant_values=np.nan) for mu, _, _, _ in info]) \
        if d else np.zeros((len(members), 0), complex)
    xs = np.array([np.concatenate([m[0], [m[1]]]) for m in members])
    arc = np.concatenate([[0.0], np.cumsum(np.linalg.norm(np.diff(xs, axis=0), axis=1))]) if len(xs) else xs
    bif = []
    for i in range(len(values) - 1):
        for level, kind in ((0.0, "tangent (multiplier +1)"), (1.0, "period doubling (multiplier -1)")):
            a, b = residue[i] - level, residue[i + 1] - level
            if np.isfinite(a) and np.isfinite(b) and a * b < 0:
                where = values[i] + (values[i + 1] - values[i]) * a / (a - b)
                bif.append({"kind": kind, "parameter": float(where), "between": (i, i + 1)})
        if 0 < i < len(values) - 1 and (values[i] - values[i - 1]) * (values[i + 1] - values[i]) < 0:
            bif.append({"kind": "fold", "parameter": float(values[i]), "between": (i - 1, i + 1)})
    fam = Family(parameter=name, values=values, states=states, period=period, residue=residue,
                 stability=[w for _, w, _, _ in info], multipliers=mult, arclength=arc, bifurcations=bif,
                 complete=not note, note=note, first=orbit, system=orbit.system, params=dict(orbit.params))
    fam._members = [(ret, m[0], m[1], shift) for m in members]
    return fam
