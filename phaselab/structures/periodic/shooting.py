"""Newton's method on (multiple-shooting) return maps, and :func:`periodic_orbit`.

Newton's method solves P(u) - u - s = 0 (``s`` a shift for orbits that close on a cylinder)
with the exact derivative of P from the tangent maps of the integrator, damped by a
backtracking line search; a period-k orbit is shot in k legs of one return each.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from phaselab.engine import inputs, limits
from phaselab.engine import status as codes
from phaselab.errors import IntegrationError, ParameterError
from phaselab.structures.periodic.assembly import assemble_shooting, shooting_legs, wrapped_difference
from phaselab.structures.periodic.result import REASONS, PeriodicOrbit
from phaselab.structures.periodic.rounding import (PROBE_BELOW, STALL_FACTOR, guess_report, rounding_level,
                                                   warn_if_far)
from phaselab.structures.periodic.symmetric import symmetric_orbit
from phaselab.structures.periodic.symmetries import (NEARLY_SINGULAR, SectionSymmetry, newton_steps,
                                                     phase_conditions)
from phaselab.structures.returns import ReturnMap, return_map


# ----------------------------------------------------------------------------- Newton
@dataclass
class NewtonSolution:
    U: np.ndarray          # (N, k, d) the orbits' points in reduced coordinates
    reason: list
    residual: np.ndarray
    iterations: np.ndarray
    images: object         # ReturnImages of the N*k points (row-major over orbits, then points)
    rounding: np.ndarray = None    # (N,) measured rounding noise where the search stalled, else NaN
    start_time: np.ndarray = None  # (N,) the return time of each start (sum over its legs)


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


def newton(ret1: ReturnMap, U0, shifts, tol: float = 1e-11, maxit: int = 30, symmetry=None) -> NewtonSolution:
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
    symmetry : SectionSymmetry, optional
        Continuous symmetries of the flow. With any, every step is the minimum-norm solution
        orthogonal to the neutral directions at the first point (phase conditions), which
        picks one orbit of the family (see :mod:`phaselab.structures.periodic.symmetries`).

    Where a full step fails to decrease a residual already below ``PROBE_BELOW`` of the scale
    (or the budget runs out there), the residual's rounding noise is measured; within
    ``STALL_FACTOR`` of it the search has converged as far as floating point allows and ends
    as converged, with that noise in ``rounding`` (:mod:`phaselab.structures.periodic.rounding`).

    Returns
    -------
    NewtonSolution
    """
    U = np.array(U0, dtype=float)
    n, k, d = U.shape
    reason: list = [None] * n
    iters = np.zeros(n, dtype=np.int64)
    F, images, status, norm = _evaluate(ret1, U, shifts)
    start_time = images.time.reshape(n, k).sum(axis=1)
    rounding = np.full(n, np.nan)
    smallest = np.full(n, np.nan)
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
        sub_img = take_images(images, idx, k)
        A = _shooting_matrix(sub_img, len(idx), k, d)
        G = phase_conditions(symmetry, U[idx, 0], k) if symmetry is not None and symmetry.count else None
        step, singular, smallest[idx] = newton_steps(A, F[idx].reshape(len(idx), k * d), G)
        for i in idx[singular]:
            reason[i] = "singular" if G is None else "degenerate"
            active[i] = False
        idx, step = idx[~singular], step[~singular]
        if idx.size == 0:
            break
        step = step.reshape(len(idx), k, d)
        lam = np.ones(idx.size)
        accepted = np.zeros(idx.size, dtype=bool)
        stalled = np.zeros(idx.size, dtype=bool)
        for trial in range(13):
            todo = np.flatnonzero(~accepted & ~stalled)
            trial_U = U[idx[todo]] + lam[todo, None, None] * step[todo]
            Ft, trial_img, st_t, nt = _evaluate(ret1, trial_U, shifts[idx[todo]])
            ok = nt <= (1.0 - 0.25 * lam[todo]) * norm[idx[todo]]
            for j, r in enumerate(todo):
                i = idx[r]
                if ok[j]:
                    accepted[r] = True
                    U[i], F[i], norm[i] = trial_U[j], Ft[j], nt[j]
                    _put_images(images, i, trial_img, j, k)
                elif trial == 0 and norm[i] <= PROBE_BELOW * scale[i]:
                    stalled[r] = _stalled(ret1, U, images, shifts, norm, scale, rounding, i)
            lam[~accepted] *= 0.5
            if np.all(accepted | stalled):
                break
        for r in np.flatnonzero(~accepted):
            near = smallest[idx[r]] <= NEARLY_SINGULAR
            reason[idx[r]] = "converged" if stalled[r] else "nearly singular" if near else "line search"
            active[idx[r]] = False
        iters[idx[accepted]] += 1
    for i in np.flatnonzero(active):
        reason[i] = "budget"
        if norm[i] <= PROBE_BELOW * scale[i] and _stalled(ret1, U, images, shifts, norm, scale, rounding, i):
            reason[i] = "converged"
    return NewtonSolution(U=U, reason=reason, residual=norm, iterations=iters, images=images, rounding=rounding,
                  start_time=start_time)


def _stalled(ret1, U, images, shifts, norm, scale, rounding, i) -> bool:
    """Whether orbit ``i`` has a residual within ``STALL_FACTOR`` of its rounding noise (see
    :func:`phaselab.structures.periodic.rounding.rounding_level`), which is put in ``rounding[i]``."""
    k, d = U.shape[1:]
    A = _shooting_matrix(take_images(images, [i], k), 1, k, d)[0]

    def evaluate(Ub):
        Fb, _, st, _ = _evaluate(ret1, Ub, np.broadcast_to(shifts[i], Ub.shape))
        return Fb, st == codes.OK

    rounding[i] = rounding_level(evaluate, U[i], A, scale[i])
    if norm[i] <= STALL_FACTOR * rounding[i]:
        return True
    rounding[i] = np.nan
    return False


def take_images(images, idx, k):
    from phaselab.structures.returns import ReturnImages

    rows = (np.asarray(idx)[:, None] * k + np.arange(k)[None, :]).ravel()
    return ReturnImages(u=images.u[rows], jacobian=images.jacobian[rows], state=images.state[rows],
                  time=images.time[rows], status=images.status[rows])


def _put_images(images, i, other, j, k):
    dst = slice(i * k, (i + 1) * k)
    src = slice(j * k, (j + 1) * k)
    images.u[dst] = other.u[src]
    images.jacobian[dst] = other.jacobian[src]
    images.state[dst] = other.state[src]
    images.time[dst] = other.time[src]
    images.status[dst] = other.status[src]


def explain(reason) -> str:
    return REASONS.get(reason, str(reason))




# ----------------------------------------------------------------------------- public calls
def periodic_orbit(system, states, returns=1, *, plane=None, energy=None, params=None, direction=+1,
                   solve_for=None, dt=None, method="auto", shift=None, symmetric=False, tol=1e-11,
                   maxit=30, box=None, t_max=None) -> PeriodicOrbit:
    """Find a periodic orbit near ``states`` (one state) by Newton's method on the return map.

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
    states : array_like, shape (2n,)
        A state near the orbit (the guess). For a section plane it is put on the plane and on the energy
        shell (the solved component is recomputed).
    returns : int
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
        :func:`phaselab.structures.periodic.symmetric.symmetric_orbit`.
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

    Warns
    -----
    PhaselabWarning
        The orbit found lies far from the guess for its size, or its period far from the
        guess's return time (``distance_from_guess``, ``period_change``).

    Notes
    -----
    A flow with conserved momenta (translations, rotations, cyclic coordinates; found from
    the vector field, :mod:`phaselab.structures.periodic.symmetries`) has a family of copies of each
    periodic orbit: the steps are then taken orthogonal to the family. A residual that
    cannot reach ``tol`` because of rounding ends the search at the rounding level
    (``rounding``). A period of k returns is solved by multiple shooting: the k points of the orbit are the
    unknowns, each joined to the next by one return (see :func:`newton`). The monodromy is
    the product of the k one-return Jacobians, exact derivatives from the tangent maps of the
    integrator.
    """
    inputs.system(system)
    tol = inputs.positive_number(tol, "tol")
    maxit = inputs.count(maxit, "maxit", minimum=1, maximum=1000)
    k = inputs.count(returns, "returns")
    inputs.direction(direction), inputs.flag(symmetric, "symmetric")
    names = [s.name for s in system.state_symbols]
    limits.shooting_budget(system, plane, 1, k, maxit, "periodic_orbit")
    g = inputs.states(states, len(names), names, "states")
    if len(g) != 1:
        raise ParameterError("states must be one state; use find_periodic_orbits for many")
    if symmetric:
        return symmetric_orbit(system, g[0], k, params=params, tol=tol, maxit=maxit, box=box)
    ret1 = return_map(system, 1, plane=plane, energy=energy, guess=g, direction=direction,
                      solve_for=solve_for, params=params, dt=dt, method=method, box=box, t_max=t_max)
    U0, shifts, status = shooting_legs(ret1, ret1.coordinates(g), k, shift)
    if status[0] != codes.OK:
        raise IntegrationError(f"no period-{k} orbit found from this guess: following the guess, "
                               f"{explain(int(status[0]))}")
    symmetry = SectionSymmetry(ret1, ret1.lift(U0[0, :1])[0][0]) if ret1.kind == "plane" else None
    sol = newton(ret1, U0, shifts, tol=tol, maxit=maxit, symmetry=symmetry)
    why = sol.reason[0]
    if why != "converged":
        advice = "" if why in ("singular", "degenerate", "nearly singular") else "; try a closer guess" + (
            ", another energy" if ret1.kind == "plane" else "") + (" or a smaller dt" if ret1.kind != "map" else "")
        raise IntegrationError(
            f"no period-{k} orbit found from this guess: {explain(why)} (after "
            f"{int(sol.iterations[0])} Newton steps, residual {sol.residual[0]:.3g}){advice}")
    orbit = assemble_shooting(ret1, sol.U[0], take_images(sol.images, [0], k), shifts[0], sol.residual[0],
                               sol.iterations[0], symmetry=symmetry)
    report_guess(ret1, orbit, U0[0, 0], sol, 0)
    warn_if_far(orbit)
    return orbit


def report_guess(ret1, orbit, u_start, sol, j) -> None:
    """Put the rounding level and the distance from the start ``u_start`` (d,) on ``orbit``."""
    start = ret1.lift(u_start[None, :])[0][0]
    orbit.rounding = float(sol.rounding[j])
    orbit.distance_from_guess, orbit.period_change = guess_report(
        orbit, start, float(sol.start_time[j]),
        wrap=(lambda v: wrapped_difference(ret1, v, 0.0 * v)) if ret1.kind == "map" else None)
