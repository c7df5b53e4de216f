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

The hot loops are numba functions written in :mod:`phaselab.frequency.spectral_loops`,
parallel over signals. That file is read as text and loaded as a generated module of the
kernel cache (:func:`phaselab.codegen.cache.load_module`, with the kernels' integrity rules),
so its machine code is kept under ``PHASELAB_CACHE_DIR`` like every other compiled loop, not
in the package's folder (which a read-only install cannot write); its first compilation in a
process is announced.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from phaselab.base.locks import file_lock
from phaselab.codegen.cache import cache_dir, codegen_fingerprint, load_module, source_hash
from phaselab.codegen.progress import compiling
from phaselab.engine.orbit_threads import run_sliced
from phaselab.errors import ParameterError

__all__ = ["SpectralLines", "Workspace", "leading_lines", "window", "chunk_rows", "MAX_WINDOW_ORDER"]

MAX_WINDOW_ORDER = 8
"""Highest window order accepted (higher orders widen the main lobe with little gain)."""

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


# ----------------------------------------------------------------------------- compiled routines
ROUTINES_FILE = Path(__file__).with_name("spectral_loops.py")
"""The text of the compiled routines (read, never imported)."""

_routines_module: list = []


def routines_module_name() -> str:
    """The cache name of the routines' module (changes with their text and the toolchain)."""
    return f"spectral_{source_hash(ROUTINES_FILE.read_text(), codegen_fingerprint())}"


def routines():
    """The module of compiled spectral routines, loaded from the kernel cache (written there
    first from :data:`ROUTINES_FILE`). Its functions compile on their first call, their
    machine code kept beside the module in the cache."""
    if not _routines_module:
        _routines_module.append(load_module(routines_module_name(), ROUTINES_FILE.read_text))
    return _routines_module[0]


SIGNAL_ROWS = {
    "fill_signals": (0, 4, 5),
    "project_all": (0, 2, 4, 5, 6),
    "remove_mean": (0, 2, 3, 4, 5, 6),
    "energies": (0, 2),
    "apply_window": (0, 2),
    "peak_bins": (0, 1, 2, 3),
    "refine_all": (0, 2, 3, 5, 6),
}
"""Routine -> positions of its arguments with one row per signal (per orbit for
``fill_signals``). These routines treat the rows independently and hold no ``parallel=True``
code (numba's parallel compilation is slow): slices of the signals run on numba's count of threads
(:func:`phaselab.engine.orbit_threads.run_sliced`), with the same numbers."""


def batch(name: str, *args):
    """Call the routine ``name`` of :data:`SIGNAL_ROWS` on slices of the signals on threads."""
    return run_sliced(getattr(routines(), name), args, SIGNAL_ROWS[name], ready=False)


def window(n, order):
    """The Hann-type window of order ``order`` on ``n`` samples (see ``spectral_loops.window``)."""
    return routines().window(n, order)


_announced: list = []


# ----------------------------------------------------------------------------- driver
def _threads() -> int:
    import numba

    return int(numba.get_num_threads())


def _coarse(residual, w, active, buffer, windowed=False):
    """Peak bin of the FFT of the windowed residual: (centre, start) in rad per sample.
    ``buffer`` is overwritten; ``windowed=True`` says it already holds the windowed
    residual."""
    from scipy import fft as sfft

    if not windowed:
        batch("apply_window", residual, w, buffer)
    spec = sfft.fft(buffer, axis=1, overwrite_x=True, workers=_threads())
    centre = np.empty(len(residual))
    start = np.empty(len(residual))
    batch("peak_bins", spec, active, centre, start)
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
        if _announced:
            _chunk(xc, ws.get("residual", b - a, n), ws.get("buffer", b - a, n), lines, p,
                   amplitudes, nu[a:b], amp[a:b], phase[a:b])
            continue
        lock = cache_dir() / f".lock-{routines_module_name()}"
        with file_lock(lock), compiling("the frequency-analysis routines that all systems share"):
            _chunk(xc, ws.get("residual", b - a, n), ws.get("buffer", b - a, n), lines, p,
                   amplitudes, nu[a:b], amp[a:b], phase[a:b])
        _announced.append(True)
    return SpectralLines(nu, amp, phase)


def _chunk(x, residual, buffer, lines, p, amplitudes, nu, amp, phase):
    n_sig, n = x.shape
    w = routines().window(n, p)
    omegas = np.zeros((n_sig, lines + 1))      # column 0: the zero-frequency line
    coef = np.zeros((n_sig, lines + 1), dtype=np.complex128)
    active = np.ones(n_sig, dtype=bool)
    total = np.empty(n_sig)
    left = np.empty(n_sig)
    batch("remove_mean", x, w, residual, buffer, coef, total, left)
    half_width = (0.75 if p == 0 else 1.0) * 2.0 * np.pi / n
    found = np.zeros(n_sig, dtype=np.int64)
    for j in range(1, lines + 1):
        if j > 1:
            batch("energies", residual, w, left)
        active &= left > _SILENT * total
        if not active.any():
            break
        centre, start = _coarse(residual, w, active, buffer, windowed=j == 1)
        peak = np.empty(n_sig)
        batch("refine_all", residual, w, start, centre, half_width, active, peak)
        omegas[:, j] = np.where(active, peak, np.nan)
        was = active.copy()
        last = j == lines
        if last and not amplitudes:
            found[active] = j
            break
        batch("project_all", x, w, omegas, j + 1, active, residual, coef, not last)
        found[was & active] = j
    m = np.arange(1, lines + 1)
    ok = m[None, :] <= found[:, None]
    om = np.where(ok, omegas[:, 1:], np.nan)
    c = coef[:, 1:] * np.exp(-1j * om * 0.5 * (n - 1))   # phases referred to the first sample
    nu[...] = np.where(ok, (om / (2 * np.pi) + 0.5) % 1.0 - 0.5, np.nan)
    if amplitudes:
        amp[...] = np.where(ok, np.abs(c), np.nan)
        phase[...] = np.where(ok, np.angle(c), np.nan)
