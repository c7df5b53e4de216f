"""Surfaces of section of Hamiltonian flows, stroboscopic sections of driven systems, and
iterates of area-preserving maps, computed over whole ensembles in compiled code.

Three kinds, one result (:class:`phaselab.orbits.section_result.Section`):

* a plane ``{"x": 0.0}`` crossed in a given direction by an autonomous flow: crossings are
  detected after each integrator step and refined to machine precision by Henon's step;
* ``plane="stroboscopic"`` (or ``None``) for an explicitly time-periodic H: the state once
  per driving period, integrated in extended phase space with a step dividing the period;
* a map (``system.kind == "map"``): the iterates themselves.

Section points are model results; where they inform a design decision (stability of a
machine lattice or a spacecraft orbit) confirm them with validated tools and the
responsible engineers.
"""

from __future__ import annotations

import math
import warnings

import numpy as np

from phaselab.engine import status as codes

from phaselab.engine import inputs, limits
from phaselab.engine.status import NO_CROSSING, OK, TIME_LIMIT
from phaselab.engine.compiled import loops
from phaselab.engine.integrators import default_step
from phaselab.orbits.section_result import Section
from phaselab.orbits.seeds import ShellSeeds
from phaselab.orbits.stopped import warn_stopped
from phaselab.errors import ModelError, ParameterError

__all__ = ["section", "Section"]

DEFAULT_STEPS_PER_CROSSING = 5000
"""With ``t_max=None`` an orbit may take at most this many steps per requested crossing."""


def section(system, states, crossings=300, *, plane=None, direction=+1, params=None, dt=None,
            method="auto", t_max=None, energy=None, axes=None, box=None,
            energy_limit=codes.ENERGY_LIMIT, lifted=False) -> Section:
    """A surface of section of an ensemble of orbits.

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
    states : ShellSeeds or array_like, shape (n_orbits, 2n) or (2n,)
        Initial states. For a :class:`~phaselab.orbits.seeds.ShellSeeds` the energy is
        taken from it and invalid seeds are left out with a warning naming them. A seed
        with NaN or infinite entries gets status ``NOT_FINITE`` and no points.
    crossings : int
        Crossings (periods, iterates) to record per orbit; the cap per orbit.
    plane : mapping, "stroboscopic" or None
        ``{"x": 0.0}``: the plane where the named coordinate or momentum equals the value
        (autonomous flows). ``"stroboscopic"`` or ``None`` for a time-periodic H (``H.period``
        set). Ignored for maps (the iterates are the section).
    direction : {+1, -1}
        Record crossings where the plane's component increases (+1) or decreases (-1).
    params : mapping, optional
        Parameter values by name.
    dt : float, optional
        Step (model time). Default :func:`phaselab.engine.integrators.default_step`; for a
        stroboscopic section it is shortened so that it divides the period exactly.
    method : str
        ``"auto"`` or a fixed-step method of :data:`phaselab.engine.integrators.METHODS`.
    t_max : float, optional
        Time cap per orbit (whichever of ``crossings`` and ``t_max`` comes first). Default
        ``crossings * 5000 * dt``. An orbit with no crossing at all before ``t_max`` gets
        status ``NO_CROSSING`` and a :class:`RuntimeWarning` names it.
    energy : float, optional
        The shell energy to record when ``states`` is a plain array.
    axes : pair of str, optional
        Names of the two state components to show. Default for a plane through coordinate
        ``q_i`` (or momentum ``p_i``): the first other coordinate and its momentum
        (x = 0 -> (y, py)); ``(q, p)`` for one degree of freedom and for maps.
    box : float or mapping, optional
        Escape region (:func:`phaselab.engine.inputs.box`): a number R bounds every
        component to ``[-R, R]``, a mapping ``{name: (low, high)}`` the named ones. Orbits
        leaving it are stopped and flagged; the rest of the batch continues.
    energy_limit : float
        An orbit whose worst relative energy error exceeds this gets status
        ``ENERGY_DRIFT`` (its points are kept): the step was too large for it.
    lifted : bool
        For a flow, keep its angles (``system.angles``) lifted, as integrated, instead of
        wrapped into their intervals (frequency analysis needs the lift). Maps are wrapped
        by their iteration either way.

    Returns
    -------
    Section
        Points are full states (of the original system for stroboscopic sections); a flow's
        angles wrapped into their intervals ``[low, high)`` (:mod:`phaselab.model.angles`)
        unless ``lifted``.

    Raises
    ------
    ParameterError
        Bad arguments: unknown plane or axis names, ``direction`` not +-1, ``crossings`` < 1,
        bad ``dt``, ``t_max`` or ``box``, an unknown or adaptive method, a request over
        :data:`phaselab.engine.limits.LIMITS`.
    ModelError
        A plane given for a driven system (or none for an autonomous one), a non-periodic
        driven system, a splitting method for a non-separable H.
    """
    inputs.system(system)
    direction = inputs.direction(direction)
    crossings = inputs.count(crossings, "crossings")
    energy_limit = inputs.positive_number(energy_limit, "energy_limit")
    Z0, energy = _seed_array(system, states, energy)
    prm = system.param_values(params)
    pdict = dict(zip((p.name for p in system.parameters), prm.tolist()))
    where = None if system.kind == "map" else inputs.plane(system, plane)   # a map ignores plane
    if where is None:
        out = _map_section(system, Z0, crossings, prm, pdict, energy, axes, box)
    elif where.kind != "fixed":
        out = _strobe_section(system, Z0, crossings, prm, pdict, dt, method, t_max, axes, box)
    else:
        out = _plane_section(system, Z0, where, direction, crossings, prm, pdict, dt, method, t_max,
                             energy, axes, box)
    drift = (out.status == OK) & (out.energy_error > energy_limit)
    out.status[drift] = codes.ENERGY_DRIFT
    if not lifted and system.kind != "map" and getattr(system, "angle_intervals", None):
        out.points = system.wrap_angles(out.points)
    _warn_stopped(out, energy_limit)
    return out


# ----------------------------------------------------------------------------- inputs
def _seed_array(system, seeds, energy):
    if isinstance(seeds, ShellSeeds):
        if energy is not None and not math.isclose(inputs.number(energy, "energy"), seeds.energy,
                                                    rel_tol=1e-12, abs_tol=1e-15):
            raise ParameterError(f"energy={energy} contradicts the seeds' shell energy {seeds.energy}")
        excluded = seeds.invalid()
        if excluded:
            shown = "; ".join(f"#{i}: {r}" for i, r in excluded[:5])
            more = f" (and {len(excluded) - 5} more)" if len(excluded) > 5 else ""
            warnings.warn(f"{len(excluded)} of {seeds.n_points} seeds have no state on the shell "
                          f"E = {seeds.energy:g} and are left out: {shown}{more}", RuntimeWarning,
                          stacklevel=3)
        if not seeds.valid.any():
            raise ParameterError("no seeds to integrate (every shell seed was invalid)")
        return inputs.states(seeds.valid_states(), len(system.state_symbols)), seeds.energy
    names = [s.name for s in system.state_symbols]
    Z0 = inputs.states(seeds, len(names), names)
    return Z0, None if energy is None else inputs.number(energy, "energy")


def _step(cs, method, dt, Z0, prm, span, period=None):
    h = inputs.step(dt)
    if h is None:
        h = default_step(cs, method, Z0, prm, span, period)
        if not (np.isfinite(h) and h > 0):
            raise ParameterError("no time scale to choose a step from (the linearisation at the seeds "
                                 "has no frequency); give dt=...")
    return float(h)


def _axes(system, axes, default):
    if axes is None:
        i, j = default
    else:
        if isinstance(axes, str) or not isinstance(axes, (tuple, list)) or len(axes) != 2:
            raise ParameterError(f"axes must be two state names such as ('y', 'py'), got {axes!r}")
        i, j = (inputs.state_index(system, a, "axis") for a in axes)
    syms = system.state_symbols
    return (int(i), int(j)), (syms[i], syms[j])


def _default_plane_axes(n_dof, k):
    if n_dof == 1:
        return 0, 1
    c = k % n_dof
    other = 0 if c != 0 else 1
    return other, n_dof + other


def _t_max(t_max, crossings, h):
    if t_max is None:
        return crossings * DEFAULT_STEPS_PER_CROSSING * h
    return inputs.positive_number(t_max, "t_max")


def _warn_stopped(sec: Section, energy_limit: float):
    codes_ = sec.status
    never = np.flatnonzero(codes_ == NO_CROSSING)
    if never.size:
        warnings.warn(f"{never.size} orbit(s) never crossed the plane {sec.describe_plane()} before t_max "
                      f"(orbits {', '.join(map(str, never[:10]))}{' ...' if never.size > 10 else ''}); "
                      "their count is 0", RuntimeWarning, stacklevel=3)
    warn_stopped(codes_, dt=sec.dt, system=sec.system, started=np.isfinite(sec.seeds).all(axis=1),
                 kept="their points up to there are kept (status says why)")
    drift = np.flatnonzero(codes_ == codes.ENERGY_DRIFT)
    if drift.size:
        warnings.warn(f"{drift.size} orbit(s) have a relative energy error above {energy_limit:g} "
                      f"(orbits {', '.join(map(str, drift[:10]))}{' ...' if drift.size > 10 else ''}); "
                      "their points are kept but inaccurate: use a smaller dt", RuntimeWarning,
                      stacklevel=3)


# ----------------------------------------------------------------------------- flows
def _plane_section(system, Z0, plane, direction, crossings, prm, pdict, dt, method, t_max, energy,
                   axes, box):
    if not system.is_autonomous:
        raise ModelError(f"{system.name!r} depends on time explicitly; use plane='stroboscopic' "
                         "(and give H a driving period), or section its .extended() system")
    k, value = plane.single()
    meth = inputs.method(system, method)
    lo, hi = inputs.box(system, box)
    ax, syms = _axes(system, axes, _default_plane_axes(system.dof, k))
    cs = loops(system, "sections")
    span = np.inf if t_max is None else _t_max(t_max, crossings, 1.0)
    h = _step(cs, meth, dt, Z0, prm, span)
    t_cap = _t_max(t_max, crossings, h)
    n, n_state = Z0.shape
    limits.check_budget(n, t_cap / h, n * crossings * (n_state + 1), "section")
    max_steps = int(math.ceil(t_cap / h - 1e-9))
    pts = np.full((n, crossings, n_state), np.nan)
    tms = np.full((n, crossings), np.nan)
    counts = np.zeros(n, dtype=np.int64)
    err = np.zeros(n)
    status = np.zeros(n, dtype=np.int64)
    stop = np.zeros(n)
    args = (prm, h, max_steps, k, value, float(direction), crossings, meth.kind, meth.weights, meth.A,
            meth.b, codes.IMPLICIT_TOL, codes.IMPLICIT_MAXIT, lo, hi, pts, tms, counts, err, status, stop)
    cs.section_plane_orbits(Z0, *args)      # slices of the orbits on numba's threads
    status[(status == TIME_LIMIT) & (counts == 0)] = NO_CROSSING
    sym = system.state_symbols[k]
    return Section(points=pts, counts=counts, times=tms, axes=ax, axis_symbols=syms, energy_error=err,
                   status=status, seeds=Z0, plane={"kind": "plane", "index": k, "name": sym.name,
                                                   "value": value, "direction": int(direction)},
                   energy=energy, method=meth.name, dt=h, system=system, params=pdict)


def _strobe_section(system, Z0, crossings, prm, pdict, dt, method, t_max, axes, box):
    if getattr(system, "period", None) is None:
        if system.is_autonomous:
            raise ModelError(f"{system.name!r} is autonomous: give a plane such as "
                             f"{{{system.coords[0].name!r}: 0.0}} for its surface of section")
        raise ModelError(f"{system.name!r} depends on time but has no driving period; build it with "
                         "period=... for a stroboscopic section")
    T = system.driving_period(pdict)
    ext = system.extended()
    n = system.dof
    meth = inputs.method(ext, method)
    ax, syms = _axes(system, axes, (0, n))
    lo, hi = inputs.box(system, box, positions=list(range(n)) + [n + 1 + i for i in range(n)])
    cs = loops(ext, "sections")
    X0 = _extended_seeds(system, Z0, pdict)
    span = crossings * T if t_max is None else _t_max(t_max, crossings, 1.0)
    h0 = _step(cs, meth, dt, X0, prm, span, T)
    if T / h0 > 1e12:
        raise ParameterError(f"dt = {h0:g} is too small for the driving period {T:g}")
    steps = max(1, int(math.ceil(T / h0 - 1e-9)))
    h = T / steps
    n_periods = crossings
    if t_max is not None:
        n_periods = min(crossings, int(math.floor(_t_max(t_max, crossings, h) / T + 1e-9)))
        if n_periods < 1:
            raise ParameterError(f"t_max={t_max} is shorter than one driving period T = {T:g}")
    N = Z0.shape[0]
    limits.check_budget(N, float(steps) * n_periods, N * n_periods * (2 * n + 2) * 2, "section")
    ext_pts = np.full((N, n_periods, 2 * n + 2), np.nan)
    counts = np.zeros(N, dtype=np.int64)
    err = np.zeros(N)
    status = np.zeros(N, dtype=np.int64)
    cs.section_strobe_orbits(X0, prm, h, steps, n_periods, meth.kind, meth.weights, meth.A, meth.b,
                             codes.IMPLICIT_TOL, codes.IMPLICIT_MAXIT, lo, hi, ext_pts, counts, err, status)
    pts = np.full((N, crossings, 2 * n), np.nan)
    pts[:, :n_periods, :n] = ext_pts[:, :, :n]
    pts[:, :n_periods, n:] = ext_pts[:, :, n + 1:2 * n + 1]
    idx = np.arange(crossings)
    times = np.where(idx[None, :] < counts[:, None], (idx[None, :] + 1) * T, np.nan)
    return Section(points=pts, counts=counts, times=times, axes=ax, axis_symbols=syms, energy_error=err,
                   status=status, seeds=Z0, plane={"kind": "stroboscopic", "period": T},
                   energy=None, method=meth.name, dt=h, system=system, params=pdict)


def _extended_seeds(system, Z0, pdict):
    """Seeds (q, p) of a driven system as extended states (q, tau = 0, p, p_tau = -H(q, p, 0)),
    so that K = H + p_tau is 0 along the orbit."""
    n = system.dof
    with np.errstate(all="ignore"):
        E0 = system.energy(Z0, params=pdict, t=0.0)
    X0 = np.zeros((Z0.shape[0], 2 * n + 2))
    X0[:, :n] = Z0[:, :n]
    X0[:, n + 1:2 * n + 1] = Z0[:, n:]
    X0[:, 2 * n + 1] = -np.where(np.isfinite(E0), E0, 0.0)
    bad = ~np.all(np.isfinite(Z0), axis=1)
    X0[bad] = np.nan
    return np.ascontiguousarray(X0)


# ----------------------------------------------------------------------------- maps
def map_wrapping(system) -> tuple[np.ndarray, np.ndarray]:
    """Per-component wrapping of a map as ``(period, low)`` arrays (period 0: no wrapping),
    from ``system.modulus`` (period or ``None`` per component) and ``system.modulus_low``
    (low end of each interval, ``None`` read as 0)."""
    m = len(system.state_symbols)
    period = np.zeros(m)
    low = np.zeros(m)
    mods = getattr(system, "modulus", None)
    lows = getattr(system, "modulus_low", None)
    if mods is None:
        return period, low
    if np.ndim(mods) == 0:
        mods = (mods,) * m
    if lows is None or np.ndim(lows) == 0:
        lows = (lows,) * m
    if len(mods) != m or len(lows) != m:
        raise ModelError(f"the map's modulus has {len(mods)} entries for {m} state components")
    for j, (p, a) in enumerate(zip(mods, lows)):
        if p is None:
            continue
        p, a = float(p), float(a or 0.0)
        if not (np.isfinite(p) and p > 0 and np.isfinite(a)):
            raise ModelError(f"the map's modulus of component {j} must be a positive period, got {p}")
        period[j], low[j] = p, a
    return period, low


def _map_section(system, Z0, crossings, prm, pdict, energy, axes, box):
    n_state = Z0.shape[1]
    period, low = map_wrapping(system)
    lo, hi = inputs.box(system, box)
    nd = n_state // 2
    ax, syms = _axes(system, axes, (0, nd) if n_state >= 2 else (0, 0))
    N = Z0.shape[0]
    limits.check_budget(N, crossings, N * crossings * n_state, "section")
    cs = loops(system, "sections")
    pts = np.full((N, crossings, n_state), np.nan)
    counts = np.zeros(N, dtype=np.int64)
    status = np.zeros(N, dtype=np.int64)
    cs.section_map_orbits(Z0, prm, crossings, period, low, lo, hi, pts, counts, status)
    idx = np.arange(crossings)
    times = np.where(idx[None, :] < counts[:, None], (idx[None, :] + 1).astype(float), np.nan)
    return Section(points=pts, counts=counts, times=times, axes=ax, axis_symbols=syms,
                   energy_error=np.zeros(N), status=status, seeds=Z0, plane={"kind": "map"},
                   energy=energy, method="map", dt=float("nan"), system=system, params=pdict)
