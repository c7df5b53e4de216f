"""The limits on the work one call may ask for, and the budgets checked against them.

:data:`LIMITS` (raised for a session by :func:`set_limits`, ``phaselab.set_limits``) bounds
the memory of a call's output and the number of integrator steps it may take. Every count,
length and time that sets the work of a public call is checked here before anything is
allocated or run, and a refusal names the limit and how to raise it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace


from phaselab.engine.inputs import positive_number
from phaselab.errors import ParameterError

# ----------------------------------------------------------------------------- limits
@dataclass(frozen=True)
class Limits:
    """Bounds on what one call may ask for.

    Attributes
    ----------
    memory_bytes : float
        Largest output (saved states, section points, records) one call may allocate.
    orbit_steps : float
        Largest number of integrator steps (or map iterates) summed over the orbits of one
        call: at ~10^8 steps per second and core, 10^11 is about ten minutes on a laptop.
    """

    memory_bytes: float = 2 * 2**30
    orbit_steps: float = 1e11


LIMITS = Limits()
"""The limits in force (see :func:`set_limits`)."""


def set_limits(*, memory_bytes: float | None = None, orbit_steps: float | None = None) -> Limits:
    """Raise (or lower) the limits on one call's memory and work for this session.

    Parameters
    ----------
    memory_bytes : float, optional
        Largest output one call may allocate, in bytes (default 2 GiB).
    orbit_steps : float, optional
        Largest number of integrator steps or map iterates, summed over orbits (default 1e11).

    Returns
    -------
    Limits
        The limits that were in force before, so a caller can restore them.
    """
    global LIMITS
    before = LIMITS
    changes = {}
    if memory_bytes is not None:
        changes["memory_bytes"] = positive_number(memory_bytes, "memory_bytes")
    if orbit_steps is not None:
        changes["orbit_steps"] = positive_number(orbit_steps, "orbit_steps")
    LIMITS = replace(LIMITS, **changes)
    return before


def check_budget(n_orbits: int, steps_per_orbit: float, output_values: float, what: str,
                 advice: str | None = None) -> None:
    """Refuse a request over :data:`LIMITS` before any memory is allocated or work begun.

    Parameters
    ----------
    n_orbits : int
    steps_per_orbit : float
        Integrator steps or iterates per orbit (may be huge or infinite: it is checked first).
    output_values : float
        Number of float64 values the outputs will hold.
    what : str
        The call, for the message (``"section"``).
    advice : str, optional
        What to ask for instead (default: shorter time, larger step, fewer orbits or samples).
    """
    steps = float(n_orbits) * float(steps_per_orbit)
    if not math.isfinite(steps) or steps > LIMITS.orbit_steps:
        raise ParameterError(
            f"{what} would take {_amount(steps)} integrator steps ({n_orbits} orbits x "
            f"{_amount(steps_per_orbit)} steps), more than the limit of {LIMITS.orbit_steps:.3g}; "
            f"{advice or 'ask for less (shorter time, larger step, fewer orbits)'} or raise the limit with "
            "phaselab.set_limits(orbit_steps=...)")
    size = 8.0 * float(output_values)
    if not math.isfinite(size) or size > LIMITS.memory_bytes:
        raise ParameterError(
            f"{what} would need {size / 2**30:.3g} GiB for its results, more than the limit of "
            f"{LIMITS.memory_bytes / 2**30:.3g} GiB; {advice or 'ask for fewer samples or orbits'} or raise "
            "the limit with phaselab.set_limits(memory_bytes=...)")


def _amount(x: float) -> str:
    return "infinitely many" if not math.isfinite(x) else f"{x:.3g}"


# ----------------------------------------------------------------------------- sizes of work
def shooting_budget(system, plane, n_starts: int, period: int, maxit: int, what: str) -> None:
    """Refuse a multiple-shooting search whose Newton matrices or work exceed :data:`LIMITS`.

    Each start holds a dense ``(period * dim)^2`` Jacobian (counted twice, for the copy the
    solver makes). The work counted against ``orbit_steps`` is, per start, one return per
    point and Newton step plus the dense factorisation, ``(period * dim)^3`` operations per
    Newton step taken as ``1/100`` of an integrator step each (a step of a small system costs
    about a hundred operations). Returns of a flow are capped separately (``t_max``).

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
    plane : mapping or None
        The section plane of a flow (two components fewer per point).
    n_starts, period, maxit : int
        Starting points, returns per period, most Newton steps.
    what : str
        The call, for the message.
    """
    dim = len(system.state_symbols) - 2 * (plane is not None and system.kind == "flow")
    unknowns = float(period) * float(dim)
    check_budget(n_starts, (maxit + 1) * (float(period) + unknowns ** 3 / 100.0),
                 2.0 * n_starts * unknowns * unknowns, what,
                 "ask for a shorter period, fewer starts or fewer Newton steps (maxit)")


def curve_budget(length: float, max_segment: float, scale: float, max_points: int, n_curves: int,
                 what: str) -> None:
    """Refuse a grown curve that cannot be resolved or whose points exceed :data:`LIMITS`.

    A segment longer than the size of the section (``scale``) resolves nothing, so the
    curve could not follow its folds and its length would be meaningless; each point costs
    one return and two values, at most ``max_points`` per curve.
    """
    if max_segment > scale:
        raise ParameterError(
            f"{what}: segments up to {max_segment:.3g} (max_segment; default length / 2000) are longer "
            f"than the section's size {scale:.3g}, so the curve would not be resolved; ask for a "
            f"length up to {2000 * scale:.3g} or give max_segment <= {scale:.3g}")
    check_budget(n_curves, max_points, 2.0 * n_curves * max_points, what,
                 "ask for fewer points (max_points)")


def scan_budget(n_orbits: int, t: float, dt, is_map: bool, what: str) -> None:
    """Refuse a scan whose steps summed over all its seeds exceed :data:`LIMITS` (each chunk
    is checked again when it runs; this check sees the whole scan before the first chunk).

    Parameters
    ----------
    n_orbits : int
        Seeds that will run.
    t : float
        Time of a flow, or iterates of a map.
    dt : float or None
        Step of a flow; ``None`` when it is chosen later (then each chunk is checked).
    """
    if is_map:
        check_budget(n_orbits, t, 0, what)
    elif dt is not None:
        check_budget(n_orbits, abs(t) / dt, 0, what)




def grid_budget(n_points: float, width: int, what: str) -> None:
    """Refuse a grid whose states (``n_points x width`` float64) exceed :data:`LIMITS`."""
    check_budget(1, 0, float(n_points) * width, what, "ask for fewer grid points")


