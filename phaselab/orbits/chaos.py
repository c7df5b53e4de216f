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

from phaselab.engine import accuracy as step_accuracy
from phaselab.engine import status as codes

from phaselab.engine import inputs, limits
from phaselab.engine.compiled import loops
from phaselab.orbits.stopped import warn_stopped
from phaselab.errors import ParameterError

INDICATORS = ("lyapunov", "megno", "fli", "sali")
"""The indicators, in the order the compiled loops write them."""

DEFAULT_RECORDS = 200
"""Records of the running values kept with ``history=True`` when ``save_every`` is not given."""


@dataclass(repr=False)
class ChaosIndicators(codes.StatusReport):
    """Chaos indicators of an ensemble of orbits.

    Attributes
    ----------
    lyapunov, megno, fli, sali : ndarray, shape (n_orbits,)
        Values at the last step each orbit completed (NaN if none; SALI is NaN when one
        deviation vector was used).
    t_end : ndarray, shape (n_orbits,)
        The time (iterate for maps) of those values: the integration time, or earlier for
        an orbit that stopped.
    t : ndarray, shape (n_records,)
        Times of the recorded running values (empty without ``history``).
    history : dict of str to ndarray, shape (n_orbits, n_records)
        Running values of each indicator (NaN after an orbit stopped); empty without
        ``history``.
    status : ndarray of int, shape (n_orbits,)
        Why each orbit stopped (:mod:`phaselab.engine.status`; words in ``status_text``).
    seeds : ndarray, shape (n_orbits, 2n)
    method : str
    dt : float
        Step (1 for maps).
    params : dict
    """

    lyapunov: np.ndarray
    megno: np.ndarray
    fli: np.ndarray
    sali: np.ndarray
    t_end: np.ndarray
    t: np.ndarray
    history: dict
    status: np.ndarray
    seeds: np.ndarray
    method: str
    dt: float
    params: dict = field(default_factory=dict)
    system: object = field(default=None, repr=False)

    @property
    def error_estimate(self) -> float:
        """The relative timing error of the integration step over the longest orbit (step
        doubling, :func:`phaselab.engine.accuracy.estimate`). NaN for maps or without the
        system. Measured on first use (a short pilot run) and kept."""
        cached = self.__dict__.get("_error_estimate")
        if cached is None:
            t_end = np.asarray(self.t_end, dtype=float)
            span = float(np.nanmax(t_end)) if np.isfinite(t_end).any() else float("nan")
            if (self.system is None or self.system.kind == "map" or not np.isfinite(self.dt)
                    or not np.isfinite(span) or span <= 0):
                cached = float("nan")
            else:
                cached = step_accuracy.estimate(self.system, self.seeds, span, self.dt, self.params, self.method)
            self.__dict__["_error_estimate"] = cached
        return cached

    def take(self, orbits) -> "ChaosIndicators":
        """The indicators of the selected orbits (index, indices or boolean mask), copied."""
        try:
            idx = np.atleast_1d(np.arange(len(self.status))[orbits])
        except (IndexError, TypeError, ValueError):
            raise ParameterError(f"cannot select orbits {orbits!r} of {len(self.status)}") from None
        return self.concat([self], idx)

    @classmethod
    def concat(cls, parts, idx=None) -> "ChaosIndicators":
        """One result of every orbit of ``parts``, in order (rows ``idx`` of the joined result
        when given). The parts must share the record times, the method and the step."""
        parts = [p for p in parts if p is not None]
        if not parts:
            raise ParameterError("ChaosIndicators.concat needs at least one result")
        first = parts[0]
        for p in parts[1:]:
            if (not np.array_equal(p.t, first.t) or p.method != first.method
                    or sorted(p.history) != sorted(first.history)
                    or not np.array_equal(p.dt, first.dt, equal_nan=True)):
                raise ParameterError("ChaosIndicators.concat needs results of one method, step and record times")
        idx = slice(None) if idx is None else idx
        join = {k: np.concatenate([getattr(p, k) for p in parts])[idx].copy()
                for k in ("lyapunov", "megno", "fli", "sali", "t_end", "status", "seeds")}
        history = {k: np.concatenate([p.history[k] for p in parts])[idx].copy() for k in first.history}
        return cls(**join, t=first.t.copy(), history=history, method=first.method, dt=first.dt,
                   params=dict(first.params), system=first.system)

    def to_xarray(self):
        """An ``xarray.Dataset`` with CF attributes: the indicators, ``t_end``, ``status`` and
        ``seeds`` over ``orbit`` (running values over ``record`` when kept)."""
        from phaselab.orbits.labelled import chaos_dataset

        return chaos_dataset(self)

    def plot(self, **kwargs):
        """A matplotlib figure of one indicator (``indicator="megno"``), see
        :func:`phaselab.export.result_figures.chaos_figure`."""
        from phaselab.export.result_figures import chaos_figure

        return chaos_figure(self, **kwargs)

    def save(self, path, **kwargs):
        """Write .nc, .zarr, .svg, .pdf or .png (:data:`phaselab.export.SAVERS`); returns the path."""
        from phaselab.export import save

        return save(self, path, **kwargs)

    def __repr__(self) -> str:
        span = float(np.nanmax(self.t_end)) if np.isfinite(self.t_end).any() else 0.0
        return (f"ChaosIndicators({len(self.lyapunov)} orbits to t={span:g}, method={self.method!r}, "
                f"megno={np.array2string(self.megno, precision=3, threshold=8)})")


def deviation_vectors(states: np.ndarray, seed: int, vectors: int, active: np.ndarray) -> np.ndarray:
    """Initial deviation vectors that depend only on ``seed`` and each orbit's own state.

    An orbit gets the same vectors whatever batch it is computed in and wherever it sits in
    it (so local, resumed and distributed scans agree exactly). The bits of the state's
    components are mixed with the seed by the splitmix64 hash (Steele, Lea & Flood 2014),
    and the hashes turned into standard normal numbers by the Box-Muller transform.

    Parameters
    ----------
    states : ndarray, shape (n_orbits, width)
    seed : int
    vectors : int
        Vectors per orbit (1 or 2).
    active : ndarray of bool, shape (width,)
        Components that may deviate (tau and p_tau of extended phase space may not).

    Returns
    -------
    ndarray, shape (n_orbits, width, vectors)
    """
    n, width = states.shape
    with np.errstate(over="ignore"):
        bits = np.ascontiguousarray(states, dtype=np.float64).view(np.uint64)
        h = _splitmix(np.full(n, np.uint64(seed & 0xFFFFFFFFFFFFFFFF), dtype=np.uint64))
        for j in range(width):
            h = _splitmix(h ^ bits[:, j] ^ np.uint64(j + 1))
        count = width * vectors
        draws = np.empty((n, 2 * count), dtype=np.uint64)
        for c in range(2 * count):
            draws[:, c] = _splitmix(h + np.uint64(c + 1) * np.uint64(0x9E3779B97F4A7C15))
    u = (draws >> np.uint64(11)).astype(np.float64) * (1.0 / 2.0**53)
    u1, u2 = u[:, :count], u[:, count:]
    normal = np.sqrt(-2.0 * np.log1p(-u1)) * np.cos(2.0 * np.pi * u2)
    W = normal.reshape(n, width, vectors)
    W[:, ~active, :] = 0.0
    return W


def _splitmix(x: np.ndarray) -> np.ndarray:
    x = x + np.uint64(0x9E3779B97F4A7C15)
    x = (x ^ (x >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
    x = (x ^ (x >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
    return x ^ (x >> np.uint64(31))


def _given_deviations(given, n_orbits, width, vectors, active):
    given = np.asarray(given, dtype=float)
    expected = (n_orbits, int(active.sum()), vectors)
    if given.shape != expected:
        raise ParameterError(f"deviations must have shape {expected}, got {given.shape}")
    if not np.all(np.isfinite(given)) or np.any(np.linalg.norm(given, axis=1) == 0):
        raise ParameterError("deviation vectors must be finite and non-zero")
    W = np.zeros((n_orbits, width, vectors))
    W[:, active, :] = given
    return W


def chaos_indicators(system, states, t, *, params=None, dt=None, method="auto", vectors=None,
                     seed=0, deviations=None, history=False, save_every=None, tol=None,
                     maxit=None, box=None) -> ChaosIndicators:
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
    vectors : {1, 2}, optional
        Deviation vectors per orbit. One serves the exponent, MEGNO and FLI; SALI needs two
        (with one it is NaN). Default 2.
    seed : int
        Seed of the initial deviation vectors, which depend only on it and on each orbit's
        own state (:func:`deviation_vectors`), not on the batch.
    deviations : array_like, shape (n_orbits, 2n, vectors), optional
        Initial deviation vectors instead (normalised before use).
    history : bool
        Keep the running values (``.history``, at times ``.t``); off by default, which
        saves memory in large scans.
    save_every : int, optional
        Steps between recorded running values (implies ``history``; default about 200
        records).
    tol, maxit : optional
        Implicit solver settings (defaults of :mod:`phaselab.engine.status`).
    box : float or mapping, optional
        Escape region, as for :func:`phaselab.section`.

    Returns
    -------
    ChaosIndicators

    Raises
    ------
    ParameterError
        Bad arguments (non-positive or non-numeric ``t`` or ``dt``, bad states, a method
        that is not symplectic, a request over the limits).
    """
    inputs.system(system), inputs.flag(history, "history")
    vectors = 2 if vectors is None else inputs.count(vectors, "vectors", 1, 2)
    seed = inputs.count(seed, "seed", minimum=0)
    tol, maxit = inputs.implicit_solver(tol, maxit)
    values = system.param_values(params)
    used = dict(zip([p.name for p in system.parameters], values.tolist()))
    history = bool(history) or save_every is not None
    if system.kind == "map":
        n_iter = inputs.count(t, "t (the number of iterates)")
        return _map_indicators(system, states, n_iter, values, used, save_every, history, vectors,
                               seed, deviations, box)
    t = inputs.positive_number(t, "t")
    flow = system.extended() if not system.is_autonomous else system
    n = system.dof
    names = [s.name for s in system.state_symbols]
    z = inputs.states(states, 2 * n, names, "states")
    if flow is not system:
        # extended state (q, tau, p, p_tau) with tau = 0 and p_tau = -H(q, p, 0), so K = 0
        h0 = system.energy(z, params, t=0.0)
        z = np.ascontiguousarray(np.column_stack([z[:, :n], np.zeros(len(z)), z[:, n:], -np.atleast_1d(h0)]))
        lo, hi = inputs.box(system, box, positions=list(range(n)) + [n + 1 + i for i in range(n)])
    else:
        lo, hi = inputs.box(system, box)
    m = inputs.method(flow, method)
    inputs.symplectic(m)
    dt = inputs.step(dt)
    if dt is None:
        dt = 0.005 if m.order <= 2 else 0.01
    limits.check_budget(len(z), t / dt, 0, "chaos_indicators")
    n_steps = max(int(round(t / dt)), 1)
    every, n_rec = _records(n_steps, save_every, history)
    limits.check_budget(len(z), n_steps, len(z) * (n_rec * 4 + 4), "chaos_indicators")
    width = 2 * flow.dof
    active = np.ones(width, dtype=bool)
    if flow is not system:
        active[[n, width - 1]] = False  # no deviation along tau or p_tau
    W0 = (deviation_vectors(z, seed, vectors, active) if deviations is None
          else _given_deviations(deviations, len(z), width, vectors, active))
    final = np.full((len(z), 4), np.nan)
    hist = np.full((len(z), n_rec, 4), np.nan)
    status = np.zeros(len(z), dtype=np.int64)
    stop = np.full(len(z), -1, dtype=np.int64)
    cs = loops(flow, "tangent")
    W0 = np.ascontiguousarray(W0)
    if m.kind == codes.COMPOSITION:
        _composition_indicators(flow, z, W0, values, dt, n_steps, every, m.weights, lo, hi, final, hist,
                                status, stop)
    else:
        cs.tangent_flow_indicators(z, W0, values, dt, n_steps, every, m.kind, m.weights, m.A, m.b, tol,
                                   maxit, lo, hi, final, hist, status, stop)
    seeds = z if flow is system else np.column_stack([z[:, :n], z[:, n + 1:2 * n + 1]])
    t_end = np.where(status == codes.OK, n_steps * dt, np.maximum(stop - 1, 0) * dt)
    return _result(final, hist, status, t_end, every * dt * np.arange(1, n_rec + 1), seeds, m.name, dt,
                   used, history, system)


def _composition_indicators(flow, z, W0, values, dt, n_steps, every, weights, lo, hi, final, hist, status,
                            stop):
    """Run the compiled loops of a composition method, filling ``final``, ``hist``,
    ``status`` and ``stop``: where d2H/dp2 is the identity (H = p^2/2 + V(q)) and the
    system's inlined loops run, the loop that steps two orbits side by side (through the
    generic loops' kernel calls it is slower than the general loop); for the other orbits
    the general loop. Both give the same numbers."""
    cs = loops(flow, "tangent")
    block = _constant_pp(cs, z, values)
    todo = np.ones(len(z), dtype=bool)
    if block is not None and np.array_equal(block, np.eye(len(block))):
        lanes = loops(flow, "tangent_lanes")
        args = (z, W0, values, dt, n_steps, every, weights, lo, hi, final, hist, status, stop,
                np.zeros(len(z), dtype=bool))
        if lanes.runs_inlined("lanes_composition_indicators", *args):
            lanes.lanes_composition_indicators(*args)
            todo = args[-1]
            if not todo.any():
                return
    if todo.all():
        cs.tangent_composition_indicators(z, W0, values, dt, n_steps, every, weights, block is not None, lo,
                                          hi, final, hist, status, stop)
        return
    rows = np.flatnonzero(todo)
    part = [np.ascontiguousarray(a[rows]) for a in (final, hist, status, stop)]
    cs.tangent_composition_indicators(np.ascontiguousarray(z[rows]), np.ascontiguousarray(W0[rows]), values, dt,
                                      n_steps, every, weights, block is not None, lo, hi, *part)
    for whole, got in zip((final, hist, status, stop), part):
        whole[rows] = got


def _constant_pp(cs, z, values):
    """d2H/dp2 (shape (n, n)) when it is the same at every state (a kinetic energy
    quadratic in the momenta): the same matrix at the seeds and at scattered states around
    them; else None."""
    finite = z[np.all(np.isfinite(z), axis=1)]
    if not len(finite):
        return None
    rng = np.random.default_rng(7)
    probes = np.vstack([finite[:4], finite[0] + rng.normal(scale=1.0 + np.abs(finite[0]), size=(4, z.shape[1]))])
    blocks = [cs.kernel.call("hess_pp", p, values) for p in probes]
    return blocks[0] if all(np.array_equal(blocks[0], b) for b in blocks[1:]) else None


def _records(n_steps, save_every, history):
    if not history:
        return 0, 0
    every = (inputs.count(save_every, "save_every") if save_every is not None
             else max(n_steps // DEFAULT_RECORDS, 1))
    return every, n_steps // every


def _map_indicators(system, states, n_iter, values, used, save_every, history, vectors, seed,
                    deviations, box):
    from phaselab.orbits.section import map_wrapping

    width = len(system.state_symbols)
    z = inputs.states(states, width, [s.name for s in system.state_symbols], "states")
    every, n_rec = _records(n_iter, save_every, history)
    limits.check_budget(len(z), n_iter, len(z) * (n_rec * 4 + 4), "chaos_indicators")
    active = np.ones(width, dtype=bool)
    W0 = (deviation_vectors(z, seed, vectors, active) if deviations is None
          else _given_deviations(deviations, len(z), width, vectors, active))
    final = np.full((len(z), 4), np.nan)
    hist = np.full((len(z), n_rec, 4), np.nan)
    status = np.zeros(len(z), dtype=np.int64)
    stop = np.full(len(z), -1, dtype=np.int64)
    modulus, low = map_wrapping(system)
    lo, hi = inputs.box(system, box)
    cs = loops(system, "tangent")
    cs.tangent_map_indicators(z, np.ascontiguousarray(W0), values, n_iter, every, modulus, low, lo, hi,
                              final, hist, status, stop)
    t_end = np.where(status == codes.OK, float(n_iter), np.maximum(stop - 1, 0).astype(float))
    return _result(final, hist, status, t_end, every * np.arange(1, n_rec + 1, dtype=float), z, "map", 1.0,
                   used, history, system, depth=5)


def _result(final, hist, status, t_end, times, seeds, method, dt, used, history, system, depth=4):
    warn_stopped(status, t_end, dt=dt, system=system, stacklevel=depth - 1,
                 kept="their indicators cover only the time before the stop, not the whole span")
    series = {name: hist[:, :, i] for i, name in enumerate(INDICATORS)} if history else {}
    return ChaosIndicators(
        lyapunov=final[:, 0], megno=final[:, 1], fli=final[:, 2], sali=final[:, 3], t_end=t_end,
        t=times if history else np.zeros(0), history=series, status=status, seeds=seeds,
        method=method, dt=dt, params=used, system=system)


def lyapunov(system, states, t, *, params=None, dt=None, method="auto", **kwargs) -> ChaosIndicators:
    """Largest Lyapunov exponent by Benettin's algorithm on the tangent dynamics.

    The deviation vector is propagated by the derivative of the symplectic step and
    renormalised every step; the exponent is the mean logarithmic growth rate. The result
    also carries MEGNO, FLI (and SALI unless ``vectors=1``); see :func:`chaos_indicators`
    for the parameters.

    Returns
    -------
    ChaosIndicators
        ``.lyapunov`` holds the exponent of each orbit (units: 1 / model time, or per iterate
        for maps); with ``history=True``, ``.history["lyapunov"]`` its running estimate at
        times ``.t``.
    """
    return chaos_indicators(system, states, t, params=params, dt=dt, method=method, **kwargs)
