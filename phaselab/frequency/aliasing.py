"""Whether a flow's record, sampled in time, is too sparse for its motion (aliasing).

Samples ``dt_s`` apart cannot tell a frequency ``nu`` from ``nu + k / dt_s``: the analysis
reports it folded into ``[-1/(2 dt_s), 1/(2 dt_s))`` (``fold="signed"``) or ``[0, 1/dt_s)``
(``"positive"``). The leading line is then wrong without any sign in the spectrum.

The motion's frequencies are bounded by the linear frequencies along the orbit: for a
natural system with one degree of freedom, ``q'' = -V'(q)``, the velocity solves
``x'' + V''(q(t)) x = 0``, so by Sturm's comparison theorem its zeros (the turning points,
two per period) are at least ``pi / sqrt(max V'')`` apart and the orbit's frequency is at
most ``sqrt(max V'') / (2 pi)``; ``sqrt(V'')`` is the imaginary part of the eigenvalues of
the Jacobian of the vector field. With more degrees of freedom the same bound is a
guide, not a theorem. A driven flow also carries its driving frequency, and a coordinate
read as an angle (which may rotate rather than librate) turns ``|dq/dt| / period`` times per
unit time at most. The check takes the largest of these over (a subsample of) each record
and warns where it reaches past the fold range.
"""

from __future__ import annotations

import math
import warnings

import numpy as np

from phaselab.engine.compiled import loops

EVALUATIONS = 16384
"""Most Jacobians evaluated per call (samples spread over the orbits and their records)."""
PER_ORBIT = 64
"""Most samples of one record looked at."""
MARGIN = 1.25
"""Headroom of the advised ``n`` or ``t`` over the bound."""


def frequency_bound(system, states, step, params, angles=None) -> np.ndarray:
    """The largest linear frequency (or rate of turning of an angle) along each record, in
    cycles per unit time.

    Parameters
    ----------
    system : Hamiltonian
    states : ndarray, shape (n_orbits, n_samples, 2n)
        Records sampled ``step`` apart from t = 0.
    step : float
        Time between samples.
    params : mapping
        Parameter values by name.
    angles : mapping of int to float, optional
        Period of each coordinate (by index) read as an angle.

    Returns
    -------
    ndarray, shape (n_orbits,)
        ``max |Im lambda| / (2 pi)`` and ``max |dq_i/dt| / period_i`` over the samples looked
        at (NaN where none is finite).
    """
    k, n, m = states.shape
    if k == 0:
        return np.zeros(0)
    per = max(2, min(PER_ORBIT, n, EVALUATIONS // k))
    idx = np.unique(np.linspace(0, n - 1, per).round().astype(int))
    Z = states[:, idx].reshape(-1, m)
    prm = system.param_values(params)
    if system.is_autonomous:
        cs = loops(system)
    else:
        dof = m // 2
        times = np.tile(idx * step, k)
        Z = np.concatenate([Z[:, :dof], times[:, None], Z[:, dof:], np.zeros((len(Z), 1))], axis=1)
        cs = loops(system.extended())
    Z = np.ascontiguousarray(Z)
    good = np.all(np.isfinite(Z), axis=1)
    lam = np.full(len(Z), np.nan)
    if good.any():
        jac = cs.evaluate("jacobian", Z[good], prm)
        ok = np.all(np.isfinite(jac), axis=(1, 2))
        vals = np.full(len(jac), np.nan)
        if ok.any():
            vals[ok] = largest_imaginary_part(jac[ok]) / (2.0 * np.pi)
        if angles:
            speed = cs.evaluate("vector_field", Z[good], prm)
            for i, period in angles.items():    # coordinates keep their places in extended space
                vals = np.fmax(vals, np.abs(speed[:, int(i)]) / float(period))
        lam[good] = vals
    lam = lam.reshape(k, len(idx))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        return np.nanmax(lam, axis=1)


def largest_imaginary_part(jac) -> np.ndarray:
    """``max |Im lambda|`` over the eigenvalues of each Hamiltonian matrix in ``jac`` (k, m, m).

    The Jacobian of a Hamiltonian vector field is Omega times a symmetric matrix, so its
    characteristic polynomial is even, ``lambda^m + c2 lambda^(m-2) + ...`` (eigenvalues
    in pairs +-lambda; common practice). For m = 2 and m = 4 the squares mu = lambda^2 are
    the roots of ``mu + c2`` and ``mu^2 + c2 mu + det`` with ``c2 = -tr(J^2) / 2`` (tr J = 0),
    solved in closed form: far cheaper than a general eigensolver on many small matrices.
    Larger matrices use ``numpy.linalg.eigvals``.
    """
    k, m, _ = jac.shape
    if m not in (2, 4):
        return np.abs(np.linalg.eigvals(jac).imag).max(axis=1)
    c2 = -0.5 * np.einsum("kij,kji->k", jac, jac)
    if m == 2:
        mu = -c2.astype(complex)
        return np.abs(np.sqrt(mu).imag)
    root = np.sqrt((c2 * c2 - 4.0 * np.linalg.det(jac)).astype(complex))
    mu = np.stack([(-c2 + root) / 2.0, (-c2 - root) / 2.0], axis=1)
    return np.abs(np.sqrt(mu).imag).max(axis=1)


def warn_if_aliased(system, states, rows, step, t, n, params, fold, drive=None, angles=None) -> np.ndarray:
    """Warn when the leading line of a record sampled in time may be folded (aliased).

    Parameters
    ----------
    system : Hamiltonian
    states : ndarray, shape (k, n, 2n)
        The complete records.
    rows : ndarray of int, shape (k,)
        Their orbit numbers (named in the warning).
    step : float
        Time between samples, ``t / (n - 1)``.
    t : float
        Length of the record.
    n : int
        Samples per record.
    params : mapping
    fold : {"signed", "positive"}
    drive : float, optional
        Driving frequency (cycles per unit time) of a driven flow.
    angles : mapping of int to float, optional
        Coordinates read as angles, with their periods.

    Returns
    -------
    ndarray of bool, shape (k,)
        Which records may be aliased. A ``RuntimeWarning`` names them and says which ``n``
        (or ``t``) samples them finely enough.
    """
    bound = frequency_bound(system, states, step, params, angles)
    if drive is not None and np.isfinite(drive):
        bound = np.fmax(bound, abs(drive))
    reach = 0.5 / step if fold == "signed" else 1.0 / step
    suspect = np.isfinite(bound) & (bound >= reach)
    if suspect.any():
        f = float(bound[suspect].max())
        half = 0.5 if fold == "signed" else 1.0
        n_need = math.ceil(MARGIN * f * t / half) + 1
        t_need = (n - 1) * half / (MARGIN * f)
        shown = np.asarray(rows)[suspect]
        listed = ", ".join(map(str, shown[:10])) + (" ..." if shown.size > 10 else "")
        source = ("the largest linear frequency along the orbit" + (", the turning of an angle" if angles else "")
                  + (", the drive" if drive else ""))
        warnings.warn(
            f"the leading line of orbit(s) {listed} may be aliased: the motion holds frequencies up to "
            f"about {f:.4g} cycles per unit time ({source}), but samples {step:.4g} apart fold every "
            f"frequency into a range {2 * half / step:.4g} wide (fold={fold!r}: |nu| below {reach:.4g}); "
            f"use n >= {n_need} samples for this t, or t <= {t_need:.4g} for this n",
            RuntimeWarning, stacklevel=3)
    return suspect
