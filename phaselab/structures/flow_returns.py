"""Return maps of flows: the stroboscopic map of a driven system (:class:`StrobeReturn`) and the
``k``-th crossing of a section plane at fixed energy (:class:`PlaneReturn`). See
:mod:`phaselab.structures.returns`."""


from __future__ import annotations

import numpy as np

from phaselab.engine import inputs, limits
from phaselab.engine import status as codes
from phaselab.engine.compiled import loops
from phaselab.engine.integrators import default_step
from phaselab.engine.status import OFF_SHELL
from phaselab.errors import ModelError, ParameterError



from phaselab.structures.return_base import ReturnImages, ReturnMap, empty_images


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
        out = empty_images(len(z), n2, n2)
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
                s = shell_seeds(self.system, points, energy=self.energy, plane=plane,
                                solve_for=sname, params=self.params, sign=sign)
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
        out = empty_images(n_pts, d, m)
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
        loops(self.system, "sections").section_plane_orbits(Z, *args)
        res = pts[:, -1][:, self.index]
        st = np.where((st == codes.OK) & (counts == self.k), codes.OK, np.where(st == codes.OK, codes.TIME_LIMIT, st))
        res[st != codes.OK] = np.nan
        out[valid] = res
        status[valid] = st
        return out, status
