"""Sampling orbits for frequency analysis: the checked seeds and sampling plan (a flow at a fixed
time step, a map per iterate, a section per crossing), the angle periods, and the samples
themselves (:func:`sample_orbits`, the one place where orbits are sampled for frequencies).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from phaselab.engine import accuracy as step_accuracy
from phaselab.engine import inputs, limits
from phaselab.engine.status import OK, TIME_LIMIT
from phaselab.errors import ParameterError

DEFAULT_SAMPLES = 2048
"""Samples per orbit when ``n`` is not given."""
MIN_SAMPLES = 32
"""Fewest samples accepted (each half of the orbit must still hold a few periods)."""


# ----------------------------------------------------------------------------- argument checks
def check_seeds(system, seeds):
    """Seeds as a (n_orbits, 2n) float array (:func:`phaselab.engine.inputs.states`); a
    ShellSeeds must be valid everywhere. Non-finite rows are kept: the loops flag them."""
    from phaselab.orbits.seeds import ShellSeeds

    names = [s.name for s in system.state_symbols]
    if isinstance(seeds, ShellSeeds):
        if not np.all(seeds.valid):
            bad = np.flatnonzero(~np.asarray(seeds.valid)).tolist()
            raise ParameterError(f"seeds {bad[:10]} have no state on the shell; pass "
                                 "seeds.valid_states()")
        seeds = seeds.states
    return inputs.states(seeds, len(names), names)


def sampling_plan(system, plane, t, n):
    """Which sampling a call asks for, with its count of samples."""
    is_map = system.kind == "map"
    if is_map:
        if plane is not None:
            raise ParameterError("plane is not used for a map (its iterates are the samples); "
                                 "leave it out")
        if t is not None:
            raise ParameterError("a map is sampled per iterate: give the number of iterates "
                                 "samples=, not t")
        return "map"
    where = inputs.plane(system, plane)
    if where.kind == "none":
        if t is None:
            raise ParameterError("t (the length of the record, model time) is needed to sample a "
                                 "flow in time; or give plane={...} or 'stroboscopic' for a section")
        return "time"
    if t is not None:
        raise ParameterError("t is the length of a record sampled in time; a section is sampled "
                             "per crossing (give samples=, and t_max to cap the time)")
    if where.kind == "stroboscopic":
        return "stroboscopic"
    where.single()
    return "plane"


def angle_periods(system, angles):
    """{coordinate index: period} of the coordinates read as angles."""
    out = {}
    if angles is None:   # the model's own angles (a map's modulus, a flow's angles=)
        period, _ = system.angle_wrapping()
        return {i: float(period[i]) for i in range(system.dof) if period[i] > 0}
    if not isinstance(angles, Mapping):
        raise ParameterError(f"angles must map coordinate names to their periods, e.g. "
                             f"{{'theta': 2*pi}}, got {angles!r}")
    for name, period in angles.items():
        i = inputs.state_index(system, name, "angle in angles")
        if i >= system.dof:
            raise ParameterError(f"angles: {name!r} is a momentum; name coordinates")
        out[i] = inputs.positive_number(period, f"the period of angle {name!r}")
    return out


# ----------------------------------------------------------------------------- samples
@dataclass
class Samples:
    states: np.ndarray          # (n_orbits, n_samples, 2n), lifted (no wrapping)
    increments: np.ndarray | None  # (n_orbits, n_samples - 1, 2n) one-step lifted advances (maps)
    complete: np.ndarray        # (n_orbits,) bool: all samples present
    status: np.ndarray          # (n_orbits,) int
    step: float                 # model time between samples (1 per iterate/crossing/period)
    unit: str                   # "unit time", "iterate", "crossing", "driving period"
    method: str
    dt: float
    plane: dict | None
    fixed_dof: int | None
    drive: float | None         # driving frequency in the sample unit (time sampling, driven)
    error: float | None = None  # relative timing error of the step, when accuracy chose it


def sample_orbits(system, Z0, how, n, t, params, dt, method, plane, direction, box, t_max, accuracy=None):
    """The samples of every orbit, from the public trajectory / section API (flows) or the
    compiled map iteration (maps). The one place where orbits are produced. ``accuracy``
    chooses the step (:mod:`phaselab.engine.accuracy`) and is measured at the step used."""
    if how == "map":
        if accuracy is not None:
            raise ParameterError("accuracy chooses an integration step; a map is iterated exactly")
        return map_samples(system, Z0, n, params, box)
    accuracy = step_accuracy.check_accuracy(accuracy, dt, method)
    if accuracy is not None:
        span = step_accuracy.record_span(system, how, t, n, params, t_max)
        dt, _ = step_accuracy.choose_step(system, Z0, span, accuracy, params, method)
        S = sample_orbits(system, Z0, how, n, t, params, dt, method, plane, direction, box, t_max)
        S.error = step_accuracy.estimate(system, Z0, span, S.dt, params, S.method)
        return S
    if how == "time":
        from phaselab.orbits.trajectory import trajectory

        span = inputs.positive_number(t, "t")
        times = np.linspace(0.0, span, n)
        spacing = times[1] - times[0]
        h = inputs.step(dt)
        if h is not None:
            dt = spacing / max(1, math.ceil(spacing / h - 1e-9))
        tr = trajectory(system, Z0, times, dt=dt, method=method, params=params, box=box)
        status = tr.status
        complete = np.all(np.isfinite(tr.states), axis=(1, 2)) & (status == OK)
        drive = None
        if getattr(system, "period", None) is not None:
            drive = 1.0 / system.driving_period(params)
        return Samples(tr.states, None, complete, np.asarray(status, dtype=np.int64), float(spacing),
                        "unit time", tr.method, float(tr.dt), None, None, drive)
    from phaselab.orbits.section import section

    strobe = how == "stroboscopic"
    sec = section(system, Z0, plane=plane, direction=direction,
                  crossings=n - 1 if strobe else n, params=params, dt=dt, method=method,
                  t_max=t_max, box=box, lifted=True)
    pts = sec.points
    if strobe:   # the seed is the sample at t = 0 of the stroboscopic clock
        pts = np.concatenate([Z0[:, None, :], pts], axis=1)
    status = np.asarray(sec.status, dtype=np.int64)
    complete = np.all(np.isfinite(pts), axis=(1, 2))
    status = np.where(complete, OK, np.where(status == OK, TIME_LIMIT, status))
    fixed = None if strobe else int(sec.plane["index"]) % system.dof
    return Samples(pts, None, complete, status, 1.0, "driving period" if strobe else "crossing",
                    sec.method, float(sec.dt), dict(sec.plane), fixed, None)


def map_samples(system, Z0, n, params, box):
    """Iterates z_0 .. z_{n-1} of a map with wrapped components lifted.

    The map is iterated with its wrapped coordinates wrapped, so the states stay small and
    accurate; one unwrapped step from every sample then gives the exact lifted advance of
    each wrapped coordinate, and the lift is the wrapped value plus the right multiple of
    the period.
    """
    from phaselab.engine.compiled import loops
    from phaselab.orbits.section import map_wrapping

    prm = system.param_values(params)
    period, low = map_wrapping(system)
    N, m = Z0.shape
    # Momenta are never wrapped: the lift of a twist map lives on the cylinder (q an angle,
    # p a real number). Wrapping p as well (the standard map's torus) would add a whole turn
    # to q's lift each time p wraps.
    period[system.dof:] = 0.0
    lo, hi = inputs.box(system, box)
    limits.check_budget(N, 2 * n, 2 * N * n * m, "frequencies")
    cs = loops(system, "sections")
    pts = np.full((N, n - 1, m), np.nan)
    counts = np.zeros(N, dtype=np.int64)
    status = np.zeros(N, dtype=np.int64)
    cs.section_map_orbits(Z0, prm, n - 1, period, low, lo, hi, pts, counts, status)
    wrapped = np.concatenate([Z0[:, None, :], pts], axis=1)
    complete = counts == n - 1
    wrap = period > 0
    if not wrap.any():
        return Samples(wrapped, None, complete, status, 1.0, "iterate", "map", float("nan"), None,
                        None, None)
    src = np.ascontiguousarray(wrapped[:, :-1].reshape(-1, m))
    one = np.full((len(src), 1, m), np.nan)
    c1 = np.zeros(len(src), dtype=np.int64)
    s1 = np.zeros(len(src), dtype=np.int64)
    free = np.full(m, np.inf)
    cs.section_map_orbits(src, prm, 1, np.zeros(m), np.zeros(m), -free, free, one, c1, s1)
    inc = one[:, 0, :].reshape(N, n - 1, m) - wrapped[:, :-1]
    states = wrapped.copy()
    with np.errstate(invalid="ignore"):
        guess = Z0[:, None, wrap] + np.cumsum(inc[..., wrap], axis=1)
        turns = np.round((guess - wrapped[:, 1:, wrap]) / period[wrap])
        states[:, 1:, wrap] = wrapped[:, 1:, wrap] + turns * period[wrap]
    return Samples(states, inc, complete, status, 1.0, "iterate", "map", float("nan"), None,
                    None, None)


def integration_step(system, seeds, t=None, n=None, params=None, method="auto", plane=None):
    """The integration step a flow's :func:`frequencies` call chooses when ``dt`` is not given
    (:func:`phaselab.engine.integrators.default_step` over all the seeds). Scans call it
    once and pass the result to every batch, so results do not depend on batching.

    Returns
    -------
    float or None
        None for maps and adaptive methods.
    """
    from phaselab.engine.compiled import loops
    from phaselab.engine.integrators import ADAPTIVE, default_step

    if system.kind == "map" or (isinstance(method, str) and method.lower() in ADAPTIVE):
        return None
    Z0 = check_seeds(system, seeds)
    pdict = parameter_values(system, params)
    prm = system.param_values(params)
    how = sampling_plan(system, plane, t, n)
    timed = not system.is_autonomous
    if timed and how == "plane":
        return None          # frequencies() explains why a driven flow has no plane section
    work = system.extended() if timed else system
    meth = inputs.method(work, method)
    period = system.driving_period(pdict) if timed and system.period is not None else None
    if work is not system:
        with np.errstate(all="ignore"):
            e0 = np.atleast_1d(system.energy(Z0, params=pdict, t=0.0))
        n_ = system.dof
        Z0 = np.concatenate([Z0[:, :n_], np.zeros((len(Z0), 1)), Z0[:, n_:], -e0[:, None]], axis=1)
    cs = loops(work, "sections") if how != "time" else loops(work)
    span = inputs.positive_number(t, "t") if how == "time" else np.inf
    if how == "stroboscopic" and period is not None:
        span = period * (n or DEFAULT_SAMPLES)
    h = default_step(cs, meth, Z0, prm, span, period)
    return float(h) if np.isfinite(h) and h > 0 else None


def parameter_values(system, params):
    values = system.param_values(params)
    return dict(zip((p.name for p in system.parameters), values.tolist()))


