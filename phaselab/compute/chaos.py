"""Chaos indicators from the tangent dynamics: Benettin's largest Lyapunov exponent, MEGNO,
FLI and SALI, computed together in one compiled pass over an ensemble of orbits.

Reading the numbers (for orbits integrated long enough):

- ``lyapunov``: tends to 0 on invariant tori (slowly, like log(t)/t) and to a positive
  constant on chaotic orbits.
- ``megno``: the time-averaged MEGNO tends to 2 on quasi-periodic orbits, to 0 on stable
  isochronous motion, and grows like lambda t / 2 on chaotic orbits (Cincotta & Simo 2000,
  Astron. Astrophys. Suppl. 147, 205).
- ``fli``: the largest log-length reached by a deviation vector (Froeschle, Lega & Gonczi
  1997, Celest. Mech. 67, 41); it grows linearly in time on chaotic orbits and
  logarithmically on regular ones.
- ``sali``: the smaller alignment index of two deviation vectors (Skokos 2001, J. Phys. A
  34, 10029); it falls exponentially to 0 on chaotic orbits and stays positive on regular
  orbits of two degrees of freedom.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from phaselab.compute.integrators import COMPOSITION, GAUSS, choose_method, compiled, get_method
from phaselab.errors import IntegrationError, ModelError

_STATUS = {1: "left the box", 2: "became non-finite", 3: "implicit step did not converge"}


@dataclass
class ChaosIndicators:
    """Chaos indicators of an ensemble of orbits.

    Attributes
    ----------
    t : ndarray, shape (n_records,)
        Times (iterate numbers for maps) at which the running values were recorded.
    lyapunov, megno, fli, sali : ndarray, shape (n_orbits,)
        Final values (at the last record each orbit reached; NaN if none).
    history : dict of str to ndarray, shape (n_orbits, n_records)
        Running values of each indicator (NaN after an orbit stopped).
    escaped : ndarray of bool, shape (n_orbits,)
    status : list of str
        Why each stopped orbit stopped ("" where it ran to the end).
    seeds : ndarray, shape (n_orbits, 2n)
    method : str
    dt : float
        Step (1 for maps).
    params : dict
    """

    t: np.ndarray
    lyapunov: np.ndarray
    megno: np.ndarray
    fli: np.ndarray
    sali: np.ndarray
    history: dict
    escaped: np.ndarray
    status: list
    seeds: np.ndarray
    method: str
    dt: float
    params: dict = field(default_factory=dict)

    def __repr__(self) -> str:
        return (f"ChaosIndicators({len(self.lyapunov)} orbits to t={self.t[-1] if len(self.t) else 0:g}, "
                f"method={self.method!r}, lyapunov={np.array2string(self.lyapunov, precision=3)})")


def _last_finite(values: np.ndarray) -> np.ndarray:
    out = np.full(values.shape[0], np.nan)
    for i, row in enumerate(values):
        ok = np.flatnonzero(np.isfinite(row))
        if ok.size:
            out[i] = row[ok[-1]]
    return out


def _states(system, states, width):
    z = np.array(states, dtype=float, copy=True)
    if z.ndim == 1:
        z = z[None, :]
    if z.ndim != 2 or z.shape[1] != width:
        raise ModelError(f"states must have shape (n_orbits, {width}) ordered (q..., p...), got {np.shape(states)}")
    return z


def _deviations(n_orbits, width, vectors, seed, active, given=None):
    """Initial deviation vectors, shape (n_orbits, width, vectors); ``given`` (in the
    components marked ``active``) replaces the random draw."""
    if given is None:
        W = np.random.default_rng(seed).standard_normal((n_orbits, width, vectors))
        W[:, ~active, :] = 0.0
        return W
    given = np.asarray(given, dtype=float)
    expected = (n_orbits, int(active.sum()), vectors)
    if given.shape != expected:
        raise ModelError(f"deviations must have shape {expected}, got {given.shape}")
    if not np.all(np.isfinite(given)) or np.any(np.linalg.norm(given, axis=1) == 0):
        raise ModelError("deviation vectors must be finite and non-zero")
    W = np.zeros((n_orbits, width, vectors))
    W[:, active, :] = given
    return W


def chaos_indicators(system, states, t, params=None, dt=None, method="auto", record_every=None,
                     vectors=2, seed=0, deviations=None, tol=1e-14, maxit=100) -> ChaosIndicators:
    """Lyapunov exponent, MEGNO, FLI and SALI of every orbit of a batch.

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
    states : array_like, shape (n_orbits, 2n) or (2n,)
        Initial states (q..., p...). For a time-dependent H they start at t = 0.
    t : float
        Integration time (model time units), or the number of iterates for a map.
    params : mapping of str to float, optional
    dt : float, optional
        Step; default 0.01 (0.005 for methods of order 2). Ignored for maps.
    method : str
        A symplectic method (``"auto"``, ``"leapfrog"``, ``"yoshida4"``...,
        ``"implicit_midpoint"``, ``"gauss4"``, ``"gauss6"``).
    record_every : int, optional
        Steps between recorded running values (default: about 200 records).
    vectors : {1, 2}
        Deviation vectors; SALI needs 2 (with 1 it is NaN).
    seed : int
        Seed of the random initial deviation vectors (for reproducible results).
    deviations : array_like, shape (n_orbits, 2n, vectors), optional
        Initial deviation vectors instead of random ones (normalised before use).

    Returns
    -------
    ChaosIndicators
    """
    if vectors not in (1, 2):
        raise ModelError(f"vectors must be 1 or 2, got {vectors!r}")
    t = float(t)
    if not np.isfinite(t) or t <= 0:
        raise ModelError(f"t must be a positive finite time, got {t}")
    values = system.param_values(params)
    used = dict(zip([p.name for p in system.parameters], values.tolist()))
    if getattr(system, "kind", "flow") == "map":
        return _map_indicators(system, states, int(round(t)), values, used, record_every, vectors, seed,
                               deviations)

    flow = system.extended() if not system.is_autonomous else system
    n = system.dof
    z = _states(system, states, 2 * n)
    if flow is not system:
        # extended state (q, tau, p, p_tau) with tau = 0 and p_tau = -H(q, p, 0), so K = 0
        h0 = system.energy(z, params, t=0.0)
        z = np.column_stack([z[:, :n], np.zeros(len(z)), z[:, n:], -np.atleast_1d(h0)])
    m = choose_method(flow) if method == "auto" else get_method(method, flow)
    if m.kind not in (COMPOSITION, GAUSS):
        raise IntegrationError(f"method {m.name!r} is not symplectic; chaos indicators use "
                               "symplectic methods only (leapfrog, yoshida*, implicit_midpoint, gauss*)")
    if dt is None:
        dt = 0.005 if m.order <= 2 else 0.01
    dt = float(dt)
    if not np.isfinite(dt) or dt <= 0:
        raise IntegrationError(f"dt must be a positive finite step, got {dt}")
    n_steps = max(int(round(t / dt)), 1)
    every = record_every or max(n_steps // 200, 1)
    n_rec = n_steps // every
    width = 2 * flow.dof
    active = np.ones(width, dtype=bool)
    if flow is not system:
        active[[n, width - 1]] = False  # no deviation along tau or p_tau
    W0 = _deviations(len(z), width, vectors, seed, active, deviations)
    out = {k: np.full((len(z), n_rec), np.nan) for k in ("lyapunov", "megno", "fli", "sali")}
    status = np.zeros(len(z), dtype=np.int64)
    stop = np.full(len(z), -1, dtype=np.int64)
    lo = np.full(width, -np.inf)
    hi = np.full(width, np.inf)
    cs = compiled(flow, "tangent")
    cs.run_indicators(z, W0, values, dt, n_steps, every, m.kind, m.weights, m.A, m.b, tol, int(maxit),
                      lo, hi, out["lyapunov"], out["megno"], out["fli"], out["sali"], status, stop)
    return _result(out, status, stop, every * dt * np.arange(1, n_rec + 1), z[:, :2 * n] if flow is system
                   else np.column_stack([z[:, :n], z[:, n + 1:2 * n + 1]]), m.name, dt, used)


def _map_indicators(system, states, n_iter, values, used, record_every, vectors, seed, deviations):
    if n_iter < 1:
        raise ModelError(f"the number of iterates must be at least 1, got {n_iter}")
    width = len(system.state_symbols)
    z = _states(system, states, width)
    every = record_every or max(n_iter // 200, 1)
    n_rec = n_iter // every
    W0 = _deviations(len(z), width, vectors, seed, np.ones(width, dtype=bool), deviations)
    out = {k: np.full((len(z), n_rec), np.nan) for k in ("lyapunov", "megno", "fli", "sali")}
    status = np.zeros(len(z), dtype=np.int64)
    stop = np.full(len(z), -1, dtype=np.int64)
    modulus = np.array([float(m) if m is not None else 0.0 for m in _per_component(system, "modulus", width)])
    low = np.array([float(m) if m is not None else 0.0 for m in _per_component(system, "modulus_low", width)])
    lo = np.full(width, -np.inf)
    hi = np.full(width, np.inf)
    cs = compiled(system, "tangent")
    cs.run_map_indicators(z, W0, values, n_iter, every, modulus, low, lo, hi, out["lyapunov"], out["megno"],
                          out["fli"], out["sali"], status, stop)
    return _result(out, status, stop, every * np.arange(1, n_rec + 1, dtype=float), z, "map", 1.0, used)


def _per_component(system, attribute, width):
    values = getattr(system, attribute, None)
    return [None] * width if values is None else list(values)


def _result(out, status, stop, times, seeds, method, dt, used):
    reasons = [_STATUS.get(int(s), "") for s in status]
    return ChaosIndicators(
        t=times, lyapunov=_last_finite(out["lyapunov"]), megno=_last_finite(out["megno"]),
        fli=_last_finite(out["fli"]), sali=_last_finite(out["sali"]), history=out,
        escaped=status != 0, status=reasons, seeds=seeds, method=method, dt=dt, params=used)


def lyapunov(system, state0, t, params=None, dt=None, method="auto", **kwargs) -> ChaosIndicators:
    """Largest Lyapunov exponent by Benettin's algorithm on the tangent dynamics.

    The deviation vector is propagated by the derivative of the symplectic step and
    renormalised every step; the exponent is the mean logarithmic growth rate. The result
    also carries MEGNO, FLI (and SALI unless ``vectors=1``); see :func:`chaos_indicators`
    for the parameters.

    Returns
    -------
    ChaosIndicators
        ``.lyapunov`` holds the exponent of each orbit (units: 1 / model time, or per iterate
        for maps); ``.history["lyapunov"]`` its running estimate at times ``.t``.
    """
    return chaos_indicators(system, state0, t, params=params, dt=dt, method=method, **kwargs)
