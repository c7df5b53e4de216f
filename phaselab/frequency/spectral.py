"""Leading spectral lines of complex signals by Laskar's frequency analysis.

System-independent: the functions here take a batch of equally spaced complex samples,
shape ``(n_signals, n_samples)``, and return the frequencies (cycles per sample),
amplitudes and phases of the leading lines of each signal. Nothing here knows about
Hamiltonians or maps; :mod:`phaselab.frequency.frequencies` builds the signals from orbits.

The method (J. Laskar, Icarus 88, 266 (1990); Physica D 67, 257 (1993)):

1. Samples ``x_k``, ``k = 0 .. N-1``, are placed on a time axis centred on the middle of the
   record, ``s_k = k - (N - 1)/2`` in ``[-T, T]`` with ``T = (N - 1)/2``, and weighted by
   the Hann-type window of order ``p``::

       chi_p(s) = c_p (1 + cos(pi s / T))^p,

   normalised to unit mean over the samples (``p = 0``: no window). The windowed scalar
   product is ``<f, g> = (1/N) sum_k chi_p(s_k) f_k conj(g_k)``.
2. The line at zero frequency (the windowed mean) is projected out first.
3. For each further line: the coarse peak is the largest bin of the FFT of the windowed
   residual (numpy's FFT, once per batch and line), moved off the bin grid by Gaussian
   interpolation of the three largest bins; then ``phi(w) = |<f, e^{i w s}>|^2`` is
   maximised by safeguarded Newton iteration on ``phi'(w) = 0`` (``phi'`` and ``phi''``
   come from the same pass over the samples), inside a bracket of one FFT bin either side
   of the peak bin (three quarters of a bin without a window, whose main lobe is only one
   bin wide). The zero of the derivative is located to about machine precision, far below
   the bin width ``1/N``.
4. The new line is subtracted by projecting the signal onto the span of all lines found so
   far, including the zero-frequency line (Laskar 1993's Gram-Schmidt step, done here by
   solving the windowed normal equations ``G c = b`` with ``G_ab = <e_b, e_a>`` real and
   symmetric), so that the amplitudes of close lines stay right.

Accuracy: for a quasi-periodic signal the error of a frequency falls like ``T^-(2p+2)``:
``T^-2`` without a window, ``T^-4`` with the Hann window ``p = 1`` (Laskar 1993). An
isolated line is found to rounding error for any ``p``, since the window is symmetric.

The hot loops are numba functions (``cache=True, nogil=True``), parallel over signals.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numba import njit, prange

from phaselab.errors import ParameterError

__all__ = ["SpectralLines", "Workspace", "leading_lines", "window", "chunk_rows", "MAX_WINDOW_ORDER"]

MAX_WINDOW_ORDER = 8
"""Highest window order accepted (higher orders widen the main lobe with little gain)."""

_RESET = 256            # recompute e^{-i w s} exactly every this many samples
_NEWTON_MAX = 60        # safeguarded Newton iterations per line (typically 3 to 6 are used)
_STEP_TOL = 1e-13       # stop bisecting when the bracket is below this fraction of a bin
_NEWTON_DONE = 1e-6     # a Newton step below this fraction of a bin is the last one
_SILENT = 1e-24         # residual energy below this fraction of the signal's: no line left
_CHUNK_ELEMENTS = 1 << 20  # samples analysed together (16 MiB complex)


@dataclass
class SpectralLines:
    """Leading lines of a batch of signals.

    Attributes
    ----------
    nu : ndarray, shape (..., n_lines)
        Frequencies in cycles per sample, folded into ``[-1/2, 1/2)``; NaN where no line was
        found (a constant signal, or lines that could no longer be told apart).
    amplitude : ndarray, shape (..., n_lines)
        Moduli of the complex amplitudes (units of the signal).
    phase : ndarray, shape (..., n_lines)
        Phases in radians at the first sample: the signal is approximately
        ``sum_j amplitude_j exp(i (2 pi nu_j k + phase_j))`` for sample ``k``.
    """

    nu: np.ndarray
    amplitude: np.ndarray
    phase: np.ndarray

    def __getitem__(self, index) -> "SpectralLines":
        return SpectralLines(self.nu[index], self.amplitude[index], self.phase[index])


# ----------------------------------------------------------------------------- compiled parts
@njit(cache=True, nogil=True)
def window(n, order):
    """The Hann-type window of order ``order`` on ``n`` samples, normalised to unit mean.

    ``(1 + cos(pi s / T))^order`` with ``s = k - (n - 1)/2``, ``T = (n - 1)/2``; order 0 is
    all ones. Shape (n,).
    """
    w = np.ones(n)
    if order == 0 or n < 2:
        return w
    half = 0.5 * (n - 1)
    total = 0.0
    for k in range(n):
        v = (1.0 + math.cos(math.pi * (k - half) / half)) ** order
        w[k] = v
        total += v
    scale = n / total
    for k in range(n):
        w[k] *= scale
    return w


@njit(cache=True, nogil=True)
def _sums(wx, omega):
    """``A_m = sum_k wx_k s_k^m e^{-i omega s_k}`` for m = 0, 1, 2 (s centred).

    ``e^{-i omega s}`` advances by one complex multiplication per sample and is recomputed
    exactly every ``_RESET`` samples, so rounding cannot build up along long records.
    """
    n = wx.shape[0]
    half = 0.5 * (n - 1)
    cr = math.cos(omega)
    ci = -math.sin(omega)
    a0r = a0i = a1r = a1i = a2r = a2i = 0.0
    k = 0
    while k < n:
        s0 = k - half
        er = math.cos(omega * s0)
        ei = -math.sin(omega * s0)
        stop = min(k + _RESET, n)
        for j in range(k, stop):
            s = j - half
            xr = wx[j].real
            xi = wx[j].imag
            pr = xr * er - xi * ei
            pi = xr * ei + xi * er
            a0r += pr
            a0i += pi
            a1r += s * pr
            a1i += s * pi
            a2r += s * s * pr
            a2i += s * s * pi
            er, ei = er * cr - ei * ci, er * ci + ei * cr
        k = stop
    return complex(a0r, a0i), complex(a1r, a1i), complex(a2r, a2i)


@njit(cache=True, nogil=True)
def _peak(wx, start, centre, half_width):
    """The frequency (rad per sample) maximising ``|sum_k wx_k e^{-i w s_k}|`` in
    ``[centre - half_width, centre + half_width]``, by safeguarded Newton from ``start``."""
    n = wx.shape[0]
    lo = centre - half_width
    hi = centre + half_width
    x = min(max(start, lo), hi)
    bin_width = 2.0 * math.pi / n
    for _ in range(_NEWTON_MAX):
        a0, a1, a2 = _sums(wx, x)
        g = (a0.real * a1.imag - a0.imag * a1.real)          # Im(conj(a0) a1), ~ phi'
        gp = (a1.real * a1.real + a1.imag * a1.imag) - (a0.real * a2.real + a0.imag * a2.imag)
        if g > 0.0:
            lo = x
        elif g < 0.0:
            hi = x
        else:
            return x
        if gp < 0.0:
            new = x - g / gp
            if lo <= new <= hi:
                # Newton near the peak converges at least quadratically (cubically for an
                # isolated line, whose phi is even about its peak): a small step ends it
                if abs(new - x) <= _NEWTON_DONE * bin_width:
                    return new
                x = new
                continue
        new = 0.5 * (lo + hi)
        if hi - lo <= _STEP_TOL * bin_width:
            return new
        x = new
    return x


@njit(cache=True, nogil=True, parallel=True)
def _refine_all(residual, w, start, centre, half_width, active, out):
    """Refine the peak of every active signal; ``out[i]`` in rad per sample."""
    n_sig, n = residual.shape
    for i in prange(n_sig):
        if not active[i]:
            out[i] = np.nan
            continue
        wx = np.empty(n, dtype=np.complex128)
        for k in range(n):
            wx[k] = w[k] * residual[i, k]
        out[i] = _peak(wx, start[i], centre[i], half_width)


@njit(cache=True, nogil=True)
def _cos_sum(w, d):
    """``(1/N) sum_k w_k cos(d s_k)``, s centred."""
    n = w.shape[0]
    half = 0.5 * (n - 1)
    rot = complex(math.cos(d), math.sin(d))
    acc = 0.0
    k = 0
    while k < n:
        s0 = k - half
        e = complex(math.cos(d * s0), math.sin(d * s0))
        stop = min(k + _RESET, n)
        for j in range(k, stop):
            acc += w[j] * e.real
            e = e * rot
        k = stop
    return acc / n


@njit(cache=True, nogil=True)
def _project_one(x, w, omegas, m, res, coef, with_residual):
    """Project ``x`` onto ``e^{i omega_a s}``, a < m, in the windowed product; write the
    coefficients into ``coef[:m]`` and (if ``with_residual``) the residual into ``res``.
    Returns False when the normal matrix is numerically singular (a line repeated)."""
    n = x.shape[0]
    half = 0.5 * (n - 1)
    G = np.empty((m, m))
    g0 = _cos_sum(w, 0.0)
    for a in range(m):
        G[a, a] = g0
        for b in range(a):
            v = _cos_sum(w, omegas[a] - omegas[b])
            G[a, b] = v
            G[b, a] = v
    rhs = np.empty(m, dtype=np.complex128)
    for a in range(m):
        om = omegas[a]
        rot = complex(math.cos(om), -math.sin(om))
        acc = 0j
        k = 0
        while k < n:
            s0 = k - half
            e = complex(math.cos(om * s0), -math.sin(om * s0))
            stop = min(k + _RESET, n)
            for j in range(k, stop):
                acc += w[j] * x[j] * e
                e = e * rot
            k = stop
        rhs[a] = acc / n
    # Cholesky G = L L^T (G is real symmetric positive definite for distinct frequencies)
    L = np.zeros((m, m))
    for a in range(m):
        s = G[a, a]
        for c in range(a):
            s -= L[a, c] * L[a, c]
        if not s > 1e-10 * G[a, a]:
            return False
        L[a, a] = math.sqrt(s)
        for b in range(a + 1, m):
            t = G[b, a]
            for c in range(a):
                t -= L[b, c] * L[a, c]
            L[b, a] = t / L[a, a]
    y = np.empty(m, dtype=np.complex128)
    for a in range(m):
        t = rhs[a]
        for c in range(a):
            t -= L[a, c] * y[c]
        y[a] = t / L[a, a]
    for a in range(m - 1, -1, -1):
        t = y[a]
        for c in range(a + 1, m):
            t -= L[c, a] * coef[c]
        coef[a] = t / L[a, a]
    if not with_residual:
        return True
    for k in range(n):
        res[k] = x[k]
    for a in range(m):
        om = omegas[a]
        ca = coef[a]
        rot = complex(math.cos(om), math.sin(om))
        k = 0
        while k < n:
            s0 = k - half
            e = complex(math.cos(om * s0), math.sin(om * s0))
            stop = min(k + _RESET, n)
            for j in range(k, stop):
                res[j] -= ca * e
                e = e * rot
            k = stop
    return True


@njit(cache=True, nogil=True, parallel=True)
def _project_all(x, w, omegas, m, active, residual, coef, with_residual):
    """For every active signal: coefficients of the lines ``omegas[i, :m]`` in ``x`` and
    (if ``with_residual``) the residual of ``x`` after removing them. A signal whose normal matrix is singular keeps its previous
    residual and coefficients, its newest line is set to NaN and it becomes inactive."""
    n_sig, n = x.shape
    for i in prange(n_sig):
        if not active[i]:
            continue
        res = np.empty(n, dtype=np.complex128)
        c = np.zeros(omegas.shape[1], dtype=np.complex128)
        if _project_one(x[i], w, omegas[i], m, res, c, with_residual):
            if with_residual:
                for k in range(n):
                    residual[i, k] = res[k]
            for a in range(m):
                coef[i, a] = c[a]
        else:
            omegas[i, m - 1] = np.nan
            active[i] = False


@njit(cache=True, nogil=True, parallel=True)
def _remove_mean(x, w, residual, windowed, coef, total, left):
    """The zero-frequency line, in two passes instead of the general projection:
    ``coef[i, 0]`` the windowed mean of row i, ``residual`` the row minus it and
    ``windowed`` that times the window (ready for the FFT); ``total`` and ``left`` the
    windowed mean squares of the row and of the residual."""
    n_sig, n = x.shape
    wsum = 0.0
    for k in range(n):
        wsum += w[k]
    for i in prange(n_sig):
        acc = 0j
        e = 0.0
        for k in range(n):
            v = x[i, k]
            acc += w[k] * v
            e += w[k] * (v.real * v.real + v.imag * v.imag)
        mean = acc / wsum
        coef[i, 0] = mean
        total[i] = e / n
        e = 0.0
        for k in range(n):
            r = x[i, k] - mean
            residual[i, k] = r
            windowed[i, k] = w[k] * r
            e += w[k] * (r.real * r.real + r.imag * r.imag)
        left[i] = e / n


@njit(cache=True, nogil=True, parallel=True)
def _energies(x, w, out):
    n_sig, n = x.shape
    for i in prange(n_sig):
        acc = 0.0
        for k in range(n):
            v = x[i, k]
            acc += w[k] * (v.real * v.real + v.imag * v.imag)
        out[i] = acc / n


# ----------------------------------------------------------------------------- driver
def _threads() -> int:
    import numba

    return int(numba.get_num_threads())


@njit(cache=True, nogil=True, parallel=True)
def _windowed(residual, w, out):
    n_sig, n = residual.shape
    for i in prange(n_sig):
        for k in range(n):
            out[i, k] = w[k] * residual[i, k]


@njit(cache=True, nogil=True, parallel=True)
def _peak_bins(spec, active, centre, start):
    """Largest bin of each spectrum, moved off the grid by Gaussian interpolation of the
    three largest bins; both in rad per sample."""
    n_sig, n = spec.shape
    for i in prange(n_sig):
        if not active[i]:
            centre[i] = 0.0
            start[i] = 0.0
            continue
        best = -1.0
        kb = 0
        for k in range(n):
            v = spec[i, k]
            pw = v.real * v.real + v.imag * v.imag
            if pw > best:
                best = pw
                kb = k
        vl = spec[i, (kb - 1) % n]
        vr = spec[i, (kb + 1) % n]
        pl = vl.real * vl.real + vl.imag * vl.imag
        pr = vr.real * vr.real + vr.imag * vr.imag
        delta = 0.0
        if pl > 0.0 and pr > 0.0 and best > 0.0:
            la = math.log(pl)
            lb = math.log(best)
            lc = math.log(pr)
            curv = la - 2.0 * lb + lc
            if curv < 0.0:
                delta = min(0.5, max(-0.5, 0.5 * (la - lc) / curv))
        kk = kb - n if kb > n // 2 else kb
        centre[i] = 2.0 * math.pi * kk / n
        start[i] = 2.0 * math.pi * (kk + delta) / n


def _coarse(residual, w, active, buffer, windowed=False):
    """Peak bin of the FFT of the windowed residual: (centre, start) in rad per sample.
    ``buffer`` is overwritten; ``windowed=True`` says it already holds the windowed
    residual."""
    from scipy import fft as sfft

    if not windowed:
        _windowed(residual, w, buffer)
    spec = sfft.fft(buffer, axis=1, overwrite_x=True, workers=_threads())
    centre = np.empty(len(residual))
    start = np.empty(len(residual))
    _peak_bins(spec, active, centre, start)
    return centre, start


class Workspace:
    """Scratch arrays reused by successive :func:`leading_lines` calls.

    Touching freshly allocated memory costs a page fault per page, which on some machines
    is as slow as the analysis itself; a caller analysing many chunks passes one
    workspace to every call. Not shared between threads.
    """

    def __init__(self):
        self._arrays = {}

    def get(self, name: str, rows: int, n: int) -> np.ndarray:
        """A C-contiguous complex array of shape (rows, n) (contents undefined)."""
        a = self._arrays.get((name, n))
        if a is None or a.shape[0] < rows:
            a = np.empty((rows, n), dtype=np.complex128)
            self._arrays[(name, n)] = a
        return a[:rows]


def chunk_rows(n: int) -> int:
    """Signals of ``n`` samples handled together (about 16 MiB of samples)."""
    return max(1, _CHUNK_ELEMENTS // n)


def leading_lines(signals, lines: int = 1, window_order: int = 1,
                  amplitudes: bool = True, workspace: Workspace | None = None) -> SpectralLines:
    """The leading spectral lines of each signal by Laskar's frequency analysis.

    Parameters
    ----------
    signals : array_like of complex, shape (n_signals, n_samples) or (n_samples,)
        Equally spaced samples; every row is analysed on its own. Rows must be finite.
    lines : int
        Number of lines to find per signal (>= 1). The first is the largest peak of the
        windowed spectrum after the zero-frequency line is removed.
    window_order : int
        Order ``p`` of the Hann-type window (0: none; 1: Hann, the usual choice).
    amplitudes : bool
        False skips the last projection: frequencies only (amplitudes and phases NaN).
    workspace : Workspace, optional
        Scratch arrays to reuse across calls.

    Returns
    -------
    SpectralLines
        Arrays of shape (n_signals, lines), frequencies in cycles per sample in
        ``[-1/2, 1/2)``.

    Notes
    -----
    Lines are found one after another: the second is the largest peak of the residual after
    the first was subtracted, and so on. Subtraction projects onto all lines found (Laskar's
    Gram-Schmidt step), so earlier amplitudes are corrected as more lines are found.
    """
    x = np.asarray(signals)
    if x.dtype.kind not in "iufc":
        raise ParameterError(f"signals must be numbers, got dtype {x.dtype}")
    if x.ndim == 1:
        x = x[None, :]
    if x.ndim != 2:
        raise ParameterError(f"signals must have shape (n_signals, n_samples), got {x.shape}")
    lines = int(lines)
    p = int(window_order)
    if lines < 1:
        raise ParameterError("lines must be >= 1")
    if not 0 <= p <= MAX_WINDOW_ORDER:
        raise ParameterError(f"window order must be between 0 and {MAX_WINDOW_ORDER}")
    n_sig, n = x.shape
    if n < 8:
        raise ParameterError(f"at least 8 samples are needed, got {n}")
    if not np.all(np.isfinite(x)):
        raise ParameterError("signals must be finite")
    ws = workspace if workspace is not None else Workspace()
    nu = np.full((n_sig, lines), np.nan)
    amp = np.full((n_sig, lines), np.nan)
    phase = np.full((n_sig, lines), np.nan)
    rows = chunk_rows(n)
    for a in range(0, n_sig, rows):
        b = min(n_sig, a + rows)
        xc = x[a:b]
        if xc.dtype != np.complex128 or not xc.flags.c_contiguous:
            xc = ws.get("signal", b - a, n)
            xc[...] = x[a:b]
        _chunk(xc, ws.get("residual", b - a, n), ws.get("buffer", b - a, n), lines, p,
               amplitudes, nu[a:b], amp[a:b], phase[a:b])
    return SpectralLines(nu, amp, phase)


def _chunk(x, residual, buffer, lines, p, amplitudes, nu, amp, phase):
    n_sig, n = x.shape
    w = window(n, p)
    omegas = np.zeros((n_sig, lines + 1))      # column 0: the zero-frequency line
    coef = np.zeros((n_sig, lines + 1), dtype=np.complex128)
    active = np.ones(n_sig, dtype=bool)
    total = np.empty(n_sig)
    left = np.empty(n_sig)
    _remove_mean(x, w, residual, buffer, coef, total, left)
    half_width = (0.75 if p == 0 else 1.0) * 2.0 * np.pi / n
    found = np.zeros(n_sig, dtype=np.int64)
    for j in range(1, lines + 1):
        if j > 1:
            _energies(residual, w, left)
        active &= left > _SILENT * total
        if not active.any():
            break
        centre, start = _coarse(residual, w, active, buffer, windowed=j == 1)
        peak = np.empty(n_sig)
        _refine_all(residual, w, start, centre, half_width, active, peak)
        omegas[:, j] = np.where(active, peak, np.nan)
        was = active.copy()
        last = j == lines
        if last and not amplitudes:
            found[active] = j
            break
        _project_all(x, w, omegas, j + 1, active, residual, coef, not last)
        found[was & active] = j
    m = np.arange(1, lines + 1)
    ok = m[None, :] <= found[:, None]
    om = np.where(ok, omegas[:, 1:], np.nan)
    c = coef[:, 1:] * np.exp(-1j * om * 0.5 * (n - 1))   # phases referred to the first sample
    nu[...] = np.where(ok, (om / (2 * np.pi) + 0.5) % 1.0 - 0.5, np.nan)
    if amplitudes:
        amp[...] = np.where(ok, np.abs(c), np.nan)
        phase[...] = np.where(ok, np.angle(c), np.nan)
