"""Orbits of a Hamiltonian system sampled at common times: :func:`trajectory`.

The work is done by the compiled ensemble loop ``run_orbits`` (``engine/loops/
steppers.py``), in parallel over orbits; this module checks the arguments, chooses the
method and the step, lifts a time-dependent H to extended phase space, and packs the result
into a :class:`~phaselab.orbits.section_result.Trajectory`.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np

from phaselab.engine import accuracy as step_accuracy
from phaselab.engine import status as codes
from phaselab.engine import inputs, limits
from phaselab.engine.status import OK, STEP_TOO_LARGE
from phaselab.orbits.stopped import warn_stopped
from phaselab.engine.compiled import loops
from phaselab.engine.integrators import choose_method, default_step
from phaselab.errors import IntegrationError, ModelError, ParameterError
from phaselab.model.angles import break_jumps

__all__ = ["trajectory", "Trajectory", "STEP_CHECK_STEPS", "STEP_CHECK_LIMIT"]

STEP_CHECK_STEPS = 100
"""Number of first steps integrated as a probe before the run, to catch a step too large."""
STEP_CHECK_LIMIT = 0.1
"""Largest energy error (in the units of ``Trajectory.energy_error``) allowed in the probe."""
MAX_SAMPLES_DEFAULT = 10_000
"""Default cap on the saved samples per orbit when ``save_every`` is not given."""


@dataclass(repr=False)
class Trajectory(codes.StatusReport):
    """Orbits sampled at common times.

    Attributes
    ----------
    t : ndarray, shape (n_times,)
        Sample times.
    states : ndarray, shape (n_orbits, n_times, 2n)
        States ``(q1..qn, p1..pn)``; samples after an orbit stopped are NaN.
    energy_error : ndarray, shape (n_orbits, n_times)
        ``(H(t) - H(0)) / max(|H(0)|, 1)``, relative where H(0) is not small.
    status : ndarray of int, shape (n_orbits,)
        Why each orbit stopped (:mod:`phaselab.engine.status`; words in ``status_text``):
        ``OK`` ran to the end, ``ENERGY_DRIFT`` ran to the end with an energy error above
        the limit, ``LEFT_BOX``, ``NOT_FINITE``, ``NOT_CONVERGED``, ``STEP_TOO_LARGE``,
        ``SINGULAR`` (H or its derivatives not finite: a collision, a negative power at 0).
    escape_time : ndarray, shape (n_orbits,)
        Time at which a stopped orbit stopped (NaN where it did not).
    method : str
        The integrator used.
    dt : float
        The step (NaN for adaptive methods).
    system : object
        The system integrated.
    params : dict
        The parameter values used.
    error_estimate : float (property)
        The relative timing error of the step, by step doubling over short pilot runs
        (:mod:`phaselab.engine.accuracy`): the relative error of periods and frequencies
        measured on these orbits. Measured by the call when ``accuracy=`` chose the step,
        else when first read. NaN for ``dop853``.
    """

    t: np.ndarray
    states: np.ndarray
    energy_error: np.ndarray
    status: np.ndarray
    escape_time: np.ndarray
    method: str
    dt: float
    system: object = None
    params: dict = field(default_factory=dict)
    measured_error: float | None = field(default=None, repr=False)

    @property
    def error_estimate(self) -> float:
        if self.measured_error is None:
            if self.system is None or not np.isfinite(self.dt) or len(self.t) < 2:
                self.measured_error = float("nan")
            else:
                self.measured_error = step_accuracy.estimate(
                    self.system, self.states[:, 0], abs(self.t[-1] - self.t[0]), self.dt, self.params,
                    self.method, float(self.t[0]))
        return self.measured_error

    def __post_init__(self):
        self.t = np.asarray(self.t, dtype=float)
        self.states = np.asarray(self.states, dtype=float)
        if self.t.ndim != 1 or self.states.ndim != 3 or self.states.shape[1] != len(self.t):
            raise ParameterError(f"Trajectory.states must have shape (n_orbits, {len(self.t)}, 2n), "
                                 f"got {self.states.shape}")
        n = self.states.shape[0]
        for name, shape in (("energy_error", (n, len(self.t))), ("status", (n,)), ("escape_time", (n,))):
            value = np.asarray(getattr(self, name), dtype=np.int64 if name == "status" else float)
            if value.shape != shape:
                raise ParameterError(f"Trajectory.{name} must have shape {shape}, got {value.shape}")
            setattr(self, name, value)

    @property
    def n_orbits(self) -> int:
        return self.states.shape[0]



    def wrapped_path(self, orbit: int = 0, *, every: int = 1) -> tuple[np.ndarray, np.ndarray]:
        """One orbit ready to draw: the model's angles wrapped into their intervals, with a
        NaN row wherever an angle jumps across its interval. ``states`` stays lifted.

        Parameters
        ----------
        orbit : int
        every : int
            Keep every ``every``-th sample.

        Returns
        -------
        t : ndarray, shape (n_shown,)
        states : ndarray, shape (n_shown, 2n)
        """
        z = self.states[orbit, ::every]
        t = self.t[::every]
        wrapping = getattr(self.system, "angle_wrapping", None)
        if wrapping is None:
            return t.copy(), z.copy()
        period, low = wrapping()
        both = break_jumps(np.column_stack([t, z]), np.r_[0.0, period], np.r_[0.0, low])
        return both[:, 0], both[:, 1:]

    def to_xarray(self):
        """An ``xarray.Dataset`` (CF attributes): ``states`` over (orbit, time, state), ..."""
        from phaselab.orbits.labelled import trajectory_dataset

        return trajectory_dataset(self)

    def plot(self, **kwargs):
        """A matplotlib figure of the orbits (:func:`phaselab.export.result_figures.trajectory_figure`)."""
        from phaselab.export.result_figures import trajectory_figure

        return trajectory_figure(self, **kwargs)

    def save(self, path, **kwargs):
        """Write .nc, .zarr, .svg, .pdf or .png (:data:`phaselab.export.SAVERS`); returns the path."""
        from phaselab.export import save

        return save(self, path, **kwargs)

    def take(self, orbits) -> "Trajectory":
        """The trajectory of the selected orbits (index, indices or boolean mask), copied."""
        try:
            idx = np.atleast_1d(np.arange(self.n_orbits)[orbits])
        except (IndexError, TypeError, ValueError):
            raise ParameterError(f"cannot select orbits {orbits!r} of {self.n_orbits}") from None
        return Trajectory(t=self.t.copy(), states=self.states[idx].copy(),
                          energy_error=self.energy_error[idx].copy(), status=self.status[idx].copy(),
                          escape_time=self.escape_time[idx].copy(), method=self.method, dt=self.dt,
                          system=self.system, params=dict(self.params))

    @classmethod
    def concat(cls, parts) -> "Trajectory":
        """One trajectory of every orbit of ``parts`` (same times, state size, method and step)."""
        parts = [p for p in parts if p is not None]
        if not parts:
            raise ParameterError("Trajectory.concat needs at least one trajectory")
        first = parts[0]
        for p in parts[1:]:
            if (not np.array_equal(p.t, first.t) or p.states.shape[2:] != first.states.shape[2:]
                    or p.method != first.method or not np.array_equal(p.dt, first.dt, equal_nan=True)):
                raise ParameterError("Trajectory.concat needs trajectories of one method and step, "
                                     "sampled at the same times, with the same state size")
        joined = {k: np.concatenate([getattr(p, k) for p in parts])
                  for k in ("states", "energy_error", "status", "escape_time")}
        return Trajectory(t=first.t.copy(), **joined, method=first.method, dt=first.dt,
                          system=first.system, params=dict(first.params))

    def __repr__(self) -> str:
        worst = np.nanmax(np.abs(self.energy_error)) if np.isfinite(self.energy_error).any() else 0.0
        return (f"Trajectory({self.n_orbits} orbits x {len(self.t)} samples, method={self.method!r}, "
                f"dt={self.dt:g}, stopped={int(self.escaped.sum())}, max |dE|={worst:.2e})")


# ----------------------------------------------------------------------------- arguments
def _times(t):
    """(t0, t1, output_times or None) from the three accepted forms of ``t``."""
    if np.ndim(t) == 0:
        return 0.0, inputs.number(t, "the end time t"), None
    arr = np.asarray(t, dtype=object)
    if arr.ndim == 1 and len(arr) == 2:
        return inputs.number(arr[0], "t0 in t=(t0, t1)"), inputs.number(arr[1], "t1 in t=(t0, t1)"), None
    try:
        times = np.asarray(t, dtype=float)
    except (TypeError, ValueError):
        raise ParameterError(f"t must be an end time, a pair (t0, t1) or an array of output "
                             f"times, got {t!r}") from None
    if times.ndim != 1 or len(times) < 3:
        raise ParameterError(f"t as an array of output times must be 1-D with at least 3 "
                             f"entries (use t=(t0, t1) for two), got shape {times.shape}")
    if not np.all(np.isfinite(times)):
        raise ParameterError("the output times t must be finite")
    spacing = np.diff(times)
    if not (np.all(spacing > 0) or np.all(spacing < 0)):
        raise ParameterError("the output times t must be strictly increasing (or decreasing)")
    if np.max(np.abs(spacing - spacing[0])) > 1e-9 * max(abs(spacing[0]), np.max(np.abs(times))):
        raise ParameterError("the output times t must be equally spaced (fixed-step integration "
                             "saves every k-th step); give t=(t0, t1) and save_every instead")
    return float(times[0]), float(times[-1]), times


# ----------------------------------------------------------------------------- the call
def trajectory(system, states, t, *, dt=None, method="auto", params=None, box=None, save_every=None,
               tol=None, maxit=None, rtol=1e-10, atol=1e-12, check_step=True,
               energy_limit=codes.ENERGY_LIMIT, accuracy=None) -> Trajectory:
    """Integrate orbits of a Hamiltonian system.

    Parameters
    ----------
    system : Hamiltonian
        Autonomous or explicitly time-dependent. A time-dependent H is integrated in
        extended phase space (``H.extended()``: time as a coordinate ``tau`` with conjugate
        momentum ``p_tau``, K = H + p_tau), seeded with ``tau = t0`` and
        ``p_tau = -H(q, p, t0)`` so that K = 0; the returned states are in the original
        ``2n`` coordinates and ``energy_error`` is that of K (absolute, since K(0) = 0).
    states : array_like, shape (2n,) or (n_orbits, 2n)
        Initial states ``(q1..qn, p1..pn)``. A single state gives ``n_orbits = 1``. A seed
        with a NaN or infinite entry does not stop the batch: that orbit gets status
        ``NOT_FINITE`` at ``t0`` (its states NaN after sample 0) and a ``RuntimeWarning``
        names it; the other orbits are integrated as usual.
    t : float, (t0, t1) or array_like
        End time (start 0), a pair of start and end times (``t1 < t0`` integrates
        backwards), or an array of at least three equally spaced output times. Model time
        units.
    dt : float, optional
        Step, > 0 (the direction follows ``t``). It is shrunk to the nearest step that fits
        a whole number of times into the span, so that the last sample is at ``t1``
        (``Trajectory.dt`` holds the step used). With an array ``t`` it must divide the
        spacing (to 1e-9 relative), else ``ParameterError``. When not given: the
        shortest linearised period at the seeds (eigenvalues of the Jacobian of the vector
        field, the compiled ``jacobian`` kernel), the driving period of a time-periodic H
        and the span, whichever is shortest, divided by 200 for second-order,
        100 for fourth-, 60 for sixth- and 40 for eighth-order methods (see
        :func:`phaselab.engine.integrators.default_step`), then fitted to the span.
    method : str
        ``"auto"`` (Yoshida 4 for a separable H, 3-stage Gauss-Legendre otherwise; the
        choice is recorded in ``Trajectory.method``), one of
        :data:`phaselab.engine.integrators.METHODS` (``leapfrog``, ``yoshida4``,
        ``yoshida6``, ``yoshida8``, ``implicit_midpoint``, ``gauss4``, ``gauss6``,
        ``rk4``), or ``"dop853"``: scipy's adaptive DOP853 with ``rtol``/``atol``, a
        reference for comparison (slow, not symplectic). A splitting method asked for a
        non-separable H raises ``ModelError``.
    params : mapping of str to float, optional
        Parameter values by name; unknown names raise ``ParameterError``.
    box : float or mapping, optional
        Escape region (:func:`phaselab.engine.inputs.box`): a number R bounds every state
        component to ``[-R, R]``, ``{"x": (-2, 2), ...}`` the named ones. An orbit leaving
        it is stopped with status ``LEFT_BOX``, and ``escape_time`` records the step at
        which it was first outside; later samples are NaN.
    save_every : int, optional
        Save every k-th step (default: every step, or fewer so that at most 10 000
        samples are kept per orbit; the final state is always saved). Not with an array
        ``t``, whose spacing fixes it.
    tol, maxit : float, int, optional
        Relative tolerance and iteration cap of the implicit (Gauss-Legendre) solve
        (defaults ``IMPLICIT_TOL`` and ``IMPLICIT_MAXIT`` of :mod:`phaselab.engine.status`).
    rtol, atol : float
        Tolerances of ``"dop853"``.
    check_step : bool
        Before the run, the first ``STEP_CHECK_STEPS`` (100) steps of every orbit are
        integrated as a probe; an orbit whose energy error there (normalised as in
        ``Trajectory.energy_error``, by ``max(|H0|, 1)``) exceeds ``STEP_CHECK_LIMIT``
        (0.1) is not integrated: it gets status ``STEP_TOO_LARGE`` and a
        ``RuntimeWarning`` suggests a smaller step. When every orbit fails the probe,
        ``IntegrationError`` is raised. ``False`` skips the probe.
    energy_limit : float
        An orbit that ran to the end with a relative energy error above this gets status
        ``ENERGY_DRIFT`` (and a ``RuntimeWarning``): its numbers are kept but not to be
        trusted (a step too large for it, or a pass through a singularity).
    accuracy : float, optional
        Instead of ``dt``: the relative timing error asked for (the relative error of periods
        and frequencies, in (0, 1)). The step is chosen by step doubling over short pilot runs
        of up to 8 of the orbits (:func:`phaselab.engine.accuracy.step_for_accuracy`), and
        the error reached is ``Trajectory.error_estimate``. The default step's error depends on
        the method and the orbit (about 1e-6 with Yoshida 4 on smooth orbits of the catalogue
        models, far less with 3-stage Gauss-Legendre): ``error_estimate`` states it.

    Returns
    -------
    Trajectory
        ``t`` (n_times,), ``states`` (n_orbits, n_times, 2n), ``energy_error``
        (n_orbits, n_times), ``status``, ``escape_time``, ``method``, ``dt`` (NaN for
        ``dop853``), ``system``, ``params``.

    Raises
    ------
    ParameterError
        A bad argument: ``states`` of the wrong shape or not real numbers, bad ``t``,
        ``dt``, ``save_every``, ``box``, ``method``, an unknown parameter, a request over
        :data:`phaselab.engine.limits.LIMITS`, a map instead of a flow.
    ModelError
        A splitting method for a Hamiltonian that is not separable.
    IntegrationError
        Every orbit failed the step probe.

    Notes
    -----
    An implicit step that does not converge within ``maxit`` iterations stops that orbit
    only: it gets status ``NOT_CONVERGED`` at that time and a ``RuntimeWarning`` names the orbits
    and times (an orbit running away to infinity ends this way with an implicit method;
    otherwise use a smaller ``dt`` or a larger ``maxit``). The rest of the batch completes.
    """
    inputs.flow(system, "trajectory()")
    prm = system.param_values(params)
    names = [s.name for s in system.state_symbols]
    Z0 = inputs.states(states, len(names), names, "states")
    t0, t1, out_times = _times(t)
    span = t1 - t0
    if span == 0:
        raise ParameterError(f"the time span is empty (t0 = t1 = {t0})")
    direction = 1.0 if span > 0 else -1.0
    dt = inputs.step(dt)
    accuracy = step_accuracy.check_accuracy(accuracy, dt, method)
    energy_limit = inputs.positive_number(energy_limit, "energy_limit")
    tol, maxit = inputs.implicit_solver(tol, maxit)

    timed = not system.is_autonomous
    work = system.extended() if timed else system
    meth = inputs.method(work, method, adaptive=True)
    n = system.dof
    if timed:
        with np.errstate(all="ignore"):
            p_tau = -np.asarray(system.energy(Z0, params, t=t0), dtype=float)
        Zw = np.concatenate([Z0[:, :n], np.full((len(Z0), 1), t0), Z0[:, n:], p_tau[:, None]], axis=1)
        box_lo, box_hi = inputs.box(system, box, positions=list(range(n)) + [n + 1 + i for i in range(n)])
    else:
        Zw = Z0.copy()
        box_lo, box_hi = inputs.box(system, box)
    Zw = np.ascontiguousarray(Zw)
    cs = loops(work)
    used_params = dict(zip(cs.kernel.param_names, map(float, prm)))
    bad_seed = ~np.all(np.isfinite(Z0), axis=1)
    if bad_seed.any():
        warnings.warn(f"seeds {np.flatnonzero(bad_seed).tolist()} have non-finite entries; those orbits "
                      f"are marked stopped at t0 = {t0:g} and the rest are integrated", RuntimeWarning,
                      stacklevel=2)

    # ------------------------------------------------------------------ step and samples
    dt_given = dt is not None
    adaptive = isinstance(meth, str)
    period = None
    if timed and system.period is not None:
        try:
            period = system.driving_period(params)
        except ModelError:
            period = None
    if accuracy is not None:
        dt, _ = step_accuracy.choose_step(system, Z0, abs(span), accuracy, params, method, t0)
    elif dt is None:
        ref = meth if not adaptive else choose_method(work)
        dt = default_step(cs, ref, Zw, prm, abs(span), period)
    if not (abs(span) / dt < 1e15):
        limits.check_budget(len(Zw), abs(span) / dt, 0, "trajectory")
    if out_times is not None:
        if save_every is not None:
            raise ParameterError("save_every cannot be combined with an array of output times t; "
                                 "their spacing fixes the samples")
        spacing = abs(out_times[1] - out_times[0])
        ratio = spacing / dt
        if abs(ratio - round(ratio)) <= 1e-9 * max(ratio, 1.0) and round(ratio) >= 1:
            per = int(round(ratio))
        elif dt_given:
            raise ParameterError(f"dt = {dt:g} does not divide the output spacing {spacing:g}; use "
                                 f"dt = {spacing / math.ceil(ratio):.10g} (or leave dt out)")
        else:
            per = max(1, math.ceil(ratio - 1e-9))
        dt = spacing / per
        save_every = per
        n_steps = per * (len(out_times) - 1)
        limits.check_budget(len(Zw), n_steps, len(Zw) * len(out_times) * (Zw.shape[1] + 1), "trajectory")
        times = out_times.copy()
    else:
        n_steps = max(1, math.ceil(abs(span) / dt - 1e-9))
        dt = abs(span) / n_steps
        if save_every is None:
            save_every = max(1, math.ceil(n_steps / MAX_SAMPLES_DEFAULT))
        else:
            save_every = inputs.count(save_every, "save_every")
        n_saves = n_steps // save_every + 2
        limits.check_budget(len(Zw), n_steps, len(Zw) * n_saves * (Zw.shape[1] + 1), "trajectory")
        steps = np.arange(0, n_steps + 1, save_every)
        if steps[-1] != n_steps:
            steps = np.append(steps, n_steps)
        times = t0 + direction * dt * steps
        times[-1] = t1
    n_saves = len(times)
    m = Zw.shape[1]

    refused = np.zeros(len(Zw), dtype=bool)
    if adaptive:
        from phaselab.engine.reference import solve_reference

        states, energy, status, stop_time = solve_reference(cs, Zw, prm, times, rtol, atol, box_lo, box_hi)
        name, dt_used = meth, float("nan")
        escape_time = np.where(status != OK, stop_time, np.nan)
    else:
        h = direction * dt
        args = (meth.kind, meth.weights, meth.A, meth.b, tol, maxit)
        if check_step:
            refused = _probe(cs, Zw, prm, h, min(n_steps, STEP_CHECK_STEPS), args, box_lo, box_hi,
                             meth.name, dt)
        states = np.full((len(Zw), n_saves, m), np.nan)
        energy = np.full((len(Zw), n_saves), np.nan)
        status = np.zeros(len(Zw), dtype=np.int64)
        stop_step = np.zeros(len(Zw), dtype=np.int64)
        run = np.flatnonzero(~refused)
        if run.size == len(Zw):
            cs.run_orbits(Zw, prm, h, n_steps, save_every, *args, box_lo, box_hi, states, energy,
                          status, stop_step)
        elif run.size:
            sub_states = np.full((run.size, n_saves, m), np.nan)
            sub_energy = np.full((run.size, n_saves), np.nan)
            sub_status = np.zeros(run.size, dtype=np.int64)
            sub_stop = np.zeros(run.size, dtype=np.int64)
            cs.run_orbits(np.ascontiguousarray(Zw[run]), prm, h, n_steps, save_every, *args, box_lo, box_hi,
                          sub_states, sub_energy, sub_status, sub_stop)
            states[run], energy[run], status[run], stop_step[run] = sub_states, sub_energy, sub_status, sub_stop
        status[refused] = STEP_TOO_LARGE
        states[refused, 0] = Zw[refused]
        energy[refused, 0] = cs.evaluate("hamiltonian", Zw[refused], prm) if refused.any() else 0.0
        escape_time = np.where(status != OK, t0 + h * stop_step, np.nan)
        name, dt_used = meth.name, float(dt)
        warn_stopped(status, escape_time, dt=dt_used, system=system,
                     started=~bad_seed, kept="they are stopped there and marked escaped", stacklevel=2)

    states[bad_seed, 0] = Zw[bad_seed]
    e0 = energy[:, :1]
    with np.errstate(invalid="ignore"):
        energy_error = (energy - e0) / np.maximum(np.abs(e0), 1.0)
    with np.errstate(invalid="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        worst = np.nanmax(np.abs(np.where(np.isfinite(energy_error), energy_error, np.nan)), axis=1)
    drift = (status == OK) & (worst > energy_limit)
    if drift.any():
        status[drift] = codes.ENERGY_DRIFT
        shown = np.flatnonzero(drift)
        warnings.warn(f"{shown.size} orbit(s) have a relative energy error above {energy_limit:g} "
                      f"(orbits {', '.join(map(str, shown[:10]))}{' ...' if shown.size > 10 else ''}, worst "
                      f"{np.nanmax(worst[drift]):.3g}); their status says so: the step is too large for "
                      "them or they pass a singularity", RuntimeWarning, stacklevel=2)
    if timed:
        keep = list(range(n)) + [n + 1 + i for i in range(n)]
        states = states[:, :, keep]
    out = Trajectory(t=times, states=np.ascontiguousarray(states), energy_error=energy_error,
                     status=status, escape_time=escape_time, method=name, dt=dt_used,
                     system=system, params=used_params)
    if accuracy is not None:     # measured at the step used (fitted to the span)
        out.measured_error = step_accuracy.estimate(system, Z0, abs(span), dt_used, params, name, t0)
    return out


def _probe(cs, Zw, prm, h, n_probe, args, lo, hi, name, dt):
    """Integrate the first ``n_probe`` steps of every orbit; the orbits whose energy error
    there already exceeds ``STEP_CHECK_LIMIT`` are refused (a mask, shape (n_orbits,)).
    When every orbit is refused, the call is refused."""
    n_orb, m = Zw.shape
    states = np.full((n_orb, n_probe + 1, m), np.nan)
    energy = np.full((n_orb, n_probe + 1), np.nan)
    status = np.zeros(n_orb, dtype=np.int64)
    stop_step = np.zeros(n_orb, dtype=np.int64)
    cs.run_orbits(Zw, prm, h, n_probe, 1, *args, lo, hi, states, energy, status, stop_step)
    with np.errstate(invalid="ignore"):
        err = np.abs(energy - energy[:, :1]) / np.maximum(np.abs(energy[:, :1]), 1.0)
    err = np.where(np.isfinite(err), err, 0.0)
    worst = err.max(axis=1)
    bad = worst > STEP_CHECK_LIMIT
    if not bad.any():
        return bad
    o = int(np.argmax(worst))
    k = int(np.argmax(err[o] > STEP_CHECK_LIMIT))
    advice = (f"try dt = {dt / 10:.3g} or leave dt out for the default step (pass check_step=False "
              "to integrate anyway)")
    if bad.all():
        raise IntegrationError(
            f"dt = {dt:g} is too large for {name}: every orbit has an energy error above "
            f"{STEP_CHECK_LIMIT} within {n_probe} steps (orbit {o}: {worst[o]:.3g} after {k} steps), so "
            f"the result would be meaningless; {advice}")
    shown = np.flatnonzero(bad)
    warnings.warn(f"dt = {dt:g} is too large for {name} on {shown.size} orbit(s) "
                  f"({', '.join(map(str, shown[:10]))}{' ...' if shown.size > 10 else ''}): their energy "
                  f"error exceeds {STEP_CHECK_LIMIT} within {n_probe} steps, so they are not integrated "
                  f"(status 'step too large'); {advice}", RuntimeWarning, stacklevel=3)
    return bad
