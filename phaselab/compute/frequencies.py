"""Fundamental frequencies (tunes) and rotation numbers of orbits, and their diffusion.

:func:`frequencies` samples each orbit (a flow at a fixed time step, a map per iterate, a
surface of section per crossing or per driving period), turns every degree of freedom into
a complex signal and finds its leading spectral lines by Laskar's frequency analysis
(:mod:`phaselab.compute.spectral`). :func:`rotation_number` averages the advance of a
lifted angle with the weights of Das, Sander, Yorke et al. Both return
:class:`Frequencies`.

Frequencies are model results; where they inform a design decision (the working point of
a machine, the stability of a spacecraft orbit) confirm them with validated tools and the
responsible engineers.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

from numba import njit, prange

from phaselab.compute import codes, inputs
from phaselab.compute.spectral import (MAX_WINDOW_ORDER, SpectralLines, Workspace, chunk_rows,
                                       leading_lines)
from phaselab.compute.spectral import window as hann_window
from phaselab.errors import ParameterError

__all__ = ["frequencies", "rotation_number", "Frequencies", "STATUS_TEXT", "DEFAULT_SAMPLES",
           "integration_step", "analyse_samples", "birkhoff_weights"]

OK, NOT_FINITE, TIME_LIMIT = codes.OK, codes.NOT_FINITE, codes.TIME_LIMIT
STILL = 10
"""Status of an orbit with a degree of freedom that does not move (its frequency is NaN)."""
STATUS_TEXT = {**codes.STATUS, STILL: "a degree of freedom does not move (its frequency is NaN)"}
"""Why an orbit has no (or only a partial) result: the codes of :mod:`phaselab.compute.codes`
and ``STILL``."""

DEFAULT_SAMPLES = 2048
"""Samples per orbit when ``n`` is not given."""
MIN_SAMPLES = 32
"""Fewest samples accepted (each half of the orbit must still hold a few periods)."""
DIFFUSION_FLOOR = 1e-30
"""Frequency changes below this are reported as ``log10(DIFFUSION_FLOOR) = -30``."""


# ----------------------------------------------------------------------------- result
@dataclass
class Frequencies:
    """Frequencies (or rotation numbers) of an ensemble of orbits.

    Attributes
    ----------
    nu : ndarray, shape (n_orbits, k)
        One value per orbit and analysed degree of freedom (``k = dof``; one less for a
        section through a plane, which fixes one degree of freedom; ``k = 1`` for rotation
        numbers). Units in :attr:`unit`. NaN where undefined (see :attr:`status`).
    lines : SpectralLines or None
        The leading lines of each signal, arrays of shape (n_orbits, k, n_lines), frequencies
        in :attr:`unit`, amplitudes in the units of the coordinate (of the normalised signal,
        see :func:`frequencies`), phases in radians at the first sample. None for rotation
        numbers.
    diffusion : ndarray, shape (n_orbits,)
        ``log10 |nu(first half) - nu(second half)|``: the Euclidean norm, over the analysed
        degrees of freedom, of the change of the frequencies between the two halves of each
        orbit, in :attr:`unit`. Small (about -10 and below) on invariant tori, large in
        chaotic zones (Laskar 1993). Changes below 1e-30 give -30. NaN when not computed.
    status : ndarray of int, shape (n_orbits,)
        0 for a complete analysis; otherwise a code of :data:`STATUS_TEXT`.
    names : tuple of str
        What each column of ``nu`` is: the coordinate of each degree of freedom, or the angle.
    unit : str
        ``"cycles per unit time"``, ``"cycles per iterate"``, ``"cycles per crossing"``,
        ``"cycles per driving period"`` (``"turns per ..."`` for rotation numbers).
    kind : {"frequency", "rotation"}
    sampling : {"time", "map", "plane", "stroboscopic"}
    base_frequency : float or None
        Frequency of the sampling clock in :attr:`unit` for resonance conditions
        ``m.nu = p * base_frequency``: 1 for per-iterate, per-crossing and per-period units,
        1/T for a driven flow sampled in time, None for an autonomous flow sampled in time
        (only ``m.nu = 0`` resonances).
    seeds : ndarray, shape (n_orbits, 2n)
    params : dict
    method : str
        The integrator (``"map"`` for maps).
    dt : float
        The integration step (NaN for maps).
    sample_step : float
        Time between samples for time sampling; 1 otherwise.
    n_samples : int
    window : int
        Order of the Hann-type window (None for rotation numbers).
    plane : dict or None
        The section's plane, as in :class:`phaselab.compute.results.Section`.
    system : object
    """

    nu: np.ndarray
    lines: SpectralLines | None
    diffusion: np.ndarray
    status: np.ndarray
    names: tuple
    unit: str
    kind: str
    sampling: str
    base_frequency: float | None
    seeds: np.ndarray
    params: dict = field(default_factory=dict)
    method: str = ""
    dt: float = float("nan")
    sample_step: float = 1.0
    n_samples: int = 0
    window: int | None = None
    plane: dict | None = None
    system: object = None

    @property
    def n_orbits(self) -> int:
        return self.nu.shape[0]

    @property
    def valid(self) -> np.ndarray:
        """Orbits analysed in full with every frequency finite, shape (n_orbits,)."""
        return (self.status == OK) & np.all(np.isfinite(self.nu), axis=1)

    @property
    def status_text(self) -> list[str]:
        """The status of each orbit in words."""
        return [STATUS_TEXT.get(int(s), f"status {int(s)}") for s in self.status]

    def metadata(self) -> dict:
        """Provenance: system, expression, parameters, method, sampling, versions."""
        return _metadata(self)

    def to_xarray(self):
        """The result as an ``xarray.Dataset``: dims ``orbit``, ``dof`` (labelled by
        :attr:`names`), ``state`` and ``line``; provenance in ``attrs``."""
        return _to_xarray(self)

    def save(self, path, **kwargs):
        """Write to ``path``: ``.nc`` (NetCDF through :meth:`to_xarray`), or a figure as
        ``.svg``, ``.pdf``, ``.png``: the frequency map (nu_1 against nu_2) when there are two
        or more columns, else the profile along the seeds (see
        :mod:`phaselab.export.frequency_figures`). Written atomically."""
        from phaselab.export.frequency_figures import save_result

        return save_result(self, path, **kwargs)

    def __repr__(self) -> str:
        return (f"Frequencies({self.n_orbits} orbits, {self.kind} of {', '.join(self.names)} in "
                f"{self.unit}, {self.n_samples} samples, valid={int(self.valid.sum())})")


# ----------------------------------------------------------------------------- argument checks
def _check_states(system, seeds):
    """Seeds as a (n_orbits, 2n) float array (:func:`phaselab.compute.inputs.states`); a
    ShellSeeds must be valid everywhere. Non-finite rows are kept: the loops flag them."""
    from phaselab.compute.seeds import ShellSeeds

    names = [s.name for s in system.state_symbols]
    if isinstance(seeds, ShellSeeds):
        if not np.all(seeds.valid):
            bad = np.flatnonzero(~np.asarray(seeds.valid)).tolist()
            raise ParameterError(f"seeds {bad[:10]} have no state on the shell; pass "
                                 "seeds.valid_states()")
        seeds = seeds.states
    return inputs.states(seeds, len(names), names)


def _sampling(system, plane, t, n):
    """Which sampling a call asks for, with its count of samples."""
    is_map = getattr(system, "kind", "flow") == "map"
    if is_map:
        if plane is not None:
            raise ParameterError("plane is not used for a map (its iterates are the samples); "
                                 "leave it out")
        if t is not None:
            raise ParameterError("a map is sampled per iterate: give the number of iterates n, "
                                 "not t")
        return "map"
    if plane is None:
        if t is None:
            raise ParameterError("t (the length of the record, model time) is needed to sample a "
                                 "flow in time; or give plane={...} or 'stroboscopic' for a section")
        return "time"
    if t is not None:
        raise ParameterError("t is the length of a record sampled in time; a section is sampled "
                             "per crossing (give n, and t_max to cap the time)")
    if isinstance(plane, str):
        if plane != "stroboscopic":
            raise ParameterError(f"plane must be a mapping such as {{'x': 0.0}} or "
                                 f"'stroboscopic', got {plane!r}")
        return "stroboscopic"
    if isinstance(plane, Mapping):
        return "plane"
    raise ParameterError(f"plane must be a mapping such as {{'x': 0.0}} or 'stroboscopic', "
                         f"got {plane!r}")


def _angles(system, angles):
    """{coordinate index: period} of the coordinates read as angles."""
    out = {}
    if angles is None:
        if getattr(system, "kind", "flow") == "map":
            from phaselab.compute.section import map_wrapping

            period, _ = map_wrapping(system)
            out = {i: float(period[i]) for i in range(system.dof) if period[i] > 0}
        return out
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
class _Samples:
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


def _acquire(system, Z0, how, n, t, params, dt, method, plane, direction, box, t_max):
    """The samples of every orbit, from the public trajectory / section API (flows) or the
    compiled map iteration (maps). The one place where orbits are produced."""
    if how == "map":
        return _map_samples(system, Z0, n, params, box)
    if how == "time":
        from phaselab.compute.trajectory import trajectory

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
        return _Samples(tr.states, None, complete, np.asarray(status, dtype=np.int64), float(spacing),
                        "unit time", tr.method, float(tr.dt), None, None, drive)
    from phaselab.compute.section import section

    strobe = how == "stroboscopic"
    sec = section(system, Z0, plane=plane, direction=direction,
                  crossings=n - 1 if strobe else n, params=params, dt=dt, method=method,
                  t_max=t_max, box=box)
    pts = sec.points
    if strobe:   # the seed is the sample at t = 0 of the stroboscopic clock
        pts = np.concatenate([Z0[:, None, :], pts], axis=1)
    status = np.asarray(sec.status, dtype=np.int64)
    complete = np.all(np.isfinite(pts), axis=(1, 2))
    status = np.where(complete, OK, np.where(status == OK, TIME_LIMIT, status))
    fixed = None if strobe else int(sec.plane["index"]) % system.dof
    return _Samples(pts, None, complete, status, 1.0, "driving period" if strobe else "crossing",
                    sec.method, float(sec.dt), dict(sec.plane), fixed, None)


def _map_samples(system, Z0, n, params, box):
    """Iterates z_0 .. z_{n-1} of a map with wrapped components lifted.

    The map is iterated with its wrapped coordinates wrapped, so the states stay small and
    accurate; one unwrapped step from every sample then gives the exact lifted advance of
    each wrapped coordinate, and the lift is the wrapped value plus the right multiple of
    the period.
    """
    from phaselab.compute.compiled import loops
    from phaselab.compute.section import map_wrapping

    prm = system.param_values(params)
    period, low = map_wrapping(system)
    N, m = Z0.shape
    # Momenta are never wrapped: the lift of a twist map lives on the cylinder (q an angle,
    # p a real number). Wrapping p as well (the standard map's torus) would add a whole turn
    # to q's lift each time p wraps.
    period[system.dof:] = 0.0
    lo, hi = inputs.box(system, box)
    inputs.check_budget(N, 2 * n, 2 * N * n * m, "frequencies")
    cs = loops(system, "sections")
    pts = np.full((N, n - 1, m), np.nan)
    counts = np.zeros(N, dtype=np.int64)
    status = np.zeros(N, dtype=np.int64)
    cs.section_map_orbits(Z0, prm, n - 1, period, low, lo, hi, pts, counts, status)
    wrapped = np.concatenate([Z0[:, None, :], pts], axis=1)
    complete = counts == n - 1
    wrap = period > 0
    if not wrap.any():
        return _Samples(wrapped, None, complete, status, 1.0, "iterate", "map", float("nan"), None,
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
    return _Samples(states, inc, complete, status, 1.0, "iterate", "map", float("nan"), None,
                    None, None)


def integration_step(system, seeds, t=None, n=None, params=None, method="auto", plane=None):
    """The integration step a flow's :func:`frequencies` call chooses when ``dt`` is not given
    (:func:`phaselab.compute.integrators.default_step` over all the seeds). Scans call it
    once and pass the result to every batch, so results do not depend on batching.

    Returns
    -------
    float or None
        None for maps and adaptive methods.
    """
    from phaselab.compute.compiled import loops
    from phaselab.compute.integrators import ADAPTIVE, default_step

    if getattr(system, "kind", "flow") == "map" or (isinstance(method, str) and method.lower() in ADAPTIVE):
        return None
    Z0 = _check_states(system, seeds)
    pdict = _params(system, params)
    prm = system.param_values(params)
    how = _sampling(system, plane, t, n)
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


def _params(system, params):
    values = system.param_values(params)
    return dict(zip((p.name for p in system.parameters), values.tolist()))


# ----------------------------------------------------------------------------- signals
@njit(cache=True, nogil=True, parallel=True)
def _signals(states, columns, periods, w, out, still):
    """Complex signals of the degrees of freedom ``columns`` of every orbit.

    ``out[c * n_orbits + o]`` is the signal of column ``c`` of orbit ``o``:
    ``z = (q - <q>) - i (p - <p>) / s`` with ``s = rms(p - <p>) / rms(q - <q>)``, means and
    rms weighted by ``w`` (the Hann window, summing to 1), so they do not depend on where
    the record ends within a period. A harmonic orbit becomes ``A e^{+i w t}`` (positive
    frequency for the usual clockwise motion in the (q, p) plane) with its conjugate line
    removed, an anharmonic orbit close to it. An angle (``periods[c] > 0``) whose lifted
    value covers a full period (the orbit winds) gives ``exp(2 pi i q / period)``.
    ``still[o]`` is set when a degree of freedom of orbit ``o`` does not move.
    """
    n_orb, n, width = states.shape
    dof = width // 2
    k = columns.shape[0]
    for o in prange(n_orb):
        for c in range(k):
            iq = columns[c]
            ip = dof + iq
            mq = 0.0
            mp = 0.0
            qmin = states[o, 0, iq]
            qmax = qmin
            pmin = states[o, 0, ip]
            pmax = pmin
            for j in range(n):
                q = states[o, j, iq]
                p = states[o, j, ip]
                mq += w[j] * q
                mp += w[j] * p
                qmin = min(qmin, q)
                qmax = max(qmax, q)
                pmin = min(pmin, p)
                pmax = max(pmax, p)
            row = c * n_orb + o
            period = periods[c]
            if period > 0.0 and qmax - qmin >= period:
                f = 2.0 * math.pi / period
                for j in range(n):
                    a = f * states[o, j, iq]
                    out[row, j] = complex(math.cos(a), math.sin(a))
                continue
            if qmax == qmin and pmax == pmin:
                still[o] = True
            vq = 0.0
            vp = 0.0
            for j in range(n):
                dq = states[o, j, iq] - mq
                dp = states[o, j, ip] - mp
                vq += w[j] * dq * dq
                vp += w[j] * dp * dp
            scale = math.sqrt(vp / vq) if vq > 0.0 and vp > 0.0 else 1.0
            inv = 1.0 / scale
            for j in range(n):
                out[row, j] = complex(states[o, j, iq] - mq, -(states[o, j, ip] - mp) * inv)


@dataclass
class SampleAnalysis:
    """What :func:`analyse_samples` finds: ``nu`` (n_orbits, k), ``lines`` (SpectralLines of
    shape (n_orbits, k, n_lines)), ``diffusion`` (n_orbits,), ``still`` (n_orbits,) bool."""

    nu: np.ndarray
    lines: SpectralLines
    diffusion: np.ndarray
    still: np.ndarray


def analyse_samples(states, columns, step=1.0, angles=None, lines=1, window=1, diffusion=True,
                    fold="signed") -> SampleAnalysis:
    """Laskar's frequency analysis of orbits already sampled (the analysis half of
    :func:`frequencies`, which see for the signals, units and options).

    Parameters
    ----------
    states : ndarray, shape (n_orbits, n_samples, 2n)
        Equally spaced, lifted (unwrapped), finite samples.
    columns : sequence of int
        The degrees of freedom to analyse.
    step : float
        Time between samples; frequencies are returned in cycles per that unit.
    angles : mapping of int to float, optional
        Period of each coordinate (by index) read as an angle.
    """
    states = np.asarray(states, dtype=float)
    n_orb, n, width = states.shape
    angles = angles or {}
    cols = np.asarray(list(columns), dtype=np.int64)
    k = len(cols)
    periods = np.array([float(angles.get(int(i), 0.0)) for i in cols])
    w = hann_window(n, 1)
    w = w / w.sum()
    h = n // 2
    ws = Workspace()
    l_nu = np.full((n_orb, k, lines), np.nan)
    l_amp = np.full_like(l_nu, np.nan)
    l_ph = np.full_like(l_nu, np.nan)
    diff = np.full(n_orb, np.nan)
    still = np.zeros(n_orb, dtype=bool)
    per = max(1, chunk_rows(n) // k)          # orbits per chunk
    for a in range(0, n_orb, per):
        b = min(n_orb, a + per)
        m = b - a
        X = ws.get("orbit signals", k * m, n)
        _signals(np.ascontiguousarray(states[a:b]), cols, periods, w, X, still[a:b])
        found = leading_lines(X, lines=lines, window_order=window, workspace=ws)
        shape = (k, m, lines)
        l_nu[a:b] = np.moveaxis(_fold(found.nu.reshape(shape), fold) / step, 0, 1)
        l_amp[a:b] = np.moveaxis(found.amplitude.reshape(shape), 0, 1)
        l_ph[a:b] = np.moveaxis(found.phase.reshape(shape), 0, 1)
        if diffusion:
            first = leading_lines(X[:, :h], 1, window, amplitudes=False, workspace=ws).nu[:, 0]
            second = leading_lines(X[:, h:2 * h], 1, window, amplitudes=False, workspace=ws).nu[:, 0]
            change = ((second - first + 0.5) % 1.0 - 0.5).reshape(k, m) / step
            with np.errstate(invalid="ignore"):
                norm = np.sqrt(np.sum(change ** 2, axis=0))
                diff[a:b] = np.log10(np.maximum(norm, DIFFUSION_FLOOR))
    return SampleAnalysis(l_nu[:, :, 0].copy(), SpectralLines(l_nu, l_amp, l_ph), diff, still)


def _fold(nu, fold):
    if fold == "signed":
        return (nu + 0.5) % 1.0 - 0.5
    return nu % 1.0


# ----------------------------------------------------------------------------- frequencies
def frequencies(system, seeds, t=None, n=None, params=None, dt=None, method="auto", plane=None,
                direction=+1, lines=1, window=1, angles=None, diffusion=True, fold="signed",
                box=None, t_max=None) -> Frequencies:
    """Fundamental frequencies of every orbit by Laskar's frequency analysis.

    Each orbit is sampled at equal intervals; each degree of freedom ``(q_i, p_i)`` becomes
    the complex signal

        z_i = (q_i - <q_i>) - i (p_i - <p_i>) / s_i,   s_i = rms(p_i - <p_i>) / rms(q_i - <q_i>),

    (means and rms weighted by the Hann window, so they do not depend on where the record
    ends within a period).
    The minus sign makes the usual clockwise motion in the (q, p) plane a positive
    frequency (a harmonic oscillator gives exactly ``A e^{+i w t}``). Dividing p by the ratio
    of the spreads makes the signal nearly circular: the conjugate line ``-nu`` (equal in
    size to the fundamental for the raw ``q`` alone) shrinks to the size of the
    anharmonicity, so it leaks far less into the fundamental; no frequency depends on the
    scale. A coordinate declared an angle (``angles``; by default the wrapped coordinates of
    a map) whose lifted value covers a whole period (the orbit winds) gives
    ``exp(2 pi i q / period)`` instead, whose frequency is the mean advance of the angle.

    The fundamental frequency of a degree of freedom is the largest line of its signal
    after the zero-frequency line (the mean) is removed; see
    :func:`phaselab.compute.spectral.leading_lines` for the method (Hann-type window of
    order ``window``, peak refined far below the FFT bin width, lines subtracted by
    Gram-Schmidt; Laskar 1990, 1993).

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
    seeds : array_like, shape (n_orbits, 2n) or (2n,), or ShellSeeds
        Initial states ``(q1..qn, p1..pn)``.
    t : float, optional
        Flows sampled in time (``plane=None``): the length of the record in model time;
        the ``n`` samples are ``t / (n - 1)`` apart. Not used for maps and sections.
    n : int, optional
        Samples per orbit (default 2048, at least 32): points in time, iterates of a map
        (the seed and ``n - 1`` iterates), crossings of a plane, or driving periods (the seed
        and ``n - 1`` periods). The error falls like ``n^-(2 window + 2)`` on an invariant
        torus.
    params : mapping, optional
        Parameter values by name.
    dt : float, optional
        Integration step (flows). It is shortened to divide the sample spacing.
        Default: :func:`phaselab.compute.integrators.default_step`.
    method : str
        Integrator, as in :func:`phaselab.trajectory`.
    plane : None, mapping or "stroboscopic"
        None samples a flow in time; ``{"x": 0.0}`` samples per crossing of that plane in
        ``direction`` (the degree of freedom of ``x`` is then fixed and not analysed);
        ``"stroboscopic"`` samples a driven flow once per driving period.
    direction : {+1, -1}
        Crossing direction for a plane.
    lines : int
        Leading lines to find per degree of freedom (>= 1), returned in ``.lines``.
    window : int
        Order of the Hann-type window, 0 (none) to 8; 1 is the usual choice, 2 is more
        accurate for long clean records.
    angles : mapping, optional
        ``{coordinate name: period}`` of coordinates to read as angles (see above). Default:
        the wrapped coordinates of a map, none for a flow.
    diffusion : bool
        Also analyse the two halves of each orbit and report the change of the frequencies
        (``.diffusion``); costs about as much again.
    fold : {"signed", "positive"}
        Frequencies are known modulo the sampling rate: ``"signed"`` folds them into
        ``[-1/2, 1/2)`` cycles per sample, ``"positive"`` into ``[0, 1)`` (per iterate: the
        fractional tune). For time sampling the range is that divided by the sample step.
    box : float or mapping, optional
        Escape region, as in :func:`phaselab.section`.
    t_max : float, optional
        Time cap of a section (see :func:`phaselab.section`).

    Returns
    -------
    Frequencies
        ``.nu`` (n_orbits, k) in cycles per unit time (flows sampled in time: ``nu =
        omega / 2 pi``), per iterate (maps: tunes), per crossing or per driving period.

    Raises
    ------
    ParameterError
        Bad ``seeds``, ``t``, ``n``, ``dt``, ``lines``, ``window``, ``fold``, ``plane``,
        ``angles``, ``box``, or unknown parameters.
    ModelError, IntegrationError
        From the sampling (see :func:`phaselab.trajectory`, :func:`phaselab.section`).

    Notes
    -----
    Orbits that stop early (escape, non-finite state, too few crossings) get NaN and a
    status code (:data:`STATUS_TEXT`). A degree of freedom that does not move has NaN
    frequency and status 10. For an orbit whose coordinate winds but is not declared an
    angle (a rotating pendulum) the signal is not quasi-periodic: declare the angle, or
    use :func:`rotation_number`.
    """
    Z0, how, n, pdict = _common(system, seeds, plane, t, n, params, direction)
    inputs.check_budget(len(Z0), n, 4.0 * len(Z0) * n * Z0.shape[1], "frequencies")
    lines = inputs.count(lines, "lines", maximum=max(1, n // 2))
    window = inputs.count(window, "window", 0, MAX_WINDOW_ORDER)
    if fold not in ("signed", "positive"):
        raise ParameterError(f"fold must be 'signed' or 'positive', got {fold!r}")
    ang = _angles(system, angles)
    S = _acquire(system, Z0, how, n, t, pdict, dt, method, plane, direction, box, t_max)

    dof = system.dof
    cols = [i for i in range(dof) if i != S.fixed_dof]
    names = tuple(system.coords[i].name for i in cols)
    N = len(Z0)
    ok = np.flatnonzero(S.complete)
    nu = np.full((N, len(cols)), np.nan)
    l_nu = np.full((N, len(cols), lines), np.nan)
    l_amp = np.full_like(l_nu, np.nan)
    l_ph = np.full_like(l_nu, np.nan)
    diff = np.full(N, np.nan)
    status = S.status.copy()
    if ok.size:
        out = analyse_samples(S.states[ok], cols, step=S.step, angles=ang, lines=lines,
                              window=window, diffusion=diffusion, fold=fold)
        nu[ok], diff[ok] = out.nu, out.diffusion
        l_nu[ok], l_amp[ok], l_ph[ok] = out.lines.nu, out.lines.amplitude, out.lines.phase
        status[ok[out.still]] = STILL
    unit = "cycles per " + S.unit
    base = 1.0 if how != "time" else S.drive
    return Frequencies(nu=nu, lines=SpectralLines(l_nu, l_amp, l_ph), diffusion=diff, status=status,
                       names=names, unit=unit, kind="frequency", sampling=how, base_frequency=base,
                       seeds=Z0, params=pdict, method=S.method, dt=S.dt, sample_step=S.step,
                       n_samples=n, window=int(window), plane=S.plane, system=system)


def _common(system, seeds, plane, t, n, params, direction):
    if not hasattr(system, "state_symbols") or not hasattr(system, "param_values"):
        raise ParameterError(f"system must be a Hamiltonian or an AreaPreservingMap, got "
                             f"{type(system).__name__}")
    Z0 = _check_states(system, seeds)
    n = DEFAULT_SAMPLES if n is None else inputs.count(n, "n", MIN_SAMPLES)
    inputs.direction(direction)
    how = _sampling(system, plane, t, n)
    pdict = _params(system, params)
    return Z0, how, n, pdict


# ----------------------------------------------------------------------------- rotation numbers
def birkhoff_weights(m: int) -> np.ndarray:
    """Weights of the weighted Birkhoff average over ``m`` terms, summing to 1.

    ``w(x) = exp(-1 / (x (1 - x)))`` at ``x = k / m``, ``k = 0 .. m-1`` (Das, Sander, Yorke
    et al., "Quantitative quasiperiodicity", Nonlinearity 30, 4111 (2017)): averages of a
    smooth function along a quasi-periodic orbit converge faster than any power of ``m``.
    """
    x = np.arange(m) / m
    with np.errstate(divide="ignore", over="ignore"):
        w = np.where((x > 0) & (x < 1), np.exp(-1.0 / (x * (1.0 - x))), 0.0)
    total = w.sum()
    return w / total if total > 0 else np.full(m, 1.0 / m)


def rotation_number(system, seeds, n=None, angle=None, params=None, t=None, dt=None,
                    method="auto", plane=None, direction=+1, centre=None, box=None,
                    t_max=None) -> Frequencies:
    """Rotation numbers from the advance of a lifted angle, by weighted Birkhoff averaging.

    ``rho = sum_k w_k (theta_{k+1} - theta_k) / (2 pi)`` with the weights of
    :func:`birkhoff_weights` (Das, Sander, Yorke et al. 2017): exact for a rigid rotation,
    and converging faster than any power of the number of samples on a smooth invariant
    circle or torus. The angle is lifted (never wrapped), so ``rho`` is a real number, not
    folded: turns per iterate of a twist map (the rotation number), per driving period of a
    field-line flow (the rotational transform), per crossing, or per unit time.

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
    seeds : array_like, shape (n_orbits, 2n) or (2n,)
    n : int, optional
        Samples per orbit (default 2048, at least 32); see :func:`frequencies`.
    angle : str or (str, str), optional
        A coordinate whose value is the angle (in radians; a map's wrapped coordinate is
        lifted exactly), or a pair of names ``(q, p)``: the polar angle
        ``atan2(-(p - p_c), q - q_c)`` about ``centre``, clockwise positive like the tunes of
        :func:`frequencies`; its per-sample advance must stay below half a turn. Default:
        the coordinate of a one-degree-of-freedom system.
    params, dt, method, box, t_max : optional
        As in :func:`frequencies`.
    t : float, optional
        Record length for a flow sampled in time.
    plane : None, mapping or "stroboscopic"
        As in :func:`frequencies`; a driven flow given neither ``t`` nor ``plane`` is sampled
        once per driving period.
    direction : {+1, -1}
    centre : (float, float), optional
        ``(q_c, p_c)`` for a pair ``angle``; default (0, 0).

    Returns
    -------
    Frequencies
        ``kind="rotation"``, ``.nu`` of shape (n_orbits, 1), ``.lines`` None, ``.diffusion``
        the change between the two halves (log10).
    """
    if (getattr(system, "kind", "flow") == "flow" and plane is None and t is None
            and getattr(system, "period", None) is not None):
        plane = "stroboscopic"
    Z0, how, n, pdict = _common(system, seeds, plane, t, n, params, direction)
    inputs.check_budget(len(Z0), n, 4.0 * len(Z0) * n * Z0.shape[1], "rotation_number")
    dof = system.dof
    if angle is None:
        if dof != 1:
            raise ParameterError(f"angle=... is needed for a system with {dof} degrees of freedom "
                                 "(a coordinate name, or a pair (q, p) for the angle about a centre)")
        angle = system.coords[0].name
    if isinstance(angle, (tuple, list)):
        if len(angle) != 2:
            raise ParameterError(f"angle as a pair must name (q, p), got {angle!r}")
        iq, ip = (inputs.state_index(system, a, "angle component") for a in angle)
        label = f"angle({system.state_symbols[iq].name}, {system.state_symbols[ip].name})"
        if centre is None:
            qc, pc = 0.0, 0.0
        else:
            if isinstance(centre, str) or not hasattr(centre, "__len__") or len(centre) != 2:
                raise ParameterError(f"centre must be a pair (q_c, p_c), got {centre!r}")
            qc, pc = (inputs.number(c, "centre") for c in centre)
    else:
        if centre is not None:
            raise ParameterError("centre is used only with a pair angle=(q, p)")
        iq, ip = inputs.state_index(system, angle, "angle"), None
        label = system.state_symbols[iq].name
    S = _acquire(system, Z0, how, n, t, pdict, dt, method, plane, direction, box, t_max)
    if S.fixed_dof is not None and (iq % dof == S.fixed_dof):
        raise ParameterError(f"the angle {label!r} is fixed by the plane {plane}; choose another")
    N = len(Z0)
    rho = np.full((N, 1), np.nan)
    diff = np.full(N, np.nan)
    ok = np.flatnonzero(S.complete)
    if ok.size:
        if ip is None:
            if S.increments is not None:
                d = S.increments[ok, :, iq]
            else:
                d = np.diff(S.states[ok, :, iq], axis=1)
        else:
            th = np.unwrap(np.arctan2(-(S.states[ok, :, ip] - pc), S.states[ok, :, iq] - qc), axis=1)
            d = np.diff(th, axis=1)
        m = d.shape[1]
        rho[ok, 0] = d @ birkhoff_weights(m) / (2 * np.pi) / S.step
        h = m // 2
        wh = birkhoff_weights(h)
        first = d[:, :h] @ wh
        second = d[:, h:2 * h] @ wh
        change = np.abs(second - first) / (2 * np.pi) / S.step
        diff[ok] = np.log10(np.maximum(change, DIFFUSION_FLOOR))
    unit = "turns per " + S.unit
    base = 1.0 if how != "time" else S.drive
    return Frequencies(nu=rho, lines=None, diffusion=diff, status=S.status.copy(), names=(label,),
                       unit=unit, kind="rotation", sampling=how, base_frequency=base, seeds=Z0,
                       params=pdict, method=S.method, dt=S.dt, sample_step=S.step, n_samples=n,
                       window=None, plane=S.plane, system=system)


# ----------------------------------------------------------------------------- provenance
def _metadata(res) -> dict:
    from phaselab.compute import labels

    return labels.provenance(
        res.system, res.params, kind=res.kind, unit=res.unit, sampling=res.sampling, plane=res.plane,
        method=res.method, dt=float(res.dt), sample_step=float(res.sample_step),
        n_samples=int(res.n_samples), window=-1 if res.window is None else int(res.window),
        base_frequency=float("nan") if res.base_frequency is None else float(res.base_frequency),
        diffusion_definition="log10 of the Euclidean norm of nu(second half) - nu(first half)",
        status_codes={str(k): v for k, v in STATUS_TEXT.items()})


def _to_xarray(res):
    from phaselab.compute import labels

    xr = labels.xarray_module()
    meta = _metadata(res)
    state = list(meta["state"]) or [f"z{k}" for k in range(res.seeds.shape[1])]
    data = {
        "nu": (("orbit", "dof"), res.nu),
        "diffusion": (("orbit",), res.diffusion),
        "status": (("orbit",), res.status.astype(np.int32)),
        "valid": (("orbit",), res.valid.astype(np.int8)),
        "seeds": (("orbit", "state"), res.seeds),
    }
    if res.lines is not None:
        data["line_nu"] = (("orbit", "dof", "line"), res.lines.nu)
        data["line_amplitude"] = (("orbit", "dof", "line"), res.lines.amplitude)
        data["line_phase"] = (("orbit", "dof", "line"), res.lines.phase)
    coords = {"orbit": np.arange(res.n_orbits), "dof": np.array(res.names, dtype=object),
              "state": np.array(state, dtype=object)}
    if res.lines is not None:
        coords["line"] = np.arange(res.lines.nu.shape[-1])
    ds = xr.Dataset(data_vars=data, coords=coords, attrs=labels.netcdf_attrs(meta))
    ds["nu"].attrs.update(units=res.unit, description=f"{res.kind} of each degree of freedom")
    ds["diffusion"].attrs.update(units=f"log10({res.unit})")
    ds["valid"].attrs["description"] = "1 where the orbit was analysed in full"
    return ds
