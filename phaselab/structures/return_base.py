"""The return-map interface (:class:`ReturnMap`, :class:`ReturnImages`) and the return map of
a map (:class:`MapReturn`: ``k`` iterates, unwrapped). See :mod:`phaselab.structures.returns`."""


from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from phaselab.engine import status as codes
from phaselab.engine.compiled import loops



@dataclass
class ReturnImages:
    """The return map on a batch of coordinates.

    Attributes
    ----------
    u : ndarray, shape (N, d)
        Images in reduced coordinates (NaN where ``status`` is not ``OK``).
    jacobian : ndarray, shape (N, d, d)
        d(image)/d(coordinates).
    state : ndarray, shape (N, m)
        Full states of the images (in the system's own coordinates).
    time : ndarray, shape (N,)
        Return times (model time; the number of iterates for maps).
    status : ndarray of int, shape (N,)
        ``OK``, a status code of :mod:`phaselab.engine.status`, or :data:`OFF_SHELL`.
    state_jacobian : ndarray, shape (N, m, m) or None
        d(image state)/d(start state) in full phase space (plane sections), before the
        reduction to the coordinates.
    """

    u: np.ndarray
    jacobian: np.ndarray
    state: np.ndarray
    time: np.ndarray
    status: np.ndarray
    state_jacobian: np.ndarray | None = None


class ReturnMap:
    """The k-th return map of a system in reduced coordinates (see the module docstring).

    Attributes
    ----------
    system : Hamiltonian or AreaPreservingMap
    k : int
        Returns per application.
    dim : int
        Number of reduced coordinates ``d``.
    names : tuple of str
        Their names.
    index : ndarray of int, shape (d,)
        Their positions in the system's state.
    prm : ndarray
        Parameter values.
    period : ndarray, shape (d,)
        The period of each coordinate that is an angle of the model (``system.angles``: a
        map's modulus, a flow's declared angles), 0 where it does not wrap.
    low : ndarray, shape (d,)
        The low end of each angle's interval.
    """

    kind = ""

    def __init__(self, system, k, prm, box_lo, box_hi):
        self.system = system
        self.k = int(k)
        self.prm = prm
        self.box_lo, self.box_hi = box_lo, box_hi
        period, low = system.angle_wrapping()      # the model's angles (a map's modulus)
        self.period, self.low = period[self.index], low[self.index]

    @property
    def dim(self) -> int:
        return len(self.index)

    @property
    def names(self) -> tuple:
        return tuple(self.system.state_symbols[i].name for i in self.index)

    def coordinates(self, states) -> np.ndarray:
        """Reduced coordinates of full states, shape (N, d)."""
        return np.ascontiguousarray(np.atleast_2d(states)[:, self.index])

    def lift(self, u) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Full states of coordinates ``u`` (N, d): ``(states (N, m), d(state)/du (N, m, d),
        valid (N,))``."""
        u = np.atleast_2d(u)
        n, d = u.shape
        z = np.zeros((n, len(self.system.state_symbols)))
        z[:, self.index] = u
        dz = np.zeros((n, z.shape[1], d))
        dz[:, self.index, np.arange(d)] = 1.0
        return z, dz, np.all(np.isfinite(u), axis=1)

    def apply(self, u) -> ReturnImages:
        raise NotImplementedError

    def winding(self, advance, shift=None) -> np.ndarray:
        """The part of an orbit point's advance per application that is whole turns, shape (d,).

        Parameters
        ----------
        advance : ndarray, shape (d,)
            image - start of an orbit point (unwrapped coordinates).
        shift : ndarray, shape (d,), optional
            The orbit's own winding per application (``PeriodicOrbit.shift``), where known.

        Returns
        -------
        ndarray, shape (d,)
            The advance of each angle of the model (a map's modulus, a flow's declared angles)
            rounded to whole periods; in the other components the orbit's ``shift`` (the
            advance it was found with, e.g. ``{"theta": 2*pi}`` for a flow that declares no
            angles), zero where none is known. Subtracting it makes the orbit point a fixed
            point of the lifted map.
        """
        out = np.zeros(self.dim)
        wraps = self.period > 0
        adv = np.asarray(advance, dtype=float)
        out[wraps] = np.round(adv[wraps] / self.period[wraps]) * self.period[wraps]
        if shift is not None and np.shape(shift) == (self.dim,):
            given = ~wraps & np.isfinite(shift)
            out[given] = np.asarray(shift, dtype=float)[given]
        return out

    def wrap(self, states) -> np.ndarray:
        """Full states (..., m) with the model's angles brought into their intervals."""
        return self.system.wrap_angles(states)

    def images(self, u, inverse: bool = False) -> tuple[np.ndarray, np.ndarray]:
        """The map (or its inverse) on a batch of coordinates without derivatives:
        ``(images (N, d), status (N,))``, NaN where the status is not ``OK``."""
        raise NotImplementedError


def empty_images(n, d, m):
    return ReturnImages(u=np.full((n, d), np.nan), jacobian=np.full((n, d, d), np.nan),
                  state=np.full((n, m), np.nan), time=np.full(n, np.nan),
                  status=np.full(n, codes.NOT_FINITE, dtype=np.int64))


# ----------------------------------------------------------------------------- maps
class MapReturn(ReturnMap):
    """``k`` unwrapped iterates of an area-preserving map."""

    kind = "map"

    def __init__(self, system, k, prm, box_lo, box_hi):
        self.index = np.arange(len(system.state_symbols))
        super().__init__(system, k, prm, box_lo, box_hi)
        from phaselab.orbits.section import map_wrapping

        self.period, self.low = map_wrapping(system)
        self.loops = loops(system, "periodic")

    def apply(self, u) -> ReturnImages:
        z, _, valid = self.lift(u)
        n, m = z.shape
        out = empty_images(n, m, m)
        if not valid.any():
            return out
        Z = np.ascontiguousarray(z[valid])
        state = np.full((len(Z), m), np.nan)
        jac = np.full((len(Z), m, m), np.nan)
        status = np.zeros(len(Z), dtype=np.int64)
        self.loops.periodic_map_return(Z, self.prm, self.k, self.box_lo, self.box_hi, state, jac, status)
        out.u[valid], out.jacobian[valid], out.state[valid], out.status[valid] = state, jac, state, status
        out.time[valid] = float(self.k)
        return out

    def images(self, u, inverse: bool = False):
        z = np.ascontiguousarray(np.atleast_2d(u), dtype=float)
        n, m = z.shape
        if inverse:
            status = np.zeros(n, dtype=np.int64)
            for _ in range(self.k):
                z, st = self.inverse(z)
                status = np.where(status == codes.OK, st, status)
            z[status != codes.OK] = np.nan
            return z, status
        pts = np.full((n, self.k, m), np.nan)
        counts = np.zeros(n, dtype=np.int64)
        status = np.zeros(n, dtype=np.int64)
        zeros = np.zeros(m)
        loops(self.system, "sections").section_map_orbits(z, self.prm, self.k, zeros, zeros, self.box_lo,
                                                          self.box_hi, pts, counts, status)
        return pts[:, -1], status

    def iterates(self, z0, n: int) -> np.ndarray:
        """The first ``n`` unwrapped iterates of the state ``z0``, shape (n, m)."""
        z = np.ascontiguousarray(np.atleast_2d(z0), dtype=float)
        m = z.shape[1]
        pts = np.full((1, n, m), np.nan)
        counts = np.zeros(1, dtype=np.int64)
        status = np.zeros(1, dtype=np.int64)
        zeros = np.zeros(m)
        loops(self.system, "sections").section_map_orbits(z, self.prm, n, zeros, zeros, self.box_lo,
                                                          self.box_hi, pts, counts, status)
        return pts[0]

    def inverse(self, y) -> tuple[np.ndarray, np.ndarray]:
        """Preimages under one iterate, by Newton's method: ``(states (N, m), status (N,))``."""
        Y = np.ascontiguousarray(np.atleast_2d(y), dtype=float)
        out = np.full(Y.shape, np.nan)
        status = np.zeros(len(Y), dtype=np.int64)
        self.loops.periodic_map_inverse(Y, self.prm, 1e-14, 50, out, status)
        return out, status

    def wrap(self, states) -> np.ndarray:
        """States with the wrapped components brought into their intervals."""
        z = np.array(states, dtype=float, copy=True)
        for j, (p, a) in enumerate(zip(self.period, self.low)):
            if p > 0:
                v = np.mod(z[..., j] - a, p)
                v = np.where(p - v <= 1e-12 * p, 0.0, v)   # a rounding hair below the top is the bottom
                z[..., j] = a + v
        return z
