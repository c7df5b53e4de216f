"""The one warning for orbits that numerical trouble stopped early.

An orbit that reaches a non-finite state, or whose implicit step does not converge, is not
an error of the call: it gets its status and the rest of the batch goes on. But its numbers
end there, and a result read without its status misleads (a MEGNO of 90 from an orbit
thrown to infinity by a too-large step reads as chaos). So every call that runs a batch
names such orbits in one ``RuntimeWarning``, with where they stopped and the likely cause.
Scans keep them as NaN cells and say nothing (their status is in the stored result).
"""

from __future__ import annotations

import warnings

import numpy as np

from phaselab.engine import status as codes

TROUBLE = (codes.NOT_FINITE, codes.NOT_CONVERGED)
"""Codes of orbits stopped by numerical trouble (not by a box the caller set)."""

SHOWN = 8
"""Orbits named in the warning before it says ``...``."""


def warn_stopped(status, stop_times=None, *, dt, system, started=None, kept: str, stacklevel: int = 3) -> None:
    """Warn naming the orbits that ``TROUBLE`` stopped.

    Parameters
    ----------
    status : ndarray of int, shape (n_orbits,)
    stop_times : ndarray, shape (n_orbits,), optional
        The time (model units, or iterates of a map) each orbit reached, named beside it.
    dt : float or None
        The step used (named among the causes for a flow).
    system : Hamiltonian or SymplecticMap
    started : ndarray of bool, shape (n_orbits,), optional
        Orbits whose start was finite; the others never ran and are not named.
    kept : str
        What the result keeps of a named orbit ("their points up to there are kept").
    stacklevel : int
        As for :func:`warnings.warn`, counted from the caller of this function.
    """
    status = np.asarray(status)
    hit = np.isin(status, TROUBLE)
    if started is not None:
        hit &= np.asarray(started, dtype=bool)
    hit = np.flatnonzero(hit)
    if not hit.size:
        return
    at = (lambda i: f"{i} at t = {stop_times[i]:.6g}") if stop_times is not None else str
    which = ", ".join(at(i) for i in hit[:SHOWN]) + (" ..." if hit.size > SHOWN else "")
    step = f"the step dt = {dt:g}" if dt is not None and np.isfinite(dt) else "the step"
    causes = []
    if (status[hit] == codes.NOT_FINITE).any():
        causes.append("their iterates run away to infinity" if getattr(system, "kind", None) == "map" else
                      f"a non-finite state: they run away to infinity or reach a singularity of H, or {step} "
                      "is too large for them")
    if (status[hit] == codes.NOT_CONVERGED).any():
        causes.append(f"an implicit step did not converge: unless they were running away, use a smaller {step[4:]} "
                      "or a larger maxit")
    warnings.warn(f"{hit.size} orbit(s) stopped early (orbit {which}): {'; '.join(causes)}; {kept}",
                  RuntimeWarning, stacklevel=stacklevel + 1)
