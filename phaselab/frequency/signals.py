"""From samples to frequencies: the complex signals of each degree of freedom (angles unwrapped),
their leading lines by Laskar's method (:mod:`phaselab.frequency.spectral`), the diffusion
between the two halves of a record, and the fold of a frequency into its principal range.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numba import njit, prange

from phaselab.frequency.spectral import SpectralLines, Workspace, chunk_rows, leading_lines
from phaselab.frequency.spectral import window as hann_window

DIFFUSION_FLOOR = 1e-30
"""Frequency changes below this are reported as ``log10(DIFFUSION_FLOOR) = -30``."""


# ----------------------------------------------------------------------------- signals
@njit(cache=True, nogil=True, parallel=True)
def fill_signals(states, columns, periods, w, out, still):
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
        fill_signals(np.ascontiguousarray(states[a:b]), cols, periods, w, X, still[a:b])
        found = leading_lines(X, lines=lines, window_order=window, workspace=ws)
        shape = (k, m, lines)
        l_nu[a:b] = np.moveaxis(fold_frequencies(found.nu.reshape(shape), fold) / step, 0, 1)
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


def fold_frequencies(nu, fold):
    if fold == "signed":
        return (nu + 0.5) % 1.0 - 0.5
    return nu % 1.0


