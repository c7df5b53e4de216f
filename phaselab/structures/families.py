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

Each member is recorded, with its full state lifted at its own parameter (energy), when the
corrector accepts it; a step that would pass an end of the span is cut to land on it.

Along the family each pair of multipliers (lambda, 1/lambda) of the monodromy has its
stability index b = lambda + 1/lambda (Broucke 1969, :mod:`phaselab.structures.multipliers`),
in any dimension; for a 2-D section map b = tr M = 2 - 4 R with Greene's residue R, which is
kept too (Greene 1979). Where a pair's b crosses 2 a multiplier passes +1 (a tangent or
pitchfork bifurcation, a fold of the family, or the vertical bifurcation of a planar family
of a spatial problem), where it crosses -2 a multiplier passes -1 (period doubling); on
request where it crosses 2 cos(2 pi p/q) (a resonance), and where two pairs collide and
leave the unit circle (a Krein collision). All are flagged with the pair that changed,
located by linear interpolation between neighbouring members.

These are model results; where a family informs a design (a mission's orbit family, the
working range of a machine) confirm it with validated tools and the responsible engineers.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import numpy as np

from phaselab.engine import status as codes

from phaselab.engine import inputs, limits

from phaselab.structures import multipliers
from phaselab.structures.periodic.assembly import assemble, image_of
from phaselab.structures.periodic.result import PeriodicOrbit, classify
from phaselab.errors import ModelError, ParameterError
from phaselab.engine.provenance import cf_dataset

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
    stability_indices : ndarray of complex, shape (n, d/2)
        Broucke's stability index b = lambda + 1/lambda of each multiplier pair
        (:mod:`phaselab.structures.multipliers`); a pair keeps its column along the family.
        Real for a pair on the unit circle (|b| < 2) or on the real axis (|b| > 2), complex
        for a quartet; b = tr M = 2 - 4 R for a 2-D section map.
    bifurcations : list of dict
        ``{"kind": ..., "parameter": value, "between": (i, i + 1), "pair": k, "index":
        (b_i, b_i+1), "coordinates": [...]}`` where the index of pair ``k`` (its column of
        ``stability_indices``; ``coordinates`` the reduced coordinates its eigenvectors
        mostly lie in) crosses 2 (``"tangent (multiplier +1)"``: a fold, a pitchfork, or a
        family born out of the plane), -2 (``"period doubling (multiplier -1)"``) or, when
        asked, 2 cos(2 pi p/q) (``"resonance p/q ..."``); where two pairs meet and leave
        the unit circle (``"Krein collision ..."``, with ``"pairs": (k, l)``) or come back;
        and ``"fold"`` where the parameter turns back. Located by linear interpolation
        between the neighbouring members. For a 2-D section map the index crosses 2 where
        the residue crosses 0, and -2 where it crosses 1.
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
    stability_indices: np.ndarray = field(default_factory=lambda: np.zeros((0, 0), complex))
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
        return assemble(ret, u, image_of(img, 0), shift, 0.0, 0)

    def to_xarray(self):
        """The family as a labelled ``xarray.Dataset`` along dimension ``member``."""
        import xarray as xr

        from phaselab.engine.provenance import netcdf_attrs, provenance

        names = [s.name for s in self.system.state_symbols]
        mult = np.atleast_2d(self.multipliers)
        idx = np.asarray(self.stability_indices, dtype=complex)
        idx = idx.reshape(len(self.values), -1) if idx.size else np.zeros((len(self.values), 0), complex)
        ds = xr.Dataset(
            {"state": (("member", "component"), self.states),
             "period": (("member",), self.period),
             "residue": (("member",), self.residue),
             "stability": (("member",), np.array(self.stability, dtype=object)),
             "multiplier_real": (("member", "multiplier"), mult.real),
             "multiplier_imag": (("member", "multiplier"), mult.imag),
             "stability_index_real": (("member", "pair"), idx.real),
             "stability_index_imag": (("member", "pair"), idx.imag),
             "arclength": (("member",), self.arclength)},
            coords={self.parameter: (("member",), self.values), "component": names},
            attrs=netcdf_attrs(provenance(self.system, self.params, parameter=self.parameter,
                                          bifurcations=self.bifurcations, complete=self.complete,
                                          stopped=self.note)))
        return cf_dataset(ds)

    def plot(self, *, y=None, **kwargs):
        """A stability diagram: the parameter against the residue (``y="residue"``, the
        default for 2-D section maps), the stability index of each multiplier pair
        (``y="index"``, the default otherwise) or ``y="period"``; stable and unstable
        members told apart by line style and marker, bifurcations marked."""
        from phaselab.export.families import family_figure

        return family_figure(self, y=y, **kwargs)

    def save(self, path, **kwargs):
        """Write the family: ``.nc``, ``.json`` or a stability diagram (``.svg``, ``.pdf``, ``.png``)."""
        from phaselab.export import save

        return save(self, path, **kwargs)

    def summary(self) -> dict:
        return {"parameter": self.parameter, "values": self.values.tolist(), "period": self.period.tolist(),
                "residue": [None if not np.isfinite(r) else float(r) for r in self.residue],
                "stability_index": [[multipliers.plain_index(b) for b in row] for row in self.stability_indices],
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


def continue_family(orbit: PeriodicOrbit, parameter, span, *, steps=200, ds=None, ds_max=None,
                    tol=1e-10, maxit=12, resonances=None) -> Family:
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
        ``span[0]``. A step that would pass an end is cut to land on it: the family ends
        at the span's ends, or stops before and says why (``complete``, ``note``).
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
    resonances : int, optional
        Also flag a multiplier pair passing exp(+-2 pi i p/q) for 3 <= q <= ``resonances``.

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
    resonances = 0 if resonances is None else inputs.count(resonances, "resonances", minimum=3, maximum=64)
    limits.check_budget(2 * steps, float(orbit.crossings) * (maxit + 1), 0, "continue_family")
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
        ahead, note_a = _run(ret, parameter, u0, lam0, shift, (lo, hi), hi, steps, ds, ds_max, tol, maxit)
        back, note_b = _run(ret, parameter, u0, lam0, shift, (lo, hi), lo, steps, ds, ds_max, tol, maxit) \
            if lo != lam0 else ([], "")
    members = list(reversed(back[1:])) + ahead
    return _family(orbit, ret, parameter, shift, members, "; ".join(n for n in (note_b, note_a) if n),
                   resonances)


def _run(ret, name, u0, lam0, shift, span, target, steps, ds, ds_max, tol, maxit):
    """Members from (u0, lam0) towards ``target`` (an end of ``span``): a list of
    ``(u, lam, images, state)`` and a note (empty when the end was reached).

    Each member is recorded when it is accepted, with its full state lifted at its own
    parameter (energy). A step whose predictor would pass an end of the span is cut to land
    on it and corrected at that parameter, so the last member sits at the span's end; a
    family that turns back at a fold and leaves the span at its other end stops there."""
    lo, hi = min(span), max(span)
    first = _residual_and_jacobian(ret, name, u0, lam0, shift)
    if first is None:
        return [], "the return map fails at the starting orbit"
    F, Ju, Fl, img = first
    out = [_member(ret, name, u0, lam0, img)]
    direction = 1.0 if target >= lam0 else -1.0
    t = _tangent(Ju, Fl, sign=direction)
    x = np.concatenate([u0, [lam0]])
    h = ds
    note = ""
    if (x[-1] - target) * direction >= 0:
        return out, note
    for _ in range(steps):
        pred = x + h * t
        done = None
        if lo <= pred[-1] <= hi:
            done = _correct(ret, name, pred, shift, tol, maxit, plane=(t, x, h))
        outside = pred[-1] if done is None else done[0][-1]
        if not lo <= outside <= hi:
            end = lo if outside < lo else hi
            done = None
            if (end - x[-1]) * t[-1] > 0:      # land on the end the step would pass
                cut = x + (end - x[-1]) / t[-1] * t
                cut[-1] = end
                done = _correct(ret, name, cut, shift, tol, maxit, fixed=end)
        if done is None:
            h *= 0.5
            if h < 1e-9 * max(ds, 1e-300):
                note = f"the corrector did not converge near {name} = {x[-1]:.8g}"
                break
            continue
        x_new, Ju, Fl, img = done
        t = _tangent(Ju, Fl, previous=t)
        x = x_new
        out.append(_member(ret, name, x[:-1], x[-1], img))
        if x[-1] == target:
            break
        if x[-1] in (lo, hi):
            note = (f"the family turned back (a fold) and left the span at {name} = {x[-1]:.8g} "
                    f"before reaching {target:.8g}")
            break
        h = min(ds_max, h * 1.5)
    else:
        note = f"the step budget ended near {name} = {x[-1]:.8g} before {target:.8g}"
    return out, note


def _correct(ret, name, pred, shift, tol, maxit, plane=None, fixed=None):
    """Newton's method from the predictor ``pred`` = (u, lam) on the fixed-point equations
    with one more row: the pseudo-arclength plane ``t . (x - x0) = h`` (``plane`` =
    (t, x0, h)) or the parameter held at ``fixed``. ``(x, dF/du, dF/dlam, images)`` or
    None."""
    pred = pred.copy()
    for _ in range(maxit):
        res = _residual_and_jacobian(ret, name, pred[:-1], pred[-1], shift)
        if res is None:
            return None
        F, Ju, Fl, img = res
        if plane is not None:
            t, x0, h = plane
            row, extra = t, t @ (pred - x0) - h
        else:
            row, extra = np.zeros(len(pred)), pred[-1] - fixed
            row[-1] = 1.0
        G = np.concatenate([F, [extra]])
        if np.max(np.abs(G)) <= tol * (1.0 + np.max(np.abs(pred))):
            return pred, Ju, Fl, img
        A = np.vstack([np.hstack([Ju, Fl[:, None]]), row[None, :]])
        try:
            pred = pred - np.linalg.solve(A, G)
        except np.linalg.LinAlgError:
            return None
        if fixed is not None:
            pred[-1] = fixed
    return None


def _member(ret, name, u, lam, img):
    """An accepted member: its coordinates, parameter, images and full state, lifted with
    the return map set to the member's own parameter (energy)."""
    _set(ret, name, lam)
    state = ret.lift(np.asarray(u, dtype=float)[None, :])[0][0]
    return np.array(u, dtype=float), float(lam), img, np.array(state, dtype=float)


def _family(orbit, ret, name, shift, members, note, resonances=0) -> Family:
    values = np.array([m[1] for m in members])
    states = np.array([m[3] for m in members])
    if len(states):
        states = ret.wrap(states)      # the model's angles into their intervals, as orbit points are
    period = np.array([float(m[2].time[0]) for m in members])
    mons = [m[2].jacobian[0] for m in members]
    info = [classify(M) for M in mons]
    residue = np.array([np.nan if r is None else r for _, _, r, _ in info])
    d = mons[0].shape[0] if mons else 0
    mult = np.array([np.pad(mu, (0, d - len(mu)), constant_values=np.nan) for mu, _, _, _ in info]) \
        if d else np.zeros((len(members), 0), complex)
    pairs = _tracked_pairs(mons)
    indices = np.array([p.indices for p in pairs]) if pairs else np.zeros((0, 0), complex)
    xs = np.array([np.concatenate([m[0], [m[1]]]) for m in members])
    arc = np.concatenate([[0.0], np.cumsum(np.linalg.norm(np.diff(xs, axis=0), axis=1))]) if len(xs) else xs
    names = [multipliers.dominant(p.weights, ret.names) for p in pairs]
    bif = multipliers.crossings(values, indices, names, resonances) if len(members) else []
    for i in range(1, len(values) - 1):
        if (values[i] - values[i - 1]) * (values[i + 1] - values[i]) < 0:
            bif.append({"kind": "fold", "parameter": float(values[i]), "between": (i - 1, i + 1)})
    bif.sort(key=lambda b: (b["between"][0] + (b["kind"] == "fold"), b["kind"] == "fold"))
    fam = Family(parameter=name, values=values, states=states, period=period, residue=residue,
                 stability=[w for _, w, _, _ in info], multipliers=mult, arclength=arc, bifurcations=bif,
                 complete=not note, note=note, first=orbit, system=orbit.system, params=dict(orbit.params),
                 stability_indices=indices)
    fam._members = [(ret, m[0], m[1], shift) for m in members]
    return fam


def _tracked_pairs(mons) -> list:
    """The multiplier pairs of each member's monodromy, each pair kept in its column along
    the family (matched to the nearest index of the member before)."""
    out = []
    for M in mons:
        p = multipliers.multiplier_pairs(M)
        if out:
            p = p.take(multipliers.track(out[-1].indices, p.indices))
        out.append(p)
    return out


# ----------------------------------------------------------------------------- for branch switching
def correct(ret, name, pred, shift, *, tol, maxit, plane=None, fixed=None):
    """The continuation's corrector for :mod:`phaselab.structures.branching`: Newton's
    method from ``pred`` = (u, lam) (shape (d + 1,)) on P(u; lam) - u - shift = 0 with the
    row ``t . (x - x0) = h`` (``plane`` = (t, x0, h)) or the parameter held at ``fixed``.
    ``(x, dF/du, dF/dlam, images)`` or None where it does not converge."""
    return _correct(ret, name, pred, shift, tol, maxit, plane=plane, fixed=fixed)


def set_value(ret, name, value) -> None:
    """Set the return map's parameter ``name`` (or ``"energy"``) to ``value``."""
    _set(ret, name, value)
