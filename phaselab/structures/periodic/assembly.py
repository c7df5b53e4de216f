"""From a converged solution to a :class:`~phaselab.structures.periodic.result.PeriodicOrbit`:
the legs of a multiple-shooting start, the monodromy of the whole orbit, its points and settings."""

from __future__ import annotations

import warnings

import numpy as np

from phaselab.engine import inputs
from phaselab.engine import status as codes
from phaselab.errors import ParameterError
from phaselab.structures.multipliers import multiplier_pairs
from phaselab.structures.periodic.result import PeriodicOrbit, classify
from phaselab.structures.periodic.symmetries import reduced_monodromy
from phaselab.structures.returns import ReturnMap


# ----------------------------------------------------------------------------- assembling
def given_shift(ret: ReturnMap, shift) -> np.ndarray:
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


def shooting_legs(ret1: ReturnMap, u0, k: int, shift):
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
        shifts[:, -1] = given_shift(ret1, shift)
    elif np.any(ret1.period > 0):
        # the legs follow the unwrapped iterates (lifted angles of a flow), so only the last one winds
        wraps = ret1.period > 0
        adv = np.where(np.isfinite(last), last - U[:, 0], 0.0)
        shifts[:, -1, wraps] = np.round(adv[:, wraps] / ret1.period[wraps]) * ret1.period[wraps]
    return U, shifts, status


def assemble(ret: ReturnMap, u, images, shift, residual, iterations) -> PeriodicOrbit:
    """A PeriodicOrbit from a fixed point ``u`` of the k-th return map ``ret`` (single
    shooting; its points are found by sectioning the orbit)."""
    z0 = ret.lift(u[None, :])[0][0]
    points = orbit_points(ret, z0)
    return make_orbit(ret, ret.k, points, images.jacobian, float(images.time), shift, residual, iterations)


def assemble_shooting(ret1: ReturnMap, U, images, shifts, residual, iterations, symmetry=None) -> PeriodicOrbit:
    """A PeriodicOrbit from the k points ``U`` (k, d) of a multiple-shooting solution; with a
    ``symmetry`` its stability is that of the reduced monodromy."""
    k = U.shape[0]
    M = np.eye(ret1.dim)
    for i in range(k):
        M = images.jacobian[i] @ M
    z = ret1.wrap(ret1.lift(U)[0])
    reduced, count = None, 0
    if symmetry is not None and symmetry.count:
        G, C = symmetry.directions(U[:1])[0]
        reduced = reduced_monodromy(M, G, C)
        count = len(G) if reduced is not None else 0
    return make_orbit(ret1, k, z, M, float(np.sum(images.time)), shifts.sum(axis=0), residual, iterations,
                  reduced=reduced, symmetries=count)


def make_orbit(ret, k, points, M, period, shift, residual, iterations, reduced=None, symmetries=0) -> PeriodicOrbit:
    from phaselab.orbits.trajectory import trajectory

    system = ret.system
    mult, word, residue, rotation = classify(M if reduced is None else reduced)
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
        dt=float(getattr(ret, "h", float("nan"))), settings=settings_of(ret),
        stability_indices=multiplier_pairs(M if reduced is None else reduced).indices,
        symmetries=int(symmetries))


def settings_of(ret: ReturnMap) -> dict:
    """What rebuilds the same return map (see :meth:`PeriodicOrbit.return_map`)."""
    out = {"box": (ret.box_lo, ret.box_hi)}
    if ret.kind == "plane":
        out.update(plane=ret.plane, energy=ret.energy, direction=ret.direction,
                   solve_for=ret.system.state_symbols[ret.solve_index].name, dt=ret.h,
                   method=ret.method.name, t_max=ret.t_max)
    elif ret.kind == "stroboscopic":
        out.update(dt=ret.h, method=ret.method.name)
    return out


def orbit_points(ret: ReturnMap, z0) -> np.ndarray:
    """The k points of the orbit through ``z0`` on its section (single shooting)."""
    from phaselab.orbits.section import section

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
                sec = section(system, z0, plane="stroboscopic", crossings=k - 1, params=ret.params,
                              dt=ret.h, method=ret.method.name)
                pts = np.vstack([z0, sec.points[0]])
            else:
                sec = section(system, z0, plane=ret.plane, direction=ret.direction, crossings=k - 1,
                              params=ret.params, dt=ret.h, method=ret.method.name, t_max=ret.t_max)
                pts = np.vstack([z0, sec.points[0]])
    pts = ret.wrap(pts)      # the model's angles (a map's modulus, a flow's angles)
    return np.ascontiguousarray(pts)


def image_of(images, i):
    from phaselab.structures.returns import ReturnImages

    return ReturnImages(u=images.u[i], jacobian=images.jacobian[i], state=images.state[i], time=images.time[i],
                  status=images.status[i])

def wrapped_difference(ret, a, b):
    diff = np.asarray(a, float) - np.asarray(b, float)
    per = np.zeros(len(diff))
    per[ret.index] = ret.period
    w = per > 0
    diff[w] = (diff[w] + 0.5 * per[w]) % per[w] - 0.5 * per[w]
    return diff
