"""Stable and unstable manifolds of unstable periodic orbits of maps and section maps.

The one-dimensional unstable manifold of a hyperbolic fixed point u* of a 2-D map P is grown
from its linear approximation: a fundamental domain, the short segment from u* + s0 v to
u* + s0 |lambda| v along the unstable eigenvector v, is iterated; each new piece is the image
of the previous one. Where two neighbouring images lie farther apart than ``max_segment`` or
the curve bends by more than ``max_angle`` between segments, a point is inserted: its
preimage is interpolated on the previous piece and mapped once. Interpolation errors are
transverse to the manifold, where the map contracts them, so the refined curve stays on
the manifold through the folds of a homoclinic tangle (the adaptive scheme of Hobson 1993,
J. Comput. Phys. 104, 14; see also Krauskopf & Osinga 1998, J. Comput. Phys. 146, 404).

The stable manifold is the unstable manifold of the inverse map. A negative multiplier
(inverse-unstable orbit) flips the branch from side to side, so the square of the map is
used. For flows the map is the section map at fixed energy (:mod:`phaselab.structures.returns`):
the manifolds of an unstable periodic orbit are the same computation on its section.

These are model results: where they inform a design (transfer tubes of a spacecraft
mission, the edge of a stable region) confirm them with validated tools and the responsible
engineers.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from phaselab.engine import inputs, limits
from phaselab.engine import status as codes
from phaselab.errors import ModelError
from phaselab.structures.periodic.result import PeriodicOrbit
from phaselab.engine.provenance import cf_dataset

BRANCHES = ("unstable", "stable")


@dataclass(repr=False)
class Manifold:
    """A stable or unstable manifold branch of a periodic orbit.

    Attributes
    ----------
    orbit : PeriodicOrbit
    branch : str
        ``"unstable"`` or ``"stable"``.
    side : int
        +1 or -1: which half of the branch (along or against the eigenvector).
    branches : list of ndarray, shape (n_points, 2n)
        Polylines of full states, one per orbit point (a period-k orbit has k), split where
        a wrapped coordinate jumps across its interval. A map's wrapped components are
        wrapped by its modulus; for a flow, a coordinate in which the orbit winds (its
        ``shift``) is wrapped modulo that advance, into the interval that starts at the orbit
        point and extends the way the branch leaves it (so a separatrix lobe from an X-point
        to its next copy is one piece).
    lifted : list of ndarray, shape (n_points, d)
        The same curves in reduced coordinates, unwrapped (what was grown).
    eigenvalue : float
        The multiplier along the branch (of the map that grew it).
    length : float
        Arclength grown per orbit point, in reduced coordinates.
    max_segment : float
        Longest segment allowed between neighbouring points.
    complete : bool
        False where growth stopped early (points left the box or the energy shell, or the
        point cap was reached); ``note`` says why.
    note : str
    """

    orbit: object
    branch: str
    side: int
    branches: list
    lifted: list
    eigenvalue: float
    length: float
    max_segment: float
    complete: bool = True
    note: str = ""
    coordinates: tuple = field(default_factory=tuple)

    @property
    def n_points(self) -> int:
        return int(sum(len(b) for b in self.lifted))

    def to_xarray(self):
        """The curves as an ``xarray.Dataset`` (dimensions ``curve`` and ``point``, NaN padded)."""
        import xarray as xr

        names = [s.name for s in self.orbit.system.state_symbols]
        size = max(len(b) for b in self.branches)
        arr = np.full((len(self.branches), size, len(names)), np.nan)
        for c, b in enumerate(self.branches):
            arr[c, :len(b)] = b
        return cf_dataset(xr.Dataset({"points": (("curve", "point", "component"), arr)},
                          coords={"component": names},
                          attrs={"branch": self.branch, "side": self.side, "eigenvalue": self.eigenvalue,
                                 "max_segment": self.max_segment, "complete": int(self.complete),
                                 "note": self.note, "model_note": "model results: confirm with validated tools"}))

    def plot(self, *, section=None, **kwargs):
        """A static figure of the branch with its orbit, over a section if one is given."""
        from phaselab.export.structures import structure_figure

        return structure_figure([self, self.orbit], section=section, **kwargs)

    def save(self, path, **kwargs):
        """Write the manifold: ``.nc``, ``.json`` or a figure (``section=`` draws it over one)."""
        from phaselab.export import save

        return save(self, path, **kwargs)

    def summary(self) -> dict:
        names = [s.name for s in self.orbit.system.state_symbols]
        return {"branch": self.branch, "side": self.side, "eigenvalue": self.eigenvalue,
                "length": self.length, "max_segment": self.max_segment, "complete": self.complete,
                "note": self.note,
                "curves": [{n: b[:, c].tolist() for c, n in enumerate(names)} for b in self.branches]}

    def __repr__(self) -> str:
        state = "" if self.complete else f"; stopped early: {self.note}"
        return (f"Manifold({self.branch} branch, side {self.side:+d}, {len(self.lifted)} curve(s), "
                f"{self.n_points} points, length {self.length:.4g} each, multiplier {self.eigenvalue:.6g}"
                f"{state})")


def _eigen(M, branch):
    vals, vecs = np.linalg.eig(M)
    if np.any(np.abs(vals.imag) > 1e-12 * np.abs(vals)):
        raise ModelError("the orbit is not hyperbolic (complex multipliers): it has no 1-D manifolds")
    vals = vals.real
    order = np.argsort(np.abs(vals))
    lam_s, lam_u = vals[order[0]], vals[order[-1]]
    if not abs(lam_u) > 1.0 + 1e-9:
        raise ModelError("the orbit is not unstable (no multiplier larger than 1 in size)")
    if branch == "unstable":
        return lam_u, vecs[:, order[-1]].real
    return 1.0 / lam_s, vecs[:, order[0]].real


def manifold(orbit, *, branch="unstable", side=+1, length=10.0, max_segment=None, max_angle=0.3,
             first=None, point=None, max_points=2_000_000, min_segment=None) -> Manifold:
    """Grow the stable or unstable manifold of an unstable periodic orbit.

    Parameters
    ----------
    orbit : PeriodicOrbit
        Unstable or inverse-unstable, with a 2-D section map (a 2-D map, a 2-dof flow on a
        plane at fixed energy, a 1-dof driven system).
    branch : {"unstable", "stable"}
    side : {+1, -1}
        Which half: along or against the eigenvector.
    length : float
        Arclength to grow from each orbit point, in the reduced coordinates.
    max_segment : float, optional
        Longest segment between neighbouring points (default length / 2000).
    max_angle : float
        Largest turn of the curve at a point, in radians.
    first : float, optional
        Distance of the fundamental domain from the orbit point (default 1e-6 of the
        orbit's size, so the linear approximation errs far below ``max_segment``).
    point : int, optional
        Grow from this point of the orbit only (default: every point).
    max_points : int
        Cap on the points of one curve.
    min_segment : float, optional
        Segments shorter than this are not split further (default max_segment / 1000).

    Returns
    -------
    Manifold
    """
    inputs.instance(orbit, PeriodicOrbit, "orbit", "a PeriodicOrbit (from phaselab.periodic_orbit)")
    inputs.word(branch, "branch", BRANCHES)
    side = inputs.direction(side)
    length = inputs.positive_number(length, "length")
    max_segment = length / 2000.0 if max_segment is None else inputs.positive_number(max_segment, "max_segment")
    min_segment = max_segment / 1000.0 if min_segment is None else inputs.positive_number(min_segment,
                                                                                          "min_segment")
    max_angle = inputs.positive_number(max_angle, "max_angle")
    max_points = inputs.count(max_points, "max_points", minimum=10)
    limits.curve_budget(length, max_segment, 1.0 + float(np.max(np.abs(orbit.points))), max_points,
                        len(orbit.points) if point is None else 1, "manifold")
    if orbit.stability not in ("unstable", "inverse-unstable"):
        raise ModelError(f"the orbit is {orbit.stability}: only unstable orbits have stable and unstable "
                         "manifolds")
    M = np.atleast_2d(orbit.monodromy)
    if M.shape != (2, 2):
        raise ModelError(f"manifolds are grown for 2-D section maps; this orbit's section map is "
                         f"{M.shape[0]}-dimensional")
    k = orbit.crossings
    square = orbit.stability == "inverse-unstable"
    ret = orbit.return_map(2 * k if square else k)
    points = range(len(orbit.points)) if point is None else [inputs.count(point, "point", 0,
                                                                          len(orbit.points) - 1)]
    scale = 1.0 + float(np.max(np.abs(orbit.points)))
    s0 = 1e-6 * scale if first is None else inputs.positive_number(first, "first")
    curves, notes, lam_used = [], [], np.nan
    for j in points:
        u_star = ret.coordinates(orbit.points[j:j + 1])[0]
        img = ret.apply(u_star[None, :])
        if img.status[0] != codes.OK:
            raise ModelError(f"the return map cannot be applied at orbit point {j}: "
                             f"{codes.STATUS.get(int(img.status[0]), 'off the energy shell')}")
        lam, v = _eigen(img.jacobian[0], branch)
        lam_used = lam
        turns = ret.winding(img.u[0] - u_star, _orbit_shift(orbit, ret.dim, 2 if square else 1))
        step = _lifted_map(ret, turns, inverse=branch == "stable")
        curve, note = _grow(step, u_star, side * v / np.linalg.norm(v), abs(lam), s0, length, max_segment,
                            min_segment, max_angle, max_points)
        curves.append(curve)
        if note:
            notes.append(f"point {j}: {note}")
    branches = []
    for curve in curves:
        z, _, valid = ret.lift(curve)
        z = z[valid]
        if np.any(ret.period > 0):      # the model's angles: a map's modulus, a flow's angles=
            branches += _split_wrapped(ret, z)
        else:                           # a flow wound by its orbit's shift in an undeclared angle
            branches += _split_wound(ret, z, curve[valid], _orbit_shift(orbit, ret.dim, 1))
    lengths = [float(np.sum(np.linalg.norm(np.diff(c, axis=0), axis=1))) for c in curves]
    return Manifold(orbit=orbit, branch=branch, side=side, branches=branches, lifted=curves,
                    eigenvalue=float(lam_used), length=float(min(lengths)) if lengths else 0.0,
                    max_segment=max_segment, complete=not notes, note="; ".join(notes),
                    coordinates=ret.names)


def _orbit_shift(orbit, d, times):
    """The orbit's advance per ``times`` of its periods in the ``d`` reduced coordinates, or
    None where the orbit records none."""
    shift = getattr(orbit, "shift", None)
    if shift is None or np.shape(shift) != (d,):
        return None
    return times * np.asarray(shift, dtype=float)


def _lifted_map(ret, shift, inverse):
    """The return map (or its inverse) on batches of coordinates, with the orbit's winding
    ``shift`` (shape (d,), :meth:`ReturnMap.winding`) taken out so that the orbit point is
    a fixed point of it: ``step(u) -> (images, status)``."""

    def step(u):
        img, status = ret.images(u, inverse=inverse)
        return (img + shift if inverse else img - shift), status

    return step


def _grow(step, u_star, v, lam, s0, length, max_segment, min_segment, max_angle, max_points):
    """One branch from one orbit point, in reduced coordinates (unwrapped)."""
    # fundamental domain: s0 .. s0 * lam along v, geometric spacing, dense enough
    n0 = max(8, int(np.ceil(s0 * (lam - 1.0) / (0.25 * max_segment))) + 1)
    n0 = min(n0, 2000)
    s = s0 * lam ** np.linspace(0.0, 1.0, n0)
    piece = u_star[None, :] + s[:, None] * v[None, :]
    curve = [u_star[None, :], piece]
    total = float(np.sum(np.linalg.norm(np.diff(np.vstack(curve), axis=0), axis=1)))
    note = ""
    while total < length:
        pre = piece
        img, status = step(pre)
        ok = status == codes.OK
        if not ok.all():
            stop = int(np.argmin(ok))
            pre, img = pre[:stop], img[:stop]
            note = _stop_reason(status[stop])
        if len(img) < 2:
            note = note or "the map could not be applied"
            break
        img = _refine(step, pre, img, max_segment, min_segment, max_angle, max_points)
        seg = np.linalg.norm(np.diff(img, axis=0), axis=1)
        gained = float(seg.sum())
        if total + gained > length:   # keep the part up to the requested length
            cut = int(np.searchsorted(np.cumsum(seg), length - total)) + 1
            img = img[:cut + 1]
            gained = float(np.sum(np.linalg.norm(np.diff(img, axis=0), axis=1)))
        curve.append(img[1:])
        total += gained
        piece = img
        count = sum(len(c) for c in curve)
        if count >= max_points:
            note = f"the point cap ({max_points}) was reached"
            break
        if note:
            break
    return np.vstack(curve), note


def _stop_reason(code) -> str:
    from phaselab.structures.returns import OFF_SHELL

    if code == OFF_SHELL:
        return "the curve left the energy shell"
    return "the curve " + codes.STATUS.get(int(code), f"stopped ({int(code)})")


def _refine(step, pre, img, max_segment, min_segment, max_angle, max_points):
    """Insert points between neighbouring images that are too far apart or where the curve
    turns too sharply; each new point is the image of the midpoint of its preimages."""
    for _ in range(60):
        d = np.diff(img, axis=0)
        seg = np.linalg.norm(d, axis=1)
        bad = seg > max_segment
        if len(img) > 2:
            a, b = d[:-1], d[1:]
            cosang = np.einsum("ij,ij->i", a, b) / np.maximum(seg[:-1] * seg[1:], 1e-300)
            turn = np.arccos(np.clip(cosang, -1.0, 1.0)) > max_angle
            bad[:-1] |= turn
            bad[1:] |= turn
        bad &= seg > min_segment
        if not bad.any() or len(img) >= max_points:
            return img
        idx = np.flatnonzero(bad)
        mid_pre = _midpoints(pre, idx)
        mid_img, status = step(mid_pre)
        good = status == codes.OK
        idx, mid_pre, mid_img = idx[good], mid_pre[good], mid_img[good]
        if idx.size == 0:
            return img
        pre = np.insert(pre, idx + 1, mid_pre, axis=0)
        img = np.insert(img, idx + 1, mid_img, axis=0)
    return img


def _midpoints(pre, idx):
    """Points half way (in arclength) between ``pre[i]`` and ``pre[i + 1]`` for ``i`` in
    ``idx``, on the cubic through the four neighbours parametrised by chord length (the
    quadratic through three at the ends, the chord for a two-point curve): the error is
    O(h^3) in the spacing h, so inserted points sit on the manifold to rounding."""
    n = len(pre)
    if n < 3:
        return 0.5 * (pre[idx] + pre[idx + 1])
    lo = np.clip(idx - 1, 0, n - 4 if n >= 4 else 0)
    width = 4 if n >= 4 else 3
    nodes = lo[:, None] + np.arange(width)[None, :]
    P = pre[nodes]                                             # (k, width, d)
    chord = np.linalg.norm(np.diff(P, axis=1), axis=2)
    t = np.concatenate([np.zeros((len(idx), 1)), np.cumsum(chord, axis=1)], axis=1)
    j = idx - lo                                               # position of pre[i] among the nodes
    rows = np.arange(len(idx))
    t_mid = 0.5 * (t[rows, j] + t[rows, j + 1])
    out = np.zeros((len(idx), pre.shape[1]))
    for a in range(width):
        w = np.ones(len(idx))
        for b in range(width):
            if b != a:
                denom = t[:, a] - t[:, b]
                w *= (t_mid - t[:, b]) / np.where(denom == 0, 1.0, denom)
        out += w[:, None] * P[:, a]
    bad = ~np.all(np.isfinite(out), axis=1)
    out[bad] = 0.5 * (pre[idx[bad]] + pre[idx[bad] + 1])
    return out


def _split_wrapped(ret, z):
    """Split a polyline of states where a wrapped coordinate jumps (after wrapping)."""
    if not np.any(ret.period > 0):
        return [z]
    w = ret.wrap(z)
    jumps = np.zeros(len(w) - 1, dtype=bool)
    for j, p in enumerate(ret.period):
        if p > 0:
            jumps |= np.abs(np.diff(w[:, ret.index[j]])) > 0.5 * p
    cuts = np.flatnonzero(jumps) + 1
    return [piece for piece in np.split(w, cuts) if len(piece) > 1]


def _split_wound(ret, z, u, shift):
    """Wrap and split a flow's polyline of states ``z`` (N, m), grown as ``u`` (N, d) from the
    orbit point ``u[0]``: each reduced coordinate in which the orbit winds by ``shift`` is
    brought into the interval of that length that starts at ``u[0]`` and extends the way the
    curve first leaves it; the curve is cut where it crosses an end of that interval."""
    if shift is None or not np.any(shift != 0) or len(z) < 2:
        return [z]
    w = np.array(z, dtype=float, copy=True)
    jumps = np.zeros(len(w) - 1, dtype=bool)
    for c in np.flatnonzero(shift != 0):
        p, start = abs(float(shift[c])), float(u[0, c])
        moved = u[:, c] - start
        first = moved[np.flatnonzero(np.abs(moved) > 1e-12 * p)[:1]]
        j = ret.index[c]
        if first.size and first[0] < 0:
            w[:, j] = start - np.mod(start - w[:, j], p)    # the interval (start - p, start]
        else:
            w[:, j] = start + np.mod(w[:, j] - start, p)    # the interval [start, start + p)
        jumps |= np.abs(np.diff(w[:, j])) > 0.5 * p
    cuts = np.flatnonzero(jumps) + 1
    return [piece for piece in np.split(w, cuts) if len(piece) > 1]
