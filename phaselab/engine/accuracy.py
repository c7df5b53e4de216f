"""Integration accuracy by step doubling: the error a fixed step gives, and the step that an
asked accuracy needs.

The measure is the *relative timing error*: short pilot runs of a few orbits of the batch,
one with the step ``h`` and one with ``h / 2`` over the same span ``T``, end ``dz`` apart in
phase space. For a method of order ``p`` the run with ``h`` errs by about
``E = |dz| 2^p / (2^p - 1)`` (Richardson's step-doubling estimate, common practice; the
order is that of the method table in :mod:`phaselab.engine.integrators`). Divided by the
phase-space speed ``|dz/dt|`` there, ``E`` is the time by which the orbit runs ahead or
behind, and per unit of elapsed time, ``E / (|dz/dt| T)``, it is the relative error of
everything timed along the orbit: on an invariant torus a phase error growing like
``d_omega t`` gives exactly ``d_omega / omega``, the relative error of a frequency or period.
It does not depend on units or on the size of the orbit.

The pilot span is ``PILOT_SCALES`` shortest linear time scales (the scale
:func:`phaselab.engine.integrators.default_step` uses), at least 8 steps, at most the
span asked for; it runs ``PILOT_ORBITS`` orbits spread over the batch, and the estimate is
the largest of theirs. A chaotic orbit separates runs exponentially, so its estimate is an
upper bound on the local error.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np

from phaselab.engine import status as codes

from phaselab.engine import inputs, limits
from phaselab.engine.compiled import loops
from phaselab.engine.integrators import STEPS_PER_PERIOD, linear_time_scale
from phaselab.errors import IntegrationError, ParameterError

PILOT_ORBITS = 8
"""Orbits of a batch used in the pilot runs (spread evenly over the batch)."""
PILOT_SCALES = 2.0
"""Length of the pilot runs, in shortest linear time scales."""
SAFETY = 0.8
"""Factor on the step predicted from the error's order."""
MAX_ROUNDS = 5
"""Pilot rounds when choosing a step for an asked accuracy."""


@dataclass
class Pilot:
    """What a pilot run needs: the compiled system, the method and the pilot seeds.

    Attributes
    ----------
    cs : LoopSet
        Loops of the (possibly extended) autonomous system.
    method : Method
    seeds : ndarray, shape (k, m)
        Pilot seeds in the integrated coordinates (extended phase space for a driven H).
    prm : ndarray
    keep : ndarray of int
        Positions of the system's own ``2n`` coordinates among the ``m``.
    scale : float
        Shortest linear time scale (model time).
    span : float
        Length of the whole run asked for (model time, > 0).
    """

    cs: object
    method: object
    seeds: np.ndarray
    prm: np.ndarray
    keep: np.ndarray
    scale: float
    span: float


def pilot(system, states, span, params=None, method="auto", t0=0.0) -> Pilot | None:
    """Prepare pilot runs for ``system`` from the seeds ``states`` (n_orbits, 2n) over a run of
    length ``span``; None for the adaptive ``"dop853"`` (it has tolerances, not a step)."""
    meth_name = method.lower() if isinstance(method, str) else method
    n = system.dof
    prm = system.param_values(params)
    Z0 = np.atleast_2d(np.asarray(states, dtype=float))
    Z0 = Z0[np.all(np.isfinite(Z0), axis=1)]
    if len(Z0) > PILOT_ORBITS:
        Z0 = Z0[np.linspace(0, len(Z0) - 1, PILOT_ORBITS).round().astype(int)]
    period = None
    if system.is_autonomous:
        work, Zw, keep = system, Z0, np.arange(2 * n)
    else:
        work = system.extended()
        pdict = dict(zip((p.name for p in system.parameters), prm.tolist()))
        with np.errstate(all="ignore"):
            p_tau = -np.atleast_1d(np.asarray(system.energy(Z0, pdict, t=t0), dtype=float))
        Zw = np.concatenate([Z0[:, :n], np.full((len(Z0), 1), t0), Z0[:, n:], p_tau[:, None]], axis=1)
        keep = np.array(list(range(n)) + [n + 1 + i for i in range(n)])
        if system.period is not None:
            period = system.driving_period(pdict)
    meth = inputs.method(work, meth_name, adaptive=True)
    if isinstance(meth, str):
        return None
    cs = loops(work)
    Zw = np.ascontiguousarray(Zw)
    scale = min(linear_time_scale(cs, Zw, prm), abs(span))
    if period is not None and np.isfinite(period) and period > 0:
        scale = min(scale, period)
    return Pilot(cs, meth, Zw, prm, keep, float(scale), float(abs(span)))


def timing_error(p: Pilot, h: float) -> float:
    """The relative timing error of the step ``h`` (see the module docstring): the largest
    over the pilot orbits, NaN when no pilot orbit ran to the end."""
    h = abs(float(h))
    if len(p.seeds) == 0 or not (np.isfinite(h) and h > 0):
        return float("nan")
    t_pilot = min(p.span, max(PILOT_SCALES * p.scale, 8 * h))
    steps = max(1, int(round(t_pilot / h)))
    limits.check_budget(len(p.seeds), 3 * steps, 0, "the step-doubling estimate")
    coarse = _final_states(p, h, steps)
    fine = _final_states(p, h / 2, 2 * steps)
    order = p.method.order
    err = np.linalg.norm((coarse - fine)[:, p.keep], axis=1) * 2.0 ** order / (2.0 ** order - 1.0)
    with np.errstate(all="ignore"):
        speed = np.linalg.norm(p.cs.evaluate("vector_field", fine, p.prm)[:, p.keep], axis=1)
        rate = np.where(err == 0.0, 0.0, err / speed) / (steps * h)
    rate = rate[np.isfinite(rate)]
    return float(rate.max()) if rate.size else float("nan")


def _final_states(p: Pilot, h: float, steps: int) -> np.ndarray:
    """States after ``steps`` steps of ``h`` from the pilot seeds, NaN where an orbit stopped."""
    k, m = p.seeds.shape
    states = np.full((k, 2, m), np.nan)
    energy = np.full((k, 2), np.nan)
    status = np.zeros(k, dtype=np.int64)
    stop = np.zeros(k, dtype=np.int64)
    free = np.full(m, np.inf)
    meth = p.method
    p.cs.run_orbits(p.seeds, p.prm, h, steps, steps, meth.kind, meth.weights, meth.A, meth.b,
                    codes.IMPLICIT_TOL, codes.IMPLICIT_MAXIT, -free, free, states, energy, status, stop)
    out = states[:, 1]
    out[status != codes.OK] = np.nan
    return out


def step_for_accuracy(p: Pilot, accuracy: float) -> tuple[float, float]:
    """The step whose relative timing error is at most ``accuracy``, and that error.

    Starts from the default step, predicts the step from the method's order
    (``h (accuracy / e)^(1/p)`` times :data:`SAFETY`), and checks it with a new pilot, at
    most :data:`MAX_ROUNDS` times. Steps lie on the ladder 2^(k/4), like the default step.

    Raises
    ------
    IntegrationError
        No pilot orbit ran to the end, so no error can be measured.
    """
    order = p.method.order
    if not (np.isfinite(p.scale) and p.scale > 0):
        raise ParameterError("no time scale to choose a step from (the linearisation at the seeds does "
                             "not move); give dt=... instead of accuracy")
    h = _ladder(p.scale / STEPS_PER_PERIOD.get(order, 100))   # the default step (default_step's rule)
    best = None
    last = None
    for _ in range(MAX_ROUNDS):
        e = timing_error(p, h)
        if not np.isfinite(e):
            raise IntegrationError(f"the accuracy cannot be measured at dt = {h:.3g}: no pilot orbit "
                                   "gives an error (they stop early, or sit at an equilibrium); give dt instead")
        if e <= accuracy and (best is None or h > best[0]):
            best = (h, e)
        if last is not None and h < last[0] and e > 0.5 * last[1] and e > accuracy:
            break       # the error no longer falls with the step: rounding dominates
        factor = SAFETY * (accuracy / e) ** (1.0 / order) if e > 0 else 8.0
        factor = min(max(factor, 0.05), 8.0)
        if e <= accuracy and factor < 1.25:
            return h, e
        last = (h, e)
        h = _ladder(h * factor)
    if best is not None:
        return best
    warnings.warn(f"accuracy {accuracy:.3g} was not reached: the smallest relative timing error measured is "
                  f"{last[1]:.3g} (at dt = {last[0]:.3g}), where rounding errors take over; that step is used",
                  RuntimeWarning, stacklevel=3)
    return last


def _ladder(h: float) -> float:
    """``h`` rounded down onto the ladder 2^(k/4) (as the default step is)."""
    return float(2.0 ** (math.floor(4.0 * math.log2(h)) / 4.0))


def check_accuracy(accuracy, dt, method) -> float | None:
    """The ``accuracy=`` argument: None, or a relative error in (0, 1) given without ``dt``
    and for a fixed-step method."""
    if accuracy is None:
        return None
    accuracy = inputs.tolerance(accuracy, "accuracy")
    if dt is not None:
        raise ParameterError("give either dt or accuracy, not both (accuracy chooses the step)")
    if isinstance(method, str) and method.lower() == "dop853":
        raise ParameterError("accuracy chooses the step of a fixed-step method; dop853 adapts its step "
                             "to rtol and atol instead")
    return accuracy


def choose_step(system, states, span, accuracy, params=None, method="auto", t0=0.0) -> tuple[float, float]:
    """The step for ``accuracy`` (see :func:`step_for_accuracy`) of a run of ``system`` from
    ``states`` over ``span`` (model time): ``(dt, relative timing error at dt)``."""
    p = pilot(system, states, span, params, method, t0)
    if p is None or len(p.seeds) == 0:
        raise ParameterError("accuracy needs a fixed-step method and at least one finite seed")
    return step_for_accuracy(p, accuracy)


def estimate(system, states, span, dt, params=None, method="auto", t0=0.0) -> float:
    """The relative timing error of the step ``dt`` (NaN for dop853 or when it cannot be
    measured)."""
    p = pilot(system, states, span, params, method, t0)
    if p is None or dt is None or not np.isfinite(dt):
        return float("nan")
    return timing_error(p, dt)


def record_span(system, how, t, n, params, t_max) -> float:
    """The model time a frequency record of ``n`` samples spans: ``t`` sampled in time, ``n - 1``
    driving periods stroboscopically, ``t_max`` (or unknown: inf) for a plane section."""
    if how == "time":
        return inputs.positive_number(t, "t")
    if how == "stroboscopic":
        pdict = dict(zip((p.name for p in system.parameters), system.param_values(params).tolist()))
        return system.driving_period(pdict) * max(n - 1, 1)
    return np.inf if t_max is None else inputs.positive_number(t_max, "t_max")


def result_estimate(res) -> float:
    """The relative timing error of the step of a frequency result (``Frequencies``), NaN for
    maps, dop853 and results without their system."""
    if res.system is None or res.system.kind == "map" or not np.isfinite(res.dt):
        return float("nan")
    span = res.sample_step * (res.n_samples - 1) if res.sampling == "time" else np.inf
    return estimate(res.system, res.seeds, span, res.dt, res.params, res.method)
