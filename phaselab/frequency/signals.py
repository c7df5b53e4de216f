"""From samples to frequencies: the complex signals of each degree of freedom (angles unwrapped),
their leading lines by Laskar's method (:mod:`phaselab.frequency.spectral`), the diffusion
between the two halves of a record, and the fold of a frequency into its principal range.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from phaselab.frequency.spectral import SpectralLines, Workspace, batch, chunk_rows, leading_lines
from phaselab.frequency.spectral import window as hann_window

DIFFUSION_FLOOR = 1e-30
"""Frequency changes below this are reported as ``log10(DIFFUSION_FLOOR) = -30``."""


# ----------------------------------------------------------------------------- signals
# (the signals are filled by ``fill_signals`` of the compiled spectral routines,
# :mod:`phaselab.frequency.spectral_loops`, loaded from the kernel cache)
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
        S = np.ascontiguousarray(states[a:b])
        for c in range(k):            # rows c * m .. (c + 1) * m - 1: column c of each orbit
            batch("fill_signals", S, int(cols[c]), float(periods[c]), w, X[c * m:(c + 1) * m], still[a:b])
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


