"""The island of a resonant normal form measured on a surface of section.

The prediction is the pendulum model of :mod:`phaselab.structures.normal_forms.islands`: on
the torus ``J*`` where the resonance ``k`` is met (``k . dH0/dJ = 0``), the island's full
width is ``4 sqrt(|A / G|)`` in the action ``I`` along ``k`` (``J = J* + I k``), its centres
at the resonant angle ``psi = k . phi = psi_c`` and its separatrix
``I = +-2 sqrt(|A / G|) |cos((psi - psi_c) / 2)|``.

The measurement: orbits are launched on the line ``J = J* + I k`` through an island centre
(``k . phi = psi_c``, through :meth:`~phaselab.structures.normal_forms.result.NormalForm.from_normal`),
``I`` spread over one and a half times the predicted half width on either side; each orbit's
section points (:func:`phaselab.section`) are read back in normal coordinates
(:meth:`~phaselab.structures.normal_forms.result.NormalForm.to_normal`). An orbit whose
resonant angle, followed from crossing to crossing, stays within one turn librates: it is
inside the island. On each side of the centre the island's edge is put midway between the
last librating orbit and the first circulating one, so the measured full width is known to
about the spacing of the launched ``I`` (``resolution``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from phaselab.engine import inputs
from phaselab.engine import status as codes
from phaselab.errors import ModelError, ParameterError
from phaselab.orbits.section import section
from phaselab.structures.normal_forms.arguments import check_resonances
from phaselab.structures.normal_forms.islands import primitive

#: orbits launched across the island by default
ISLAND_ORBITS = 15
#: the launched I span this many predicted half widths on either side of the centre
SPAN = 1.5
#: small-oscillation periods of the island followed by default (near the separatrix an orbit
#: needs longer; the measured edge is then a little inside the true one)
LIBRATION_PERIODS = 4.0
#: Newton steps along k onto the resonance
NEWTON_STEPS = 40


@dataclass
class IslandCheck:
    """The predicted island of one resonance beside the island measured on a section.

    Attributes
    ----------
    resonance : tuple of int
        ``k``.
    center_actions : ndarray, shape (n,)
        ``J*``: the torus on the resonance reached from the actions asked for along ``k``.
    center_angle : float
        ``psi_c``, the resonant angle of the island centres (rad).
    predicted_width, measured_width : float
        Full width in ``I`` (units of action), predicted by the pendulum model and measured
        (NaN when the centre orbit circulates or the island reaches past the launched span).
    edges : (float, float)
        The measured edges of the island in ``I`` (below and above the centre).
    resolution : float
        Spacing of the launched ``I``: the measured width is known to about this.
    launched : ndarray, shape (m,)
        ``I`` of each launched orbit.
    librating : ndarray of bool, shape (m,)
    psi, action : ndarray, shape (m, crossings)
        Resonant angle (rad, wrapped to (-pi, pi]) and ``I`` at each section point (NaN past
        an orbit's last crossing).
    status : ndarray of int, shape (m,)
        The section's status of each orbit (:mod:`phaselab.engine.status`).
    plane : dict
        The section's plane (as in :class:`~phaselab.orbits.section_result.Section`).
    crossings : int
    """

    resonance: tuple
    center_actions: np.ndarray
    center_angle: float
    predicted_width: float
    measured_width: float
    edges: tuple
    resolution: float
    launched: np.ndarray
    librating: np.ndarray
    psi: np.ndarray
    action: np.ndarray
    status: np.ndarray
    plane: dict
    crossings: int

    def separatrix(self, psi) -> np.ndarray:
        """The predicted separatrix's upper branch ``I(psi) >= 0`` (the lower is its negative)."""
        psi = np.asarray(psi, dtype=float)
        return 0.5 * self.predicted_width * np.abs(np.cos((psi - self.center_angle) / 2))


def resonant_torus(nf, J, k) -> np.ndarray:
    """``J*``: the actions on the resonance ``k . dH0/dJ = 0`` reached from ``J`` along ``k``
    (Newton's method in ``I``; ``H0`` the terms of the actions alone).

    Raises
    ------
    ModelError
        When the resonance is not met along that line within ``J >= 0``.
    """
    J = np.array(J, dtype=float)
    kv = np.array(k, dtype=float)
    for _ in range(NEWTON_STEPS):
        model = nf.resonance_width(J, k)
        step = -model.detuning / model.curvature
        if not np.all(J + step * kv >= 0):
            raise ModelError(f"the resonance {tuple(k)} is not met from J = {np.round(J, 8).tolist()} along k "
                             "with every action >= 0; give actions closer to the resonance")
        J = J + step * kv
        if abs(step) <= 1e-14 * (1 + np.abs(J).max()):
            return J
    raise ModelError(f"the resonance {tuple(k)} could not be located from the actions given "
                     f"(detuning {model.detuning:.3g} after {NEWTON_STEPS} steps)")


def measure_island(system, nf, J, *, resonance=None, orbits=ISLAND_ORBITS, crossings=None, plane=None,
                   direction=+1, dt=None, method="auto") -> IslandCheck:
    """Predict and measure the island of ``resonance`` near actions ``J`` (module docstring).

    Parameters
    ----------
    system : Hamiltonian
        The system the normal form ``nf`` was computed for (integrated at ``nf.params``).
    nf : NormalForm
        A resonant normal form.
    J : array_like, shape (n,)
        Actions near the resonance; the island is measured on the torus reached from them
        along ``k``.
    resonance : sequence of int, optional
        Which kept resonance (default: the only one).
    orbits : int
        Orbits launched across the island (at least 5).
    crossings : int, optional
        Section points per orbit; default enough for :data:`LIBRATION_PERIODS` small
        oscillations of the island.
    plane : mapping, optional
        The section's plane; default the coordinate of the last mode in ``k`` at its
        equilibrium value.
    direction : {+1, -1}
    dt, method
        As in :func:`phaselab.section`.
    """
    if not nf.resonances:
        raise ModelError("a Birkhoff normal form predicts no island; compute one with resonances=[k]")
    if resonance is not None:
        if isinstance(resonance, (str, bytes)) or not hasattr(resonance, "__len__"):
            raise ParameterError(f"resonance must be {nf.dof} whole numbers, got {resonance!r}")
        resonance = check_resonances([resonance], nf.dof)[0]
    k = primitive(resonance if resonance is not None else nf.resonances[0])
    orbits = inputs.count(orbits, "island_orbits", minimum=5, maximum=400)
    try:
        J = np.asarray(J, dtype=float) if not isinstance(J, (str, bytes)) else None
    except (TypeError, ValueError, OverflowError):
        J = None
    if J is None or J.shape != (nf.dof,) or not np.all(np.isfinite(J)) or np.any(J < 0):
        raise ParameterError(f"island must be {nf.dof} finite actions >= 0 (one per mode), got {np.shape(J)}")
    centre = resonant_torus(nf, J, k)
    model = nf.resonance_width(centre, k)
    kv = np.array(k, dtype=float)
    half = model.width / 2
    launched = np.linspace(-SPAN * half, SPAN * half, orbits)
    actions = centre + launched[:, None] * kv
    keep = np.all(actions >= 0, axis=1)
    launched, actions = launched[keep], actions[keep]
    angles = np.tile(model.center_angle * kv / (kv @ kv), (len(launched), 1))
    states = nf.from_normal(actions, angles)
    plane = _default_plane(nf, k) if plane is None else plane
    if crossings is None:
        crossings = _crossings(nf, model, plane)
    crossings = inputs.count(crossings, "island_crossings", minimum=10, maximum=100_000)
    sec = section(system, states, plane=plane, direction=direction, crossings=crossings, params=nf.params,
                  dt=dt, method=method)
    psi, action = _normal_points(nf, sec, centre, kv)
    librating = _librates(psi, sec)
    edges = (_edge(launched, librating, -1), _edge(launched, librating, +1))
    resolution = float(launched[1] - launched[0]) if len(launched) > 1 else math.nan
    return IslandCheck(k, centre, model.center_angle, float(model.width), edges[1] - edges[0], edges, resolution, launched,
                       librating, np.angle(np.exp(1j * psi)), action, np.asarray(sec.status), dict(sec.plane),
                       int(crossings))


def _default_plane(nf, k) -> dict:
    j = max(i for i, x in enumerate(k) if x)
    return {nf.names[j]: float(nf.equilibrium[j])}


def _crossings(nf, model, plane) -> int:
    """Crossings that cover LIBRATION_PERIODS small oscillations of the island: the
    pendulum's small-oscillation frequency is sqrt(|A G|); one crossing per turn of the
    mode of the plane (its linear frequency)."""
    name = next(iter(plane)) if isinstance(plane, dict) and plane else nf.names[-1]
    j = nf.names.index(name) % nf.dof if name in nf.names else nf.dof - 1
    slow = math.sqrt(abs(model.amplitude * model.curvature))
    if slow == 0:
        raise ModelError("the resonant term vanishes on this torus: no island to measure")
    turns = LIBRATION_PERIODS * abs(nf.omega[j]) / slow
    return int(min(max(math.ceil(turns), 50), 20_000))


def _normal_points(nf, sec, centre, kv):
    """psi (unwrapped along each orbit) and I of every section point, NaN-padded."""
    pts = np.asarray(sec.points)
    m, c, _ = pts.shape
    psi = np.full((m, c), np.nan)
    action = np.full((m, c), np.nan)
    for i in range(m):
        count = int(sec.counts[i])
        if count == 0:
            continue
        J, phi = nf.to_normal(pts[i, :count])
        psi[i, :count] = np.unwrap(phi @ kv)
        action[i, :count] = (J - centre) @ kv / (kv @ kv)
    return psi, action


def _edge(launched, librating, side: int) -> float:
    """The island's edge on one side of the centre: midway between the last librating orbit
    (counted outwards from the centre) and the first circulating one; NaN when the centre
    orbit does not librate or every orbit on that side does."""
    centre = int(np.argmin(np.abs(launched)))
    if not librating[centre]:
        return math.nan
    i = centre
    while 0 <= i + side < len(launched) and librating[i + side]:
        i += side
    if not 0 <= i + side < len(launched):
        return math.nan
    return 0.5 * float(launched[i] + launched[i + side])


def _librates(psi, sec) -> np.ndarray:
    """An orbit librates when its resonant angle, followed from point to point, stays within
    one turn over at least ten crossings and the orbit ran in full."""
    counts = np.asarray(sec.counts)
    ok = (np.asarray(sec.status) == codes.OK) & (counts >= 10)
    spread = np.array([np.ptp(row[np.isfinite(row)]) if np.isfinite(row).any() else np.inf for row in psi])
    return ok & (spread < 2 * np.pi)
