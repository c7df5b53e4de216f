"""Return maps in reduced coordinates, with their exact derivatives.

A periodic orbit is a fixed point of a return map, and an invariant manifold a curve grown
by it. Three kinds, one interface (:class:`ReturnMap`):

- a map (``system.kind == "map"``): ``k`` iterates, unwrapped; the coordinates are the
  whole state;
- a time-periodic Hamiltonian: ``k`` periods of the drive (stroboscopic map), integrated in
  extended phase space; the coordinates are ``(q, p)``;
- an autonomous flow: the ``k``-th crossing of a section plane at fixed energy (the plane
  convention of :func:`phaselab.section`). The coordinates are the state components other
  than the plane's and the one solved from H = E (for a plane ``x = 0`` of a two degree of
  freedom system solving ``px``: ``(y, py)``).

``apply(u)`` evaluates the map on a batch of coordinates in one compiled call and returns
the images with the Jacobians d(image)/du, computed from the exact tangent maps of the
integrator (no finite differences).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from phaselab.engine import status as codes

from phaselab.engine import inputs, limits
from phaselab.engine.compiled import loops
from phaselab.engine.integrators import default_step
from phaselab.engine.status import OFF_SHELL
from phaselab.errors import ModelError, ParameterError



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


def _empty_images(n, d, m):
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
        out = _empty_images(n, m, m)
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


# ----------------------------------------------------------------------------- driven flows
class StrobeReturn(ReturnMap):
    """``k`` periods of the drive of a time-periodic Hamiltonian (stroboscopic map)."""

    kind = "stroboscopic"

    def __init__(self, system, k, prm, box_lo, box_hi, dt, method):
        n = system.dof
        self.index = np.arange(2 * n)
        super().__init__(system, k, prm, box_lo, box_hi)
        if getattr(system, "period", None) is None:
            raise ModelError("this Hamiltonian depends on time but has no driving period; build it "
                             "with period=... to find periodic orbits of its stroboscopic map")
        self.params = dict(zip((p.name for p in system.parameters), prm.tolist()))
        self.T = system.driving_period(self.params)
        self.ext = system.extended()
        self.method = inputs.method(self.ext, method)
        self.loops = loops(self.ext, "periodic")
        pos = list(range(n)) + [n + 1 + i for i in range(n)]
        self.pos = np.array(pos)
        self.ext_lo = np.full(2 * n + 2, -np.inf)
        self.ext_hi = np.full(2 * n + 2, np.inf)
        self.ext_lo[pos], self.ext_hi[pos] = box_lo, box_hi
        self.dt_given = dt

    def set_step(self, z0) -> None:
        """Fix the step (it divides the period) from the states ``z0`` where the search starts."""
        h = self.dt_given
        if h is None:
            h = default_step(self.loops, self.method, self._extended(z0), self.prm, self.T, self.T)
        self.steps = max(1, int(np.ceil(self.T / h - 1e-9)))
        self.h = self.T / self.steps

    def images(self, u, inverse: bool = False):
        z, _, valid = self.lift(u)
        n, m = z.shape
        out = np.full((n, m), np.nan)
        status = np.full(n, codes.NOT_FINITE, dtype=np.int64)
        if not valid.any():
            return out, status
        X = self._extended(z[valid])
        pts = np.full((len(X), self.k, X.shape[1]), np.nan)
        counts = np.zeros(len(X), dtype=np.int64)
        err = np.zeros(len(X))
        st = np.zeros(len(X), dtype=np.int64)
        meth = self.method
        loops(self.ext, "sections").section_strobe_orbits(
            X, self.prm, -self.h if inverse else self.h, self.steps, self.k, meth.kind, meth.weights, meth.A,
            meth.b, codes.IMPLICIT_TOL, codes.IMPLICIT_MAXIT, self.ext_lo, self.ext_hi, pts, counts, err, st)
        out[valid] = pts[:, -1][:, self.pos]
        status[valid] = st
        return out, status

    def _extended(self, z):
        n = self.system.dof
        with np.errstate(all="ignore"):
            e = np.atleast_1d(self.system.energy(z, params=self.params, t=0.0))
        X = np.zeros((len(z), 2 * n + 2))
        X[:, :n], X[:, n + 1:2 * n + 1], X[:, -1] = z[:, :n], z[:, n:], -e
        return np.ascontiguousarray(X)

    def apply(self, u) -> ReturnImages:
        z, _, valid = self.lift(u)
        n2 = z.shape[1]
        out = _empty_images(len(z), n2, n2)
        if not valid.any():
            return out
        X = self._extended(z[valid])
        mx = X.shape[1]
        state = np.full((len(X), mx), np.nan)
        jac = np.full((len(X), mx, mx), np.nan)
        status = np.zeros(len(X), dtype=np.int64)
        meth = self.method
        self.loops.periodic_strobe_return(X, self.prm, self.h, self.steps * self.k, meth.kind, meth.weights,
                                          meth.A, meth.b, codes.IMPLICIT_TOL, codes.IMPLICIT_MAXIT,
                                          self.ext_lo, self.ext_hi, state, jac, status)
        p = self.pos
        out.u[valid] = state[:, p]
        out.state[valid] = state[:, p]
        out.jacobian[valid] = jac[:, p][:, :, p]   # p_tau does not act on (q, p), tau starts at 0
        out.time[valid] = self.k * self.T
        out.status[valid] = status
        return out


# ----------------------------------------------------------------------------- autonomous flows
class PlaneReturn(ReturnMap):
    """The ``k``-th crossing of a plane at fixed energy."""

    kind = "plane"

    def __init__(self, system, k, prm, box_lo, box_hi, plane, energy, direction, solve_for, dt,
                 method, t_max):
        n = system.dof
        self.plane_index, self.value = inputs.plane(system, plane).single()
        partner = (self.plane_index + n) % (2 * n)
        self.solve_index = partner if solve_for is None else inputs.state_index(system, solve_for, "solve_for")
        if self.solve_index == self.plane_index:
            raise ParameterError("solve_for must differ from the plane's component")
        self.index = np.array([i for i in range(2 * n) if i not in (self.plane_index, self.solve_index)],
                              dtype=np.int64)
        super().__init__(system, k, prm, box_lo, box_hi)
        self.energy = inputs.number(energy, "energy")
        self.direction = inputs.direction(direction)
        self.method = inputs.method(system, method)
        self.loops = loops(system, "periodic")
        self.dt_given = dt
        self.t_max = t_max
        self.params = dict(zip((p.name for p in system.parameters), prm.tolist()))

    @property
    def plane(self) -> dict:
        return {self.system.state_symbols[self.plane_index].name: self.value}

    def set_step(self, z0) -> None:
        """Fix the step and the step cap from the states ``z0`` where the search starts."""
        h = self.dt_given
        if h is None:
            h = default_step(self.loops, self.method, np.atleast_2d(z0), self.prm, np.inf)
        if not (np.isfinite(h) and h > 0):
            raise ParameterError("no time scale to choose a step from; give dt=...")
        self.h = float(h)
        t_cap = self.t_max if self.t_max is not None else self.k * 5000 * self.h
        limits.check_budget(1, t_cap / self.h, 0, "periodic_orbit")
        self.max_steps = int(np.ceil(t_cap / self.h))

    def lift(self, u):
        from phaselab.orbits.seeds import shell_seeds

        u = np.atleast_2d(np.asarray(u, dtype=float))
        n_pts, d = u.shape
        m = len(self.system.state_symbols)
        names = [s.name for s in self.system.state_symbols]
        sname = names[self.solve_index]
        plane = {names[self.plane_index]: self.value}
        points = {names[i]: u[:, c] for c, i in enumerate(self.index)}
        cands = []
        import warnings

        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            for sign in (1, -1):
                s = shell_seeds(self.system, self.energy, plane, sname, points, params=self.params, sign=sign)
                cands.append(s.states)
        z = np.full((n_pts, m), np.nan)
        for cand in cands:
            ok = np.all(np.isfinite(cand), axis=1) & ~np.all(np.isfinite(z), axis=1)
            if ok.any():
                f = self.loops.evaluate("vector_field", cand[ok], self.prm)
                good = self.direction * f[:, self.plane_index] > 0
                rows = np.flatnonzero(ok)[good]
                z[rows] = cand[ok][good]
        valid = np.all(np.isfinite(z), axis=1)
        dz = np.zeros((n_pts, m, d))
        dz[:, self.index, np.arange(d)] = 1.0
        if valid.any():
            f = self.loops.evaluate("vector_field", z[valid], self.prm)
            n = m // 2
            grad = np.concatenate([-f[:, n:], f[:, :n]], axis=1)     # dH/dq = -f_p, dH/dp = f_q
            dz[valid, self.solve_index, :] = -grad[:, self.index] / grad[:, [self.solve_index]]
        return z, dz, valid

    def apply(self, u) -> ReturnImages:
        z, dz, valid = self.lift(u)
        n_pts, m = z.shape
        d = self.dim
        out = _empty_images(n_pts, d, m)
        out.status[:] = OFF_SHELL
        if not valid.any():
            return out
        Z = np.ascontiguousarray(z[valid])
        state = np.full((len(Z), m), np.nan)
        jac = np.full((len(Z), m, m), np.nan)
        tms = np.full(len(Z), np.nan)
        status = np.zeros(len(Z), dtype=np.int64)
        meth = self.method
        self.loops.periodic_plane_return(Z, self.prm, self.h, self.max_steps, self.plane_index, self.value,
                                         float(self.direction), self.k, meth.kind, meth.weights, meth.A, meth.b,
                                         codes.IMPLICIT_TOL, codes.IMPLICIT_MAXIT, self.box_lo, self.box_hi,
                                         state, jac, tms, status)
        full = np.einsum("nij,njk->nik", jac, dz[valid])
        out.state_jacobian = np.full((n_pts, m, m), np.nan)
        out.state_jacobian[valid] = jac
        out.u[valid] = state[:, self.index]
        out.jacobian[valid] = full[:, self.index, :]
        out.state[valid] = state
        out.time[valid] = tms
        out.status[valid] = status
        return out

    def images(self, u, inverse: bool = False):
        z, _, valid = self.lift(u)
        n_pts, m = z.shape
        out = np.full((n_pts, self.dim), np.nan)
        status = np.full(n_pts, OFF_SHELL, dtype=np.int64)
        if not valid.any():
            return out, status
        Z = np.ascontiguousarray(z[valid])
        n = len(Z)
        pts = np.full((n, self.k, m), np.nan)
        tms = np.full((n, self.k), np.nan)
        counts = np.zeros(n, dtype=np.int64)
        err = np.zeros(n)
        st = np.zeros(n, dtype=np.int64)
        stop = np.zeros(n)
        meth = self.method
        h = -self.h if inverse else self.h
        direction = -self.direction if inverse else self.direction
        args = (self.prm, h, self.max_steps, self.plane_index, self.value, float(direction), self.k, meth.kind,
                meth.weights, meth.A, meth.b, codes.IMPLICIT_TOL, codes.IMPLICIT_MAXIT, self.box_lo, self.box_hi,
                pts, tms, counts, err, st, stop)
        cs = loops(self.system, "sections")
        import numba

        groups = min(n, int(numba.get_num_threads()))
        if groups <= 1:
            cs.section_plane_orbits_serial(Z, *args)
        else:
            cs.section_plane_orbits(Z, np.linspace(0, n, groups + 1).round().astype(np.int64), *args)
        res = pts[:, -1][:, self.index]
        st = np.where((st == codes.OK) & (counts == self.k), codes.OK, np.where(st == codes.OK, codes.TIME_LIMIT, st))
        res[st != codes.OK] = np.nan
        out[valid] = res
        status[valid] = st
        return out, status


def return_map(system, k, plane=None, energy=None, guess=None, direction=1, solve_for=None,
               params=None, dt=None, method="auto", box=None, t_max=None) -> ReturnMap:
    """The return map of ``system`` for the given kind of section (see the module docstring).

    ``guess`` (shape (m,) or (N, m)) fixes the energy of a plane section when ``energy`` is
    not given (H at the first guess) and the step.
    """
    prm = system.param_values(params)
    k = inputs.count(k, "period")
    lo, hi = inputs.box(system, box)
    kind = system.kind
    if kind == "map":
        return MapReturn(system, k, prm, lo, hi)
    where = inputs.plane(system, plane)
    if not system.is_autonomous:
        if where.kind == "fixed":
            raise ModelError("a time-dependent Hamiltonian is sectioned stroboscopically: leave plane out")
        ret = StrobeReturn(system, k, prm, lo, hi, inputs.step(dt), method)
        if guess is not None:
            ret.set_step(np.atleast_2d(guess))
        return ret
    if where.kind != "fixed":
        raise ParameterError("an autonomous flow needs a section plane, e.g. plane={'x': 0.0}")
    if energy is None:
        if guess is None:
            raise ParameterError("give energy=... (or a guess to take it from)")
        energy = float(np.atleast_1d(system.energy(np.atleast_2d(guess)[:1], params=params))[0])
    ret = PlaneReturn(system, k, prm, lo, hi, where, energy, direction, solve_for, inputs.step(dt),
                      method, None if t_max is None else inputs.positive_number(t_max, "t_max"))
    if guess is not None:
        ret.set_step(np.atleast_2d(guess))
    return ret
