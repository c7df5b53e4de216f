"""Status codes of the compiled loops with their words, stepper kinds, and solver defaults.

This is the one place where these numbers are defined. The compiled loops do not define
them: :mod:`phaselab.engine.compiled` writes them into the header of every assembled loop
module from the tables below, and the Python side reads results with :func:`status_words`.

A status code says why one orbit stopped (or what is wrong with it). Results carry one code
per orbit in ``.status``; ``OK`` means the orbit ran as asked.
"""

from __future__ import annotations

import numpy as np

# ------------------------------------------------------------------------ status codes
OK = 0
LEFT_BOX = 1
NOT_FINITE = 2
NOT_CONVERGED = 3
TIME_LIMIT = 4
ENERGY_DRIFT = 5
STEP_TOO_LARGE = 6
NO_CROSSING = 7
SINGULAR = 8
STILL = 10
"""Frequency analysis: a degree of freedom does not move (its frequency is NaN)."""
OFF_SHELL = 100
"""Return maps: coordinates with no state on the energy shell (no real solution of H = E)."""
NOT_RUN = -1
"""Scans: a seed that was not run (an invalid grid point, e.g. outside the energy shell)."""

STATUS = {
    OK: "ok",
    LEFT_BOX: "left the box",
    NOT_FINITE: "non-finite state",
    NOT_CONVERGED: "implicit step did not converge",
    TIME_LIMIT: "reached t_max before the requested crossings",
    ENERGY_DRIFT: "relative energy error above the limit",
    STEP_TOO_LARGE: "step too large for this orbit (energy error in the first steps)",
    NO_CROSSING: "never crossed the plane",
    SINGULAR: "reached a singularity (the Hamiltonian, the map or a derivative is not finite there)",
    STILL: "a degree of freedom does not move (its frequency is NaN)",
    OFF_SHELL: "left the energy shell (no real solution of H = E for the solved component)",
    NOT_RUN: "not run (invalid seed)",
}
"""The word for every status code."""

STOPPED = (LEFT_BOX, NOT_FINITE, NOT_CONVERGED, STEP_TOO_LARGE, SINGULAR)
"""Codes of orbits cut short (their later samples are NaN): they count as ``escaped``."""

# ------------------------------------------------------------------------ stepper kinds
COMPOSITION = 0
"""Explicit symplectic splitting H = T(p) + V(q): leapfrog and its compositions."""
GAUSS = 1
"""Gauss-Legendre collocation (implicit midpoint for one stage), solved by fixed point."""
RK4 = 2
"""Classical Runge-Kutta (not symplectic; a reference, and the scheme of Henon's step)."""

KINDS = {COMPOSITION: "composition", GAUSS: "gauss", RK4: "rk4"}

# ------------------------------------------------------------------------ solver defaults
IMPLICIT_TOL = 1e-14
"""Relative tolerance of the fixed-point solve of an implicit (Gauss-Legendre) step."""
IMPLICIT_MAXIT = 100
"""Most fixed-point iterations of one implicit step."""
SECTION_REFINE_TOL = 1e-12
"""Relative agreement of successive Henon sub-step results when refining a crossing."""
SECTION_REFINE_MAX = 256
"""Most RK4 sub-steps of the Henon integration of one crossing."""
SECTION_CHECK_EVERY = 8
"""Steps between escape checks of the section loop (and at every crossing)."""
SECTION_LANES = 4
"""Orbits stepped side by side on one thread by the section loop."""
PERIODIC_REFINE_SUBSTEPS = 64
"""Fixed RK4 sub-steps of Henon's step with the tangent carried along (a smooth map of the
start, as Newton's method needs; its error is far below the refined crossings' 1e-12)."""
ENERGY_LIMIT = 1e-3
"""Default bound on an orbit's relative energy error ``|H - H0| / max(|H0|, 1)``; an orbit
above it keeps its numbers but gets ``ENERGY_DRIFT`` instead of ``OK``."""

LOOP_CONSTANTS = {
    "OK": OK, "LEFT_BOX": LEFT_BOX, "NOT_FINITE": NOT_FINITE, "NOT_CONVERGED": NOT_CONVERGED,
    "TIME_LIMIT": TIME_LIMIT, "NO_CROSSING": NO_CROSSING, "SINGULAR": SINGULAR,
    "COMPOSITION": COMPOSITION, "GAUSS": GAUSS, "RK4": RK4,
    "SECTION_REFINE_TOL": SECTION_REFINE_TOL, "SECTION_REFINE_MAX": SECTION_REFINE_MAX,
    "SECTION_CHECK_EVERY": SECTION_CHECK_EVERY, "SECTION_LANES": SECTION_LANES,
    "PERIODIC_REFINE_SUBSTEPS": PERIODIC_REFINE_SUBSTEPS,
}
"""The constants handed to every assembled loop module (name -> int or float)."""


def status_words(codes) -> list[str]:
    """The word of each status code.

    Parameters
    ----------
    codes : array_like of int, shape (n_orbits,)

    Returns
    -------
    list of str, length n_orbits
    """
    return [STATUS.get(int(c), f"status {int(c)}") for c in np.atleast_1d(codes)]


def stopped(codes) -> np.ndarray:
    """True for orbits cut short (codes in :data:`STOPPED`), shape (n_orbits,)."""
    return np.isin(np.asarray(codes), STOPPED)


class StatusReport:
    """What every result with a ``status`` array (one code per orbit) offers: the words,
    and which orbits were cut short. Mixed into the result dataclasses."""

    status: np.ndarray

    @property
    def escaped(self) -> np.ndarray:
        """Orbits cut short (left the box, non-finite, failed or refused step), shape (n_orbits,)."""
        return stopped(self.status)

    @property
    def status_text(self) -> list[str]:
        """The word of each orbit's status."""
        return status_words(self.status)
