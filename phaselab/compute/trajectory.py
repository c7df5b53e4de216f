"""Orbits of a Hamiltonian system sampled at common times: :func:`trajectory`.

The work is done by the compiled ensemble loop ``run_orbits`` (``compute/loops/
steppers.py``), in parallel over orbits; this module checks the arguments, chooses the
method and the step, lifts a time-dependent H to extended phase space, and packs the result
into a :class:`~phaselab.compute.results.Trajectory`.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Mapping

import numpy as np

from phaselab.model.params import finite_number
from phaselab.compute.integrators import (ADAPTIVE, choose_method, compiled, default_step,
                                          get_method)
from phaselab.compute.results import Trajectory
from phaselab.errors import IntegrationError, ModelError

__all__ = ["trajectory", "Trajectory", "STEP_CHECK_STEPS", "STEP_CHECK_LIMIT"]

OK, LEFT_BOX, NOT_FINITE, NOT_CONVERGED = 0, 1, 2, 3  # the status codes of steppers.py

STEP_CHECK_STEPS = 100
"""Number of first steps integrated as a probe before the run, to catch a step too large."""
STEP_CHECK_LIMIT = 0.1
"""Largest energy error (in the units of ``Trajectory.energy_error``) allowed in the probe."""
MAX_SAMPLES_DEFAULT = 10_000
"""Default cap on the saved samples per orbit when ``save_every`` is not given."""
MAX_OUTPUT_BYTES = 4 * 2**30
"""Refuse runs whose saved states alone would exceed this (pass a larger ``save_every``)."""


# ----------------------------------------------------------------------------- arguments
def _check_system(system):
    if getattr(system, "kind", None) != "flow" or not hasattr(system, "expr"):
        what = "an area-preserving map" if getattr(system, "kind", None) == "map" else type(system).__name__
        raise IntegrationError(f"trajectory() integrates a Hamiltonian flow, got {what}; "
                               "iterate a map with its own methods")


def _seeds(system, state0) -> np.ndarray:
    names = [s.name for s in system.state_symbols]
    try:
        Z = np.array(state0, dtype=float)
    except (TypeError, ValueError):
        raise ModelError(f"state0 must be numbers of shape (2n,) or (n_orbits, 2n) ordered "
                         f"({', '.join(names)}), got {state0!r}") from None
    if Z.ndim == 1:
        Z = Z[None, :]
    if Z.ndim != 2 or Z.shape[1] != len(names) or Z.shape[0] == 0:
        raise ModelError(f"state0 must have shape ({len(names)},) or (n_orbits, {len(names)}) with "
                         f"columns ({', '.join(names)}); got shape {np.shape(state0)}")
    return np.ascontiguousarray(Z)


def _number(value, what: str) -> float:
    return finite_number(value, what, IntegrationError)


def _times(t):
    """(t0, t1, output_times or None) from the three accepted forms of ``t``."""
    if np.ndim(t) == 0:
        return 0.0, _number(t, "the end time t"), None
    arr = np.asarray(t, dtype=object)
    if arr.ndim == 1 and len(arr) == 2:
        return _number(arr[0], "t0 in t=(t0, t1)"), _number(arr[1], "t1 in t=(t0, t1)"), None
    try:
        times = np.asarray(t, dtype=float)
    except (TypeError, ValueError):
        raise IntegrationError(f"t must be an end time, a pair (t0, t1) or an array of output "
                               f"times, got {t!r}") from None
    if times.ndim != 1 or len(times) < 3:
        raise IntegrationError(f"t as an array of output times must be 1-D with at least 3 "
                               f"entries (use t=(t0, t1) for two), got shape {times.shape}")
    if not np.all(np.isfinite(times)):
        raise IntegrationError("the output times t must be finite")
    spacing = np.diff(times)
    if not (np.all(spacing > 0) or np.all(spacing < 0)):
        raise IntegrationError("the output times t must be strictly increasing (or decreasing)")
    if np.max(np.abs(spacing - spacing[0])) > 1e-9 * max(abs(spacing[0]), np.max(np.abs(times))):
        raise IntegrationError("the output times t must be equally spaced (fixed-step integration "
                               "saves every k-th step); give t=(t0, t1) and save_every instead")
    return float(times[0]), float(times[-1]), times


def _box(system, box, m_work: int):
    lo = np.full(m_work, -np.inf)
    hi = np.full(m_work, np.inf)
    if box is None:
        return lo, hi
    names = [s.name for s in system.state_symbols]
    m = len(names)
    # index of each original state component in the (possibly extended) work state
    n = system.dof
    pos = list(range(m)) if m_work == m else list(range(n)) + [n + 1 + i for i in range(n)]
    if isinstance(box, Mapping):
        for key, bounds in box.items():
            name = getattr(key, "name", key)
            if name not in names:
                raise IntegrationError(f"box names unknown state component {key!r}; the state is "
                                       f"({', '.join(names)})")
            try:
                a, b = (float(x) for x in bounds)
            except (TypeError, ValueError):
                raise IntegrationError(f"box[{name!r}] must be a pair (lo, hi), got {bounds!r}") from None
            if np.isnan(a) or np.isnan(b) or not a < b:
                raise IntegrationError(f"box[{name!r}] = ({a}, {b}) needs lo < hi")
            j = pos[names.index(name)]
            lo[j], hi[j] = a, b
        return lo, hi
    try:
        blo, bhi = (np.asarray(x, dtype=float) for x in box)
    except (TypeError, ValueError):
        raise IntegrationError("box must be a dict of state name -> (lo, hi), or a pair of arrays "
                               f"(lo, hi) of shape ({m},)") from None
    if blo.shape != (m,) or bhi.shape != (m,) or np.isnan(blo).any() or np.isnan(bhi).any() \
            or not np.all(blo < bhi):
        raise IntegrationError(f"box arrays (lo, hi) must have shape ({m},) with lo < hi everywhere "
                               f"(use -inf / inf for no bound)")
    lo[pos], hi[pos] = blo, bhi
    return lo, hi


def _resolve_method(method, work):
    if method is None or str(method).lower() == "auto":
        return choose_method(work)
    if str(method).lower() in ADAPTIVE:
        return str(method).lower()
    return get_method(method, work)


# ----------------------------------------------------------------------------- the call
def trajectory(system, state0, t, dt=None, method="auto", params=None, box=None, save_every=None,
               tol=1e-14, maxit=100, rtol=1e-10, atol=1e-12, check_step=True) -> Trajectory:
    """Integrate orbits of a Hamiltonian system.

    Parameters
    ----------
    system : Hamiltonian
        Autonomous or explicitly time-dependent. A time-dependent H is integrated in
        extended phase space (``H.extended()``: time as a coordinate ``tau`` with conjugate
        momentum ``p_tau``, K = H + p_tau), seeded with ``tau = t0`` and
        ``p_tau = -H(q, p, t0)`` so that K = 0; the returned states are in the original
        ``2n`` coordinates and ``energy_error`` is that of K (absolute, since K(0) = 0).
    state0 : array_like, shape (2n,) or (n_orbits, 2n)
        Initial states ``(q1..qn, p1..pn)``. A single state gives ``n_orbits = 1``. A seed
        with a NaN or infinite entry does not stop the batch: that orbit is marked
        ``escaped`` at ``t0`` (its states NaN after sample 0) and a ``RuntimeWarning``
        names it; the other orbits are integrated as usual.
    t : float, (t0, t1) or array_like
        End time (start 0), a pair of start and end times (``t1 < t0`` integrates
        backwards), or an array of at least three equally spaced output times. Model time
        units.
    dt : float, optional
        Step, > 0 (the direction follows ``t``). It is shrunk to the nearest step that fits
        a whole number of times into the span, so that the last sample is at ``t1``
        (``Trajectory.dt`` holds the step used). With an array ``t`` it must divide the
        spacing (to 1e-9 relative), else ``IntegrationError``. When not given: the
        shortest linearised period at the seeds (eigenvalues of the Jacobian of the vector
        field, the compiled ``jacobian`` kernel), the driving period of a time-periodic H
        and the span, whichever is shortest, divided by 200 for second-order,
        100 for fourth-, 60 for sixth- and 40 for eighth-order methods (see
        :func:`phaselab.compute.integrators.default_step`), then fitted to the span.
    method : str
        ``"auto"`` (Yoshida 4 for a separable H, 3-stage Gauss-Legendre otherwise; the
        choice is recorded in ``Trajectory.method``), one of
        :data:`phaselab.compute.integrators.METHODS` (``leapfrog``, ``yoshida4``,
        ``yoshida6``, ``yoshida8``, ``implicit_midpoint``, ``gauss4``, ``gauss6``,
        ``rk4``), or ``"dop853"``: scipy's adaptive DOP853 with ``rtol``/``atol``, a
        reference for comparison (slow, not symplectic). A splitting method asked for a
        non-separable H raises ``IntegrationError``.
    params : mapping of str to float, optional
        Parameter values by name; unknown names raise ``ParameterError``.
    box : dict or (lo, hi), optional
        ``{"x": (-2, 2), ...}`` by state name, or two arrays of shape ``(2n,)``. An orbit
        leaving it is stopped, marked ``escaped``, and ``escape_time`` records the step
        at which it was first outside; later samples are NaN.
    save_every : int, optional
        Save every k-th step (default: every step, or fewer so that at most 10 000
        samples are kept per orbit; the final state is always saved). Not with an array
        ``t``, whose spacing fixes it.
    tol, maxit : float, int
        Relative tolerance and iteration cap of the implicit (Gauss-Legendre) solve.
    rtol, atol : float
        Tolerances of ``"dop853"``.
    check_step : bool
        Before the run, the first ``STEP_CHECK_STEPS`` (100) steps of every orbit are
        integrated as a probe; if any orbit's energy error (normalised as in
        ``Trajectory.energy_error``, by ``max(|H0|, 1)``) exceeds ``STEP_CHECK_LIMIT``
        (0.1), ``IntegrationError`` is raised with a suggested smaller step, since the
        result would be numerical garbage. ``False`` skips the probe.

    Returns
    -------
    Trajectory
        ``t`` (n_times,), ``states`` (n_orbits, n_times, 2n), ``energy_error``
        (n_orbits, n_times), ``escaped``, ``escape_time``, ``method``, ``dt`` (NaN for
        ``dop853``), ``system``, ``params``.

    Raises
    ------
    ModelError
        ``state0`` of the wrong width or not numeric.
    ParameterError
        Unknown parameter name or non-finite value.
    IntegrationError
        Bad ``t``, ``dt``, ``save_every``, ``box`` or ``method``; a step found too large by
        the probe; an output too large for memory.

    Notes
    -----
    An implicit step that does not converge within ``maxit`` iterations stops that orbit
    only: it is marked ``escaped`` at that time and a ``RuntimeWarning`` names the orbits
    and times (an orbit running away to infinity ends this way with an implicit method;
    otherwise use a smaller ``dt`` or a larger ``maxit``). The rest of the batch completes.
    """
    _check_system(system)
    prm = system.param_values(params)
    Z0 = _seeds(system, state0)
    t0, t1, out_times = _times(t)
    span = t1 - t0
    if span == 0:
        raise IntegrationError(f"the time span is empty (t0 = t1 = {t0})")
    direction = 1.0 if span > 0 else -1.0

    timed = not system.is_autonomous
    work = system.extended() if timed else system
    meth = _resolve_method(method, work)
    n = system.dof
    if timed:
        with np.errstate(all="ignore"):
            p_tau = -np.asarray(system.energy(Z0, params, t=t0), dtype=float)
        Zw = np.concatenate([Z0[:, :n], np.full((len(Z0), 1), t0), Z0[:, n:], p_tau[:, None]], axis=1)
    else:
        Zw = Z0.copy()
    Zw = np.ascontiguousarray(Zw)
    box_lo, box_hi = _box(system, box, Zw.shape[1])
    cs = compiled(work)
    used_params = dict(zip(cs.param_names, map(float, prm)))
    bad_seed = ~np.all(np.isfinite(Z0), axis=1)
    if bad_seed.any():
        warnings.warn(f"seeds {np.flatnonzero(bad_seed).tolist()} have non-finite entries; those orbits "
                      f"are marked escaped at t0 = {t0:g} and the rest are integrated", RuntimeWarning,
                      stacklevel=2)

    # ------------------------------------------------------------------ step and samples
    dt_given = dt is not None
    if dt_given:
        dt = _number(dt, "dt")
        if dt <= 0:
            raise IntegrationError(f"dt must be > 0, got {dt}; to integrate backwards give "
                                   "t=(t0, t1) with t1 < t0")
    adaptive = isinstance(meth, str)
    period = None
    if timed and system.period is not None:
        try:
            period = system.driving_period(params)
        except ModelError:
            period = None
    if dt is None:
        ref = meth if not adaptive else choose_method(work)
        dt = default_step(cs, ref, Zw, prm, abs(span), period)
    if out_times is not None:
        if save_every is not None:
            raise IntegrationError("save_every cannot be combined with an array of output times t; "
                                   "their spacing fixes the samples")
        spacing = abs(out_times[1] - out_times[0])
        ratio = spacing / dt
        if abs(ratio - round(ratio)) <= 1e-9 * max(ratio, 1.0) and round(ratio) >= 1:
            per = int(round(ratio))
        elif dt_given:
            raise IntegrationError(f"dt = {dt:g} does not divide the output spacing {spacing:g}; use "
                                   f"dt = {spacing / math.ceil(ratio):.10g} (or leave dt out)")
        else:
            per = max(1, math.ceil(ratio - 1e-9))
        dt = spacing / per
        save_every = per
        n_steps = per * (len(out_times) - 1)
        times = out_times.copy()
    else:
        n_steps = max(1, math.ceil(abs(span) / dt - 1e-9))
        dt = abs(span) / n_steps
        if save_every is None:
            save_every = max(1, math.ceil(n_steps / MAX_SAMPLES_DEFAULT))
        else:
            if isinstance(save_every, bool) or int(save_every) != save_every or save_every < 1:
                raise IntegrationError(f"save_every must be a positive integer, got {save_every!r}")
            save_every = int(save_every)
        steps = np.arange(0, n_steps + 1, save_every)
        if steps[-1] != n_steps:
            steps = np.append(steps, n_steps)
        times = t0 + direction * dt * steps
        times[-1] = t1
    n_saves = len(times)
    m = Zw.shape[1]
    if len(Zw) * n_saves * m * 8 > MAX_OUTPUT_BYTES:
        raise IntegrationError(f"{len(Zw)} orbits x {n_saves} samples x {m} components would take "
                               f"{len(Zw) * n_saves * m * 8 / 2**30:.1f} GiB; pass a larger save_every")

    if adaptive:
        from phaselab.compute.reference import solve_reference

        states, energy, status, stop_time = solve_reference(cs, Zw, prm, times, rtol, atol, box_lo, box_hi)
        name, dt_used = meth, float("nan")
        escape_time = np.where(status != OK, stop_time, np.nan)
    else:
        h = direction * dt
        tol = _number(tol, "tol")
        if not tol > 0:
            raise IntegrationError(f"tol must be > 0, got {tol}")
        if isinstance(maxit, bool) or int(maxit) != maxit or maxit < 1:
            raise IntegrationError(f"maxit must be a positive integer, got {maxit!r}")
        args = (meth.kind, meth.weights, meth.A, meth.b, float(tol), int(maxit), box_lo, box_hi)
        if check_step:
            _probe(cs, Zw, prm, h, min(n_steps, STEP_CHECK_STEPS), args, meth.name, dt, abs(span))
        states = np.full((len(Zw), n_saves, m), np.nan)
        energy = np.full((len(Zw), n_saves), np.nan)
        status = np.zeros(len(Zw), dtype=np.int64)
        stop_step = np.zeros(len(Zw), dtype=np.int64)
        cs.run_orbits(Zw, prm, h, n_steps, save_every, *args[:6], box_lo, box_hi, states, energy,
                      status, stop_step)
        escape_time = np.where(status != OK, t0 + h * stop_step, np.nan)
        name, dt_used = meth.name, float(dt)
        stuck = np.flatnonzero(status == NOT_CONVERGED)
        if stuck.size:
            where = ", ".join(f"orbit {o} at t = {t0 + h * (stop_step[o] - 1):.6g}" for o in stuck[:10])
            warnings.warn(f"the implicit {meth.name} step did not converge in {maxit} iterations for "
                          f"{where}{' ...' if stuck.size > 10 else ''}; those orbits are stopped and "
                          "marked escaped. Unless they were running away, use a smaller dt or a larger "
                          "maxit", RuntimeWarning, stacklevel=2)

    states[bad_seed, 0] = Zw[bad_seed]
    e0 = energy[:, :1]
    with np.errstate(invalid="ignore"):
        energy_error = (energy - e0) / np.maximum(np.abs(e0), 1.0)
    if timed:
        keep = list(range(n)) + [n + 1 + i for i in range(n)]
        states = states[:, :, keep]
    return Trajectory(t=times, states=np.ascontiguousarray(states), energy_error=energy_error,
                      escaped=status != OK, escape_time=escape_time, method=name, dt=dt_used,
                      system=system, params=used_params, status=status)


def _probe(cs, Zw, prm, h, n_probe, args, name, dt, span):
    """Integrate the first ``n_probe`` steps of every orbit and refuse a step whose energy
    error there already exceeds ``STEP_CHECK_LIMIT``."""
    n_orb, m = Zw.shape
    states = np.full((n_orb, n_probe + 1, m), np.nan)
    energy = np.full((n_orb, n_probe + 1), np.nan)
    status = np.zeros(n_orb, dtype=np.int64)
    stop_step = np.zeros(n_orb, dtype=np.int64)
    kind, weights, A, b, tol, maxit, lo, hi = args
    cs.run_orbits(Zw, prm, h, n_probe, 1, kind, weights, A, b, tol, maxit, lo, hi, states, energy,
                  status, stop_step)
    with np.errstate(invalid="ignore"):
        err = np.abs(energy - energy[:, :1]) / np.maximum(np.abs(energy[:, :1]), 1.0)
    err = np.where(np.isfinite(err), err, 0.0)
    worst = err.max(axis=1)
    o = int(np.argmax(worst))
    if worst[o] > STEP_CHECK_LIMIT:
        k = int(np.argmax(err[o] > STEP_CHECK_LIMIT))
        raise IntegrationError(
            f"dt = {dt:g} is too large for {name}: orbit {o} has an energy error of {worst[o]:.3g} "
            f"(more than {STEP_CHECK_LIMIT}) after {k} steps, so the result would be meaningless; "
            f"try dt = {dt / 10:.3g} or leave dt out for the default step "
            "(pass check_step=False to integrate anyway)")
