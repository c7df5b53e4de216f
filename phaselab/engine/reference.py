"""The adaptive reference integrator: scipy's DOP853 on the compiled vector field.

Not symplectic and not fast (one Python call per right-hand-side evaluation), but
independent of phaselab's own steppers and with error control, so it serves to compare
against. Used by :func:`phaselab.orbits.trajectory.trajectory` for ``method="dop853"``.
"""

from __future__ import annotations

import numpy as np

from phaselab.engine.status import LEFT_BOX, NOT_CONVERGED, NOT_FINITE, OK
from phaselab.errors import ParameterError



def _box_events(lo: np.ndarray, hi: np.ndarray) -> list:
    """Terminal events z_j - lo_j = 0 and hi_j - z_j = 0 for every finite bound."""
    events = []
    for j in range(len(lo)):
        for bound, sign in ((lo[j], 1.0), (hi[j], -1.0)):
            if np.isfinite(bound):
                def ev(t, y, j=j, bound=bound, sign=sign):
                    return sign * (y[j] - bound)
                ev.terminal = True
                ev.direction = -1.0
                events.append(ev)
    return events


def solve_reference(cs, Z0: np.ndarray, prm: np.ndarray, times: np.ndarray, rtol: float = 1e-10,
                    atol: float = 1e-12, box_lo: np.ndarray | None = None,
                    box_hi: np.ndarray | None = None):
    """Integrate each orbit with ``scipy.integrate.solve_ivp(method="DOP853")``.

    Parameters
    ----------
    cs : CompiledSystem
        Compiled autonomous flow (``vector_field`` and ``hamiltonian`` kernels).
    Z0 : ndarray, shape (n_orbits, 2n)
    prm : ndarray, shape (n_params,)
    times : ndarray, shape (n_times,)
        Output times, monotonic; ``times[0]`` is the start.
    rtol, atol : float
        Tolerances handed to ``solve_ivp``.
    box_lo, box_hi : ndarray, shape (2n,), optional
        Orbits crossing a bound are stopped there (terminal events).

    Returns
    -------
    states : ndarray, shape (n_orbits, n_times, 2n)
        NaN after an orbit stopped.
    energy : ndarray, shape (n_orbits, n_times)
    status : ndarray of int, shape (n_orbits,)
        ``OK``, ``LEFT_BOX``, ``NOT_FINITE`` or ``NOT_CONVERGED`` (the solver gave up).
    stop_time : ndarray, shape (n_orbits,)
        Time where an orbit stopped (NaN for completed ones).
    """
    from scipy.integrate import solve_ivp

    for name, v in (("rtol", rtol), ("atol", atol)):
        if not (np.isfinite(v) and v > 0):
            raise ParameterError(f"{name} must be a positive finite number, got {v!r}")
    Z0 = np.atleast_2d(np.asarray(Z0, dtype=float))
    n_orb, m = Z0.shape
    times = np.asarray(times, dtype=float)
    lo = np.full(m, -np.inf) if box_lo is None else np.asarray(box_lo, dtype=float)
    hi = np.full(m, np.inf) if box_hi is None else np.asarray(box_hi, dtype=float)
    states = np.full((n_orb, len(times), m), np.nan)
    energy = np.full((n_orb, len(times)), np.nan)
    status = np.zeros(n_orb, dtype=np.int64)
    stop_time = np.full(n_orb, np.nan)

    kernel = cs.kernel

    def rhs(t, y):
        return kernel.call("vector_field", y, prm)

    events = _box_events(lo, hi)
    for o in range(n_orb):
        z0 = Z0[o]
        if not np.all(np.isfinite(z0)):
            status[o], stop_time[o] = NOT_FINITE, times[0]
            continue
        if np.any(z0 < lo) or np.any(z0 > hi):
            status[o], stop_time[o] = LEFT_BOX, times[0]
            continue
        with np.errstate(all="ignore"):
            sol = solve_ivp(rhs, (times[0], times[-1]), z0, method="DOP853", t_eval=times,
                            rtol=rtol, atol=atol, events=events or None)
        k = sol.y.shape[1]
        states[o, :k] = sol.y.T
        if k:
            energy[o, :k] = cs.evaluate("hamiltonian", sol.y.T, prm)
        if sol.status == 1:
            status[o] = LEFT_BOX
            hit = [e[0] for e in sol.t_events if len(e)]
            stop_time[o] = min(hit, key=lambda x: abs(x - times[0])) if hit else sol.t[-1]
        elif sol.status != 0:
            last = sol.y[:, -1] if k else z0
            status[o] = NOT_FINITE if not np.all(np.isfinite(last)) else NOT_CONVERGED
            stop_time[o] = sol.t[-1] if len(sol.t) else times[0]
        bad = ~np.all(np.isfinite(states[o]), axis=1)
        if bad.any() and status[o] == OK:
            first = int(np.argmax(bad))
            status[o], stop_time[o] = NOT_FINITE, times[first]
            states[o, first:] = np.nan
            energy[o, first:] = np.nan
    return states, energy, status, stop_time
