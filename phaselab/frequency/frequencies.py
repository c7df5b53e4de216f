"""Fundamental frequencies (tunes) and rotation numbers of orbits, and their diffusion.

:func:`frequencies` samples each orbit (a flow at a fixed time step, a map per iterate, a
surface of section per crossing or per driving period), turns every degree of freedom into
a complex signal and finds its leading spectral lines by Laskar's frequency analysis
(:mod:`phaselab.frequency.spectral`). :func:`rotation_number` averages the advance of a
lifted angle with the weights of Das, Sander, Yorke et al. Both return
:class:`Frequencies`.

Frequencies are model results; where they inform a design decision (the working point of
a machine, the stability of a spacecraft orbit) confirm them with validated tools and the
responsible engineers.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from phaselab.engine import accuracy as step_accuracy
from phaselab.engine import inputs, limits
from phaselab.engine import status as codes
from phaselab.errors import ParameterError
from phaselab.frequency.aliasing import warn_if_aliased
from phaselab.frequency.sampling import (DEFAULT_SAMPLES, MIN_SAMPLES, angle_periods, check_seeds, integration_step,
                                         parameter_values, sample_orbits, sampling_plan)
from phaselab.frequency.signals import DIFFUSION_FLOOR, analyse_samples
from phaselab.frequency.spectral import MAX_WINDOW_ORDER, SpectralLines
from phaselab.engine.provenance import cf_dataset

__all__ = ["frequencies", "rotation_number", "Frequencies", "STATUS_TEXT", "DEFAULT_SAMPLES",
           "integration_step", "analyse_samples", "birkhoff_weights"]

OK, NOT_FINITE, TIME_LIMIT = codes.OK, codes.NOT_FINITE, codes.TIME_LIMIT
STILL = codes.STILL
STATUS_TEXT = codes.STATUS
"""Why an orbit has no (or only a partial) result: the status table of :mod:`phaselab.engine.status`."""



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
        The section's plane, as in :class:`phaselab.orbits.section_result.Section`.
    system : object
    error_estimate : float (property)
        Relative timing error of the integration step (the relative error it gives periods
        and frequencies; step doubling, :mod:`phaselab.engine.accuracy`). Measured by the call
        when ``accuracy=`` chose the step, else when first read. NaN for maps and dop853.
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
    measured_error: float | None = field(default=None, repr=False)

    @property
    def error_estimate(self) -> float:
        if self.measured_error is None:
            self.measured_error = step_accuracy.result_estimate(self)
        return self.measured_error

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
        return cf_dataset(_to_xarray(self))

    def plot(self, **kwargs):
        """A matplotlib figure: the diffusion map over a grid, the frequency map for two or
        more frequencies, else the profile along the seeds (see
        :mod:`phaselab.export.frequency_figures`)."""
        from phaselab.export.frequency_figures import result_figure

        return result_figure(self, **kwargs)

    def save(self, path, **kwargs):
        """Write to ``path``: ``.nc`` (NetCDF through :meth:`to_xarray`), or a figure as
        ``.svg``, ``.pdf``, ``.png``: the frequency map (nu_1 against nu_2) when there are two
        or more columns, else the profile along the seeds (see
        :mod:`phaselab.export.frequency_figures`). Written atomically."""
        from phaselab.export import save

        return save(self, path, **kwargs)

    def __repr__(self) -> str:
        return (f"Frequencies({self.n_orbits} orbits, {self.kind} of {', '.join(self.names)} in "
                f"{self.unit}, {self.n_samples} samples, valid={int(self.valid.sum())})")


# ----------------------------------------------------------------------------- frequencies
def frequencies(system, states, t=None, *, samples=None, params=None, dt=None, method="auto",
                plane=None, direction=+1, lines=1, window=1, angles=None, diffusion=True, fold="signed",
                box=None, t_max=None, accuracy=None) -> Frequencies:
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
    scale. A coordinate declared an angle (``angles``; by default the model's angles,
    ``system.angles``) whose lifted value covers a whole period (the orbit winds) gives
    ``exp(2 pi i q / period)`` instead, whose frequency is the mean advance of the angle.

    The fundamental frequency of a degree of freedom is the largest line of its signal
    after the zero-frequency line (the mean) is removed; see
    :func:`phaselab.frequency.spectral.leading_lines` for the method (Hann-type window of
    order ``window``, peak refined far below the FFT bin width, lines subtracted by
    Gram-Schmidt; Laskar 1990, 1993).

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
    states : array_like, shape (n_orbits, 2n) or (2n,), or ShellSeeds
        Initial states ``(q1..qn, p1..pn)``.
    t : float, optional
        Flows sampled in time (``plane=None``): the length of the record in model time;
        the ``samples`` points are ``t / (samples - 1)`` apart. Not used for maps and sections.
    samples : int, optional
        Samples per orbit (default 2048, at least 32): points in time, iterates of a map
        (the seed and ``samples - 1`` iterates), crossings of a plane, or driving periods (the
        seed and ``samples - 1`` periods). The error falls like ``samples^-(2 window + 2)`` on an invariant
        torus.
    params : mapping, optional
        Parameter values by name.
    dt : float, optional
        Integration step (flows). It is shortened to divide the sample spacing.
        Default: :func:`phaselab.engine.integrators.default_step`.
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
        the model's angles (``system.angles``: a map's wrapped coordinates, a flow's declared
        angles).
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
    accuracy : float, optional
        Flows, instead of ``dt``: the relative error of the frequencies asked of the
        integration (a relative timing error in (0, 1), as in :func:`phaselab.trajectory`);
        the step is chosen by step doubling over short pilot runs and the error reached is
        ``.error_estimate``. The spectral analysis adds its own error (see ``samples``).

    Returns
    -------
    Frequencies
        ``.nu`` (n_orbits, k) in cycles per unit time (flows sampled in time: ``nu =
        omega / 2 pi``), per iterate (maps: tunes), per crossing or per driving period.

    Raises
    ------
    ParameterError
        Bad ``states``, ``t``, ``samples``, ``dt``, ``lines``, ``window``, ``fold``, ``plane``,
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
    Z0, how, n, pdict = _common(system, states, plane, t, samples, params, direction)
    limits.check_budget(len(Z0), n, 4.0 * len(Z0) * n * Z0.shape[1], "frequencies")
    lines = inputs.count(lines, "lines", maximum=max(1, n // 2))
    window = inputs.count(window, "window", 0, MAX_WINDOW_ORDER)
    if fold not in ("signed", "positive"):
        raise ParameterError(f"fold must be 'signed' or 'positive', got {fold!r}")
    ang = angle_periods(system, angles)
    S = sample_orbits(system, Z0, how, n, t, pdict, dt, method, plane, direction, box, t_max, accuracy)

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
        if how == "time":
            warn_if_aliased(system, S.states[ok], ok, S.step, t, n, pdict, fold, S.drive, ang)
    unit = "cycles per " + S.unit
    base = 1.0 if how != "time" else S.drive
    return Frequencies(nu=nu, lines=SpectralLines(l_nu, l_amp, l_ph), diffusion=diff, status=status,
                       names=names, unit=unit, kind="frequency", sampling=how, base_frequency=base,
                       seeds=Z0, params=pdict, method=S.method, dt=S.dt, sample_step=S.step,
                       n_samples=n, window=int(window), plane=S.plane, system=system, measured_error=S.error)


def _common(system, seeds, plane, t, n, params, direction):
    if not hasattr(system, "state_symbols") or not hasattr(system, "param_values"):
        raise ParameterError(f"system must be a Hamiltonian or an AreaPreservingMap, got "
                             f"{type(system).__name__}")
    Z0 = check_seeds(system, seeds)
    n = DEFAULT_SAMPLES if n is None else inputs.count(n, "samples", MIN_SAMPLES)
    inputs.direction(direction)
    how = sampling_plan(system, plane, t, n)
    pdict = parameter_values(system, params)
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


def rotation_number(system, states, t=None, *, samples=None, angle=None, params=None, dt=None,
                    method="auto", plane=None, direction=+1, center=None, box=None,
                    t_max=None, accuracy=None) -> Frequencies:
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
    states : array_like, shape (n_orbits, 2n) or (2n,)
    t : float, optional
        Record length for a flow sampled in time.
    samples : int, optional
        Samples per orbit (default 2048, at least 32); see :func:`frequencies`.
    angle : str or (str, str), optional
        A coordinate whose value is the angle (in radians; a map's wrapped coordinate is
        lifted exactly), or a pair of names ``(q, p)``: the polar angle
        ``atan2(-(p - p_c), q - q_c)`` about ``center``, clockwise positive like the tunes of
        :func:`frequencies`; its per-sample advance must stay below half a turn. Default:
        the coordinate of a one-degree-of-freedom system.
    params, dt, method, box, t_max, accuracy : optional
        As in :func:`frequencies`.
    plane : None, mapping or "stroboscopic"
        As in :func:`frequencies`; a driven flow given neither ``t`` nor ``plane`` is sampled
        once per driving period.
    direction : {+1, -1}
    center : (float, float), optional
        ``(q_c, p_c)`` for a pair ``angle``; default (0, 0).

    Returns
    -------
    Frequencies
        ``kind="rotation"``, ``.nu`` of shape (n_orbits, 1), ``.lines`` None, ``.diffusion``
        the change between the two halves (log10).
    """
    if (inputs.system(system).kind == "flow" and plane is None and t is None
            and getattr(system, "period", None) is not None):
        plane = "stroboscopic"
    Z0, how, n, pdict = _common(system, states, plane, t, samples, params, direction)
    limits.check_budget(len(Z0), n, 4.0 * len(Z0) * n * Z0.shape[1], "rotation_number")
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
        if center is None:
            qc, pc = 0.0, 0.0
        else:
            if isinstance(center, str) or not hasattr(center, "__len__") or len(center) != 2:
                raise ParameterError(f"center must be a pair (q_c, p_c), got {center!r}")
            qc, pc = (inputs.number(c, "center") for c in center)
    else:
        if center is not None:
            raise ParameterError("center is used only with a pair angle=(q, p)")
        iq, ip = inputs.state_index(system, angle, "angle"), None
        label = system.state_symbols[iq].name
    S = sample_orbits(system, Z0, how, n, t, pdict, dt, method, plane, direction, box, t_max, accuracy)
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
                       window=None, plane=S.plane, system=system, measured_error=S.error)


# ----------------------------------------------------------------------------- provenance
def _metadata(res) -> dict:
    from phaselab.engine import provenance as labels

    return labels.provenance(
        res.system, res.params, kind=res.kind, unit=res.unit, sampling=res.sampling, plane=res.plane,
        method=res.method, dt=float(res.dt), sample_step=float(res.sample_step),
        n_samples=int(res.n_samples), window=-1 if res.window is None else int(res.window),
        base_frequency=float("nan") if res.base_frequency is None else float(res.base_frequency),
        diffusion_definition="log10 of the Euclidean norm of nu(second half) - nu(first half)",
        status_codes={str(k): v for k, v in STATUS_TEXT.items()})


def _to_xarray(res):
    from phaselab.engine import provenance as labels

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
    ds.attrs["error_estimate"] = float(res.error_estimate)   # relative timing error of the step
    ds["nu"].attrs.update(units=res.unit, description=f"{res.kind} of each degree of freedom")
    ds["diffusion"].attrs.update(units=f"log10({res.unit})")
    ds["valid"].attrs["description"] = "1 where the orbit was analysed in full"
    return ds
