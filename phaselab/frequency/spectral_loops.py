"""The compiled parts of Laskar's frequency analysis (see :mod:`phaselab.frequency.spectral`
for the method, its accuracy and references): the window, the scalar products and their
derivatives in the frequency, the safeguarded Newton refinement of a line, the projection on
the lines found so far, the peak bin of a spectrum, and the complex signals of orbits
(``fill_signals``). numba functions (``cache=True,
nogil=True``, none in numba's parallel mode, whose compilation is slow); the routines over a
batch of signals or orbits run slices of it on threads (spectral.SIGNAL_ROWS).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

_RESET = 256            # recompute e^{-i w s} exactly every this many samples
_NEWTON_MAX = 60        # safeguarded Newton iterations per line (typically 3 to 6 are used)
_STEP_TOL = 1e-13       # stop bisecting when the bracket is below this fraction of a bin
_NEWTON_DONE = 1e-6     # a Newton step below this fraction of a bin is the last one

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
def line_sums(wx, omega):
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
def refine_peak(wx, start, centre, half_width):
    """The frequency (rad per sample) maximising ``|sum_k wx_k e^{-i w s_k}|`` in
    ``[centre - half_width, centre + half_width]``, by safeguarded Newton from ``start``."""
    n = wx.shape[0]
    lo = centre - half_width
    hi = centre + half_width
    x = min(max(start, lo), hi)
    bin_width = 2.0 * math.pi / n
    for _ in range(_NEWTON_MAX):
        a0, a1, a2 = line_sums(wx, x)
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


@njit(cache=True, nogil=True)
def refine_all(residual, w, start, centre, half_width, active, out):
    """Refine the peak of every active signal; ``out[i]`` in rad per sample."""
    n_sig, n = residual.shape
    for i in range(n_sig):
        if not active[i]:
            out[i] = np.nan
            continue
        wx = np.empty(n, dtype=np.complex128)
        for k in range(n):
            wx[k] = w[k] * residual[i, k]
        out[i] = refine_peak(wx, start[i], centre[i], half_width)


@njit(cache=True, nogil=True)
def cos_sum(w, d):
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
def project_one(x, w, omegas, m, res, coef, with_residual):
    """Project ``x`` onto ``e^{i omega_a s}``, a < m, in the windowed product; write the
    coefficients into ``coef[:m]`` and (if ``with_residual``) the residual into ``res``.
    Returns False when the normal matrix is numerically singular (a line repeated)."""
    n = x.shape[0]
    half = 0.5 * (n - 1)
    G = np.empty((m, m))
    g0 = cos_sum(w, 0.0)
    for a in range(m):
        G[a, a] = g0
        for b in range(a):
            v = cos_sum(w, omegas[a] - omegas[b])
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


@njit(cache=True, nogil=True)
def project_all(x, w, omegas, m, active, residual, coef, with_residual):
    """For every active signal: coefficients of the lines ``omegas[i, :m]`` in ``x`` and
    (if ``with_residual``) the residual of ``x`` after removing them. A signal whose normal matrix is singular keeps its previous
    residual and coefficients, its newest line is set to NaN and it becomes inactive."""
    n_sig, n = x.shape
    for i in range(n_sig):
        if not active[i]:
            continue
        res = np.empty(n, dtype=np.complex128)
        c = np.zeros(omegas.shape[1], dtype=np.complex128)
        if project_one(x[i], w, omegas[i], m, res, c, with_residual):
            if with_residual:
                for k in range(n):
                    residual[i, k] = res[k]
            for a in range(m):
                coef[i, a] = c[a]
        else:
            omegas[i, m - 1] = np.nan
            active[i] = False


@njit(cache=True, nogil=True)
def remove_mean(x, w, residual, windowed, coef, total, left):
    """The zero-frequency line, in two passes instead of the general projection:
    ``coef[i, 0]`` the windowed mean of row i, ``residual`` the row minus it and
    ``windowed`` that times the window (ready for the FFT); ``total`` and ``left`` the
    windowed mean squares of the row and of the residual."""
    n_sig, n = x.shape
    wsum = 0.0
    for k in range(n):
        wsum += w[k]
    for i in range(n_sig):
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


@njit(cache=True, nogil=True)
def energies(x, w, out):
    n_sig, n = x.shape
    for i in range(n_sig):
        acc = 0.0
        for k in range(n):
            v = x[i, k]
            acc += w[k] * (v.real * v.real + v.imag * v.imag)
        out[i] = acc / n


@njit(cache=True, nogil=True)
def apply_window(residual, w, out):
    n_sig, n = residual.shape
    for i in range(n_sig):
        for k in range(n):
            out[i, k] = w[k] * residual[i, k]


@njit(cache=True, nogil=True)
def peak_bins(spec, active, centre, start):
    """Largest bin of each spectrum, moved off the grid by Gaussian interpolation of the
    three largest bins; both in rad per sample."""
    n_sig, n = spec.shape
    for i in range(n_sig):
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


@njit(cache=True, nogil=True)
def fill_signals(states, iq, period, w, out, still):
    """Complex signals of the degree of freedom ``iq`` of every orbit.

    ``out[o]`` is the signal of orbit ``o``:
    ``z = (q - <q>) - i (p - <p>) / s`` with ``s = rms(p - <p>) / rms(q - <q>)``, means and
    rms weighted by ``w`` (the Hann window, summing to 1), so they do not depend on where
    the record ends within a period. A harmonic orbit becomes ``A e^{+i w t}`` (positive
    frequency for the usual clockwise motion in the (q, p) plane) with its conjugate line
    removed, an anharmonic orbit close to it. An angle (``period > 0``) whose lifted
    value covers a full period (the orbit winds) gives ``exp(2 pi i q / period)``.
    ``still[o]`` is set when the degree of freedom of orbit ``o`` does not move. The orbits
    are independent: slices of them run on threads (``spectral.SIGNAL_ROWS``).
    """
    n_orb, n, width = states.shape
    dof = width // 2
    ip = dof + iq
    for o in range(n_orb):
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
        if period > 0.0 and qmax - qmin >= period:
            f = 2.0 * math.pi / period
            for j in range(n):
                a = f * states[o, j, iq]
                out[o, j] = complex(math.cos(a), math.sin(a))
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
            out[o, j] = complex(states[o, j, iq] - mq, -(states[o, j, ip] - mp) * inv)
