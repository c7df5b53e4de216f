"""Symmetric periodic orbits of reversible maps (Greene's method).

A map M with a reversor R (an involution with R M R = M^-1) is the product of two
involutions, M = R2 R1 with R1 = R and R2 = M R. A point z on the fixed set of R1 lies on
a periodic orbit of period Q when its j-th image w = M^j(z) lies on a fixed set: on that of
R1 when Q = 2j, on that of R2 when Q = 2j - 1 (from R1 M^j R1 = M^-j). So only about half the
period is iterated, and the search is for a point on a line whose image lands on another
line: far better conditioned than Newton's method on M^Q(z) = z for long periods (Greene
1979, J. Math. Phys. 20, 1183).

Here the two conditions R1(z) = z and R_i(w) = w (each of rank n in 2n components, wrapped
angles compared modulo their period) are solved together by the Gauss-Newton method, with
the exact Jacobian of M^j from the compiled tangent loop and those of R1 and R2 from the
compiled reversor kernel.
"""

from __future__ import annotations

import hashlib
from functools import cached_property

import numpy as np
import sympy as sp

from phaselab.codegen import compile_kernel
from phaselab.engine import inputs
from phaselab.engine import status as codes
from phaselab.errors import IntegrationError, ModelError
from phaselab.model.derivatives import map_derivatives
from phaselab.structures.periodic.assembly import assemble, image_of
from phaselab.structures.returns import MapReturn


class _Reversor:
    """A map's reversor as a system the code generator compiles (its rules as a "map")."""

    kind = "map"

    def __init__(self, system):
        self.update = list(system.reversor)
        self.coords, self.momenta = system.coords, system.momenta
        self.parameters = system.parameters
        self.name = "reversor"
        parts = ["reversor", system.key, repr([sp.srepr(e) for e in self.update])]
        self.key = hashlib.sha256("|".join(parts).encode()).hexdigest()[:20]

    @property
    def state_symbols(self):
        return self.coords + self.momenta

    @property
    def param_symbols(self):
        return tuple(p.symbol for p in self.parameters)

    @cached_property
    def kernel_derivatives(self):
        """The rules and their Jacobian as the code generator prints them."""
        return map_derivatives(self.update, self.state_symbols, self.param_symbols)


def _reversor_kernel(system):
    if system.kind != "map" or system.reversor is None:
        raise ModelError("symmetric orbits need a map with a reversor: AreaPreservingMap(..., reversor=[...])")
    return compile_kernel(_Reversor(system))


def _wrapped(diff, period):
    out = np.array(diff, dtype=float)
    w = period > 0
    out[..., w] = (out[..., w] + 0.5 * period[w]) % period[w] - 0.5 * period[w]
    return out


def _conditions(ret_half, rev, step, z, prm, Q):
    """Residual (4n,) and Jacobian (4n, 2n) of the two symmetry conditions at ``z``."""
    m = z.size
    eye = np.eye(m)
    rz = rev.call("map_step", z, prm)
    drz = rev.call("map_jacobian", z, prm)
    img = ret_half.apply(z[None, :])
    if img.status[0] != codes.OK:
        return None, None, int(img.status[0])
    w, dw = img.state[0], img.jacobian[0]
    if Q % 2 == 0:                           # w on the fixed set of R1
        rw = rev.call("map_step", w, prm)
        drw = rev.call("map_jacobian", w, prm)
    else:                                    # w on the fixed set of R2 = M R1
        r1w = rev.call("map_step", w, prm)
        rw = step.call("map_step", r1w, prm)
        drw = step.call("map_jacobian", r1w, prm) @ rev.call("map_jacobian", w, prm)
    period = ret_half.period
    F = np.concatenate([_wrapped(rz - z, period), _wrapped(rw - w, period)])
    J = np.vstack([drz - eye, (drw - eye) @ dw])
    return F, J, codes.OK


def _half(Q: int) -> int:
    return Q // 2 if Q % 2 == 0 else (Q + 1) // 2


def symmetric_solve(system, guess, Q, prm, tol=1e-11, maxit=60, box=None):
    """The point on the fixed set of the reversor near ``guess`` that starts a symmetric
    orbit of period ``Q``: ``(z, iterations, residual)``.

    Raises
    ------
    IntegrationError
        When the Gauss-Newton iteration does not converge (with the reason).
    """
    lo, hi = inputs.box(system, box)
    j = _half(Q)
    ret_half = MapReturn(system, j, prm, lo, hi)
    rev = _reversor_kernel(system)
    step = ret_half.loops.kernel
    z = np.array(guess, dtype=float)
    F, J, st = _conditions(ret_half, rev, step, z, prm, Q)
    if F is None:
        raise IntegrationError(f"no symmetric period-{Q} orbit from this guess: {codes.STATUS[st]}")
    norm = np.max(np.abs(F))
    # a step is kept below a quarter of the spacing of neighbouring period-Q orbits on the
    # line (a twist of one period over Q iterates), so the search stays on its branch
    wrapped = ret_half.period[ret_half.period > 0]
    cap = 0.25 * (wrapped.max() if wrapped.size else 2 * np.pi) / Q
    for it in range(maxit):
        if norm <= tol * (1.0 + np.max(np.abs(z))):
            return z, it, norm
        delta = np.linalg.lstsq(J, -F, rcond=None)[0]
        size = np.max(np.abs(delta))
        if size > cap:
            delta *= cap / size
        lam = 1.0
        for _ in range(14):
            trial = z + lam * delta
            Ft, Jt, st = _conditions(ret_half, rev, step, trial, prm, Q)
            if Ft is not None and np.max(np.abs(Ft)) <= (1.0 - 0.25 * lam) * norm:
                z, F, J, norm = trial, Ft, Jt, np.max(np.abs(Ft))
                break
            lam *= 0.5
        else:
            raise IntegrationError(f"no symmetric period-{Q} orbit from this guess: the Gauss-Newton "
                                   f"line search found no decrease (residual {norm:.3g}); try a closer guess")
    if norm <= tol * (1.0 + np.max(np.abs(z))):
        return z, maxit, norm
    raise IntegrationError(f"no symmetric period-{Q} orbit from this guess: iteration budget used up "
                           f"(residual {norm:.3g})")


def symmetric_orbit(system, guess, period, params=None, tol=1e-11, maxit=60, box=None):
    """A symmetric periodic orbit of a reversible map, found on a symmetry line (Greene's
    method); the :class:`~phaselab.structures.periodic.PeriodicOrbit` it returns has the full
    monodromy of ``period`` iterates, its residue and stability."""

    Q = inputs.count(period, "returns")
    prm = system.param_values(params)
    z, iters, _ = symmetric_solve(system, np.asarray(guess, dtype=float).ravel(), Q, prm, tol, maxit, box)
    lo, hi = inputs.box(system, box)
    full = MapReturn(system, Q, prm, lo, hi)
    img = full.apply(z[None, :])
    if img.status[0] != codes.OK:
        raise IntegrationError(f"the symmetric orbit stopped before closing: {codes.STATUS[int(img.status[0])]}")
    shift = np.zeros(len(z))
    wraps = full.period > 0
    adv = img.u[0] - z
    shift[wraps] = np.round(adv[wraps] / full.period[wraps]) * full.period[wraps]
    gap = np.max(np.abs(adv - shift))
    if gap > 1e-6 * (1.0 + np.max(np.abs(z))):
        raise IntegrationError(f"the point found on the symmetry line does not close after {Q} iterates "
                               f"(gap {gap:.3g}): its least period may differ; try another guess")

    return assemble(full, z, image_of(img, 0), shift, gap, iters)
