"""The normal form's invariant curves on the explorer's surface of section, at its energy.

For an autonomous flow of two degrees of freedom with an elliptic equilibrium, the normal
form (:func:`phaselab.normal_form`) of a chosen order is computed once per parameter values
and order, at the elliptic equilibrium of lowest energy. Its curves on the section at ``E``:

* Birkhoff's form (no resonance ``k . omega = 0`` among the linear frequencies with
  ``|k_1| + |k_2| <= order``): the tori ``J`` on the normal form's energy shell
  ``nf.energy(J) = E``, one per split of the linear energy between the modes (shares
  ``(i + 1/2) / count`` of mode 1, solved by scipy's brentq), each drawn as its trace
  :meth:`~phaselab.NormalForm.invariant_curve` on the plane (which must fix a coordinate);
* a resonance met up to the order (e.g. 1:1 of Henon-Heiles), which Birkhoff's form cannot
  remove: the resonant form keeps the angle ``k . phi``, so the single actions are no longer
  conserved and a torus is not a fixed ``J``; ``m . J`` with ``m . k = 0`` is conserved, and
  its level lines over the window's points put on the shell ``H = E`` (read through
  :meth:`~phaselab.NormalForm.to_normal`) are the resonant form's tori, islands included.

Where the normal form stops holding (a torus whose points miss the model's ``H = E``, or
grid points where the form's own energy misses ``E``, by more than :data:`ENERGY_MISMATCH`
of ``E - E0``) nothing is drawn; with no torus left, or with the form's energy missing ``E``
by more than that at the median point of the window, the energy is refused as outside the
range where the curves exist. The curves are predictions, accurate to the order of the
transformation, to draw over computed orbits.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from phaselab.errors import ModelError, ParameterError
from phaselab.structures.equilibria import equilibria
from phaselab.structures.normal_forms import normal_form

#: orders offered by the control (degree in the distance from the equilibrium)
ORDERS = (4, 6, 8)
DEFAULT_ORDER = 6
DEFAULT_COUNT = 5
MAX_COUNT = 12
#: points along each torus's trace
POINTS = 240
#: points per side of the grid on which the conserved action is read
GRID = 161
#: largest |energy of the normal form - E| / (E - E0) at a grid point still used
ENERGY_MISMATCH = 0.05
#: relative size of k . omega below which the frequencies count as resonant
RESONANT = 1e-9
#: normal forms and equilibria kept (parameter values x orders)
KEEP = 24


@dataclass
class OverlayCurves:
    """Curves of one normal form on one section at one energy.

    Attributes
    ----------
    lines : list of ndarray, shape (m, 2)
        Polylines in the view's two axes (NaN rows where a torus misses the plane).
    states : list of ndarray, shape (m, 4)
        The same points as full states.
    levels : ndarray, shape (count,)
        Values of the conserved action ``m . J`` along each level (units of H times time).
    level_of : list of int
        The index in ``levels`` of each line (a level line may come in pieces).
    action : tuple of int
        ``m``, the action combination drawn.
    order : int
    resonance : tuple of int or None
        The resonance kept in the normal form, if any.
    equilibrium : ndarray, shape (4,)
    mismatch : float
        How far from ``E`` the curves are, relative to ``E - E0``: for tori the largest
        |H - E| of the model's H at their points; for level lines the median |energy of the
        normal form - E| at the grid points used.
    measured : str
        Which of the two ``mismatch`` is.
    """

    lines: list
    states: list
    levels: np.ndarray
    level_of: list
    action: tuple
    order: int
    resonance: tuple | None
    equilibrium: np.ndarray
    mismatch: float
    measured: str

    @property
    def label(self) -> str:
        """The words of the key: what the dashed lines are."""
        kind = "" if self.resonance is None else f" ({self.resonance[0]}:{-self.resonance[1]} resonant)"
        return f"normal form, order {self.order}{kind}"


def check_order(order) -> int:
    if order not in ORDERS:
        raise ParameterError(f"the normal-form order must be one of {', '.join(map(str, ORDERS))}, got {order!r}")
    return int(order)


def check_count(count) -> int:
    if isinstance(count, bool) or not isinstance(count, (int, np.integer)) or not 1 <= count <= MAX_COUNT:
        raise ParameterError(f"the count of normal-form curves must be a whole number from 1 to {MAX_COUNT}, "
                             f"got {count!r}")
    return int(count)


def find_resonance(omega, order: int):
    """The resonance ``k`` (``k_1 > 0``, ``|k_1| + |k_2| <= order``, smallest first) with
    ``k . omega = 0`` to :data:`RESONANT`, or None."""
    scale = float(np.max(np.abs(omega)))
    for total in range(1, order + 1):
        for k1 in range(1, total + 1):
            for k2 in sorted({total - k1, k1 - total}):
                if abs(k1 * omega[0] + k2 * omega[1]) <= RESONANT * scale:
                    return (k1, k2)
    return None


def conserved_action(resonance) -> tuple:
    """``m`` with ``m . k = 0`` (``(1, 0)`` without a resonance)."""
    if resonance is None:
        return (1, 0)
    k1, k2 = resonance
    return (-k2, k1) if k2 <= 0 else (k2, -k1)


class NormalFormOverlay:
    """Normal forms of one system, cached per (parameter values, order), and their curves.

    Parameters
    ----------
    system : Hamiltonian
        Autonomous, two degrees of freedom.
    """

    def __init__(self, system):
        self.system = system
        self._forms: dict = {}
        self._points: dict = {}

    def equilibrium(self, params):
        """The elliptic equilibrium of lowest energy at ``params`` (ModelError if none)."""
        key = tuple(sorted(params.items()))
        if key not in self._points:
            found = [e for e in equilibria(self.system, params=params) if e.stability == "elliptic"]
            if not found:
                raise ModelError("the system has no elliptic equilibrium here (at these parameters, in the "
                                 "search box), so there is no normal form to draw")
            if len(self._points) >= KEEP:
                self._points.clear()
            self._points[key] = min(found, key=lambda e: e.energy)
        return self._points[key]

    def normal_form(self, params, order):
        """The normal form of ``order`` at :meth:`equilibrium` (resonant when the linear
        frequencies are in resonance up to the order), computed once."""
        order = check_order(order)
        key = (tuple(sorted(params.items())), order)
        if key not in self._forms:
            at = self.equilibrium(params)
            linear = normal_form(self.system, at, 2, params=params)
            k = find_resonance(linear.omega, order)
            nf = normal_form(self.system, at, order, params=params, resonances=None if k is None else [k])
            if len(self._forms) >= KEEP:
                self._forms.clear()
            self._forms[key] = (nf, k)
        return self._forms[key]

    def curves(self, view, energy, params, order, count) -> OverlayCurves:
        """The normal form's curves on ``view`` (a SectionView) at ``energy``.

        Raises
        ------
        ModelError
            The view is not a section of a flow of two degrees of freedom, the system has no
            elliptic equilibrium, the normal form refuses, or ``energy`` lies outside the
            range where the normal form holds on this window.
        """
        count = check_count(count)
        if getattr(view, "kind", None) != "section" or self.system.dof != 2:
            raise ModelError("normal-form curves are drawn on sections of flows of two degrees of freedom")
        nf, k = self.normal_form(params, order)
        E0 = float(nf.energy0)
        if np.any(nf.omega <= 0):
            raise ModelError("the elliptic equilibrium is not a minimum of the energy (a mode of negative "
                             "energy): its energy shells are not closed around it")
        if not energy > E0:
            raise ModelError(f"E = {energy:.6g} is not above the elliptic equilibrium's energy {E0:.6g}: "
                             "no invariant curves at this energy")
        if view.ranges is None:
            view.fit_ranges(energy, params)
        if k is None:
            return _torus_curves(self.system, nf, view, energy, params, count)
        return _level_curves(nf, k, view, energy, params, count)


def shell_actions(nf, energy: float, share: float):
    """Actions ``J = r (share / omega_1, (1 - share) / omega_2)`` with ``nf.energy(J) = energy``
    (``share`` of the linear energy in mode 1), by scipy's brentq on ``r``; None when the
    normal form's energy does not reach ``energy`` along this direction."""
    from scipy.optimize import brentq

    d = np.array([share, 1.0 - share]) / nf.omega
    E0 = float(nf.energy0)

    def f(r):
        return float(nf.energy(r * d)) - energy

    hi = energy - E0
    for _ in range(12):
        if f(hi) > 0:
            return brentq(f, 0.0, hi, xtol=1e-15 * hi, rtol=1e-13) * d
        hi *= 1.5
    return None


def _torus_curves(system, nf, view, energy, params, count) -> OverlayCurves:
    """Birkhoff's form: the traces of the tori ``J`` on the energy shell (splits of the
    energy between the modes), from :meth:`~phaselab.NormalForm.invariant_curve`; a torus
    whose points miss ``H = E`` (the model's H) by more than :data:`ENERGY_MISMATCH` of
    ``E - E0`` is left out."""
    (name, value), = view.plane.items()
    if name not in nf.names[:nf.dof]:
        raise ModelError(f"normal-form curves need a plane fixing a coordinate ({', '.join(nf.names[:nf.dof])}), "
                         f"not {name}")
    cols = [view.names.index(a) for a in view.axis_names]
    E0 = float(nf.energy0)
    lines, states, levels, misses = [], [], [], []
    for share in (np.arange(count) + 0.5) / count:
        J = shell_actions(nf, energy, share)
        if J is None:
            continue
        curve = nf.invariant_curve(J, {name: value}, direction=view.sign, points=POINTS)
        good = curve[np.all(np.isfinite(curve), axis=1)]
        if len(good) < 3:
            continue
        miss = float(np.max(np.abs(system.energy(good, params=params) - energy)) / (energy - E0))
        if not miss <= ENERGY_MISMATCH:
            continue
        lines.append(curve[:, cols])
        states.append(curve)
        levels.append(J[0])
        misses.append(miss)
    if not lines:
        raise ModelError(f"E = {energy:.6g} is outside the range where the order-{nf.order} normal form's tori "
                         "hold (none meets the shell H = E closely); lower the energy or raise the order")
    return OverlayCurves(lines=lines, states=states, levels=np.array(levels), level_of=list(range(len(lines))), action=(1, 0), order=nf.order,
                         resonance=None, equilibrium=nf.equilibrium.copy(), mismatch=float(np.max(misses)),
                         measured="largest |H - E| on the curves (the model's H)")


def _level_curves(nf, k, view, energy, params, count) -> OverlayCurves:
    """A resonant form: level lines of ``m . J`` (``m . k = 0``) over the window's points on
    the shell, where the form's energy matches ``E`` to :data:`ENERGY_MISMATCH`."""
    (x0, x1), (y0, y1) = view.ranges
    x, y = np.linspace(x0, x1, GRID), np.linspace(y0, y1, GRID)
    X, Y = np.meshgrid(x, y)
    seeding = view.seeds(np.column_stack([X.ravel(), Y.ravel()]), energy, params)
    ok = np.asarray(seeding.valid, bool)
    if not ok.any():
        raise ModelError(f"the window holds no point of the energy shell at E = {energy:.6g}")
    J, phi = nf.to_normal(seeding.states[ok])
    E0 = float(nf.energy0)
    miss = np.abs(nf.energy(np.clip(J, 0.0, None), phi) - energy) / (energy - E0)
    trusted = np.isfinite(miss) & (miss <= ENERGY_MISMATCH)
    if trusted.sum() < 16 or not np.nanmedian(miss) <= ENERGY_MISMATCH:
        raise ModelError(f"E = {energy:.6g} is outside the range where the order-{nf.order} normal form holds "
                         f"(its energy misses E by {np.nanmedian(miss):.0%} at the median point of this section); "
                         "lower the energy or raise the order")
    m = conserved_action(k)
    values = np.full(X.size, np.nan)
    idx = np.nonzero(ok)[0][trusted]
    values[idx] = J[trusted] @ np.array(m, float)
    lo, hi = float(np.min(values[idx])), float(np.max(values[idx]))
    levels = lo + (hi - lo) * (np.arange(count) + 0.5) / count
    pieces = [(i, line) for i, v in enumerate(levels) for line in _contour(x, y, values.reshape(X.shape), v)]
    lines = [line for _, line in pieces]
    states = [view.seeds(line, energy, params).states for line in lines]
    return OverlayCurves(lines=lines, states=states, levels=levels, level_of=[i for i, _ in pieces], action=m, order=nf.order, resonance=k,
                         equilibrium=nf.equilibrium.copy(), mismatch=float(np.nanmedian(miss)),
                         measured="median |H - E| of the normal form's energy at the section's points")


def _contour(x, y, values, level) -> list:
    import contourpy

    gen = contourpy.contour_generator(x, y, np.ma.masked_invalid(values), line_type=contourpy.LineType.Separate)
    return [np.asarray(piece, dtype=float) for piece in gen.lines(level) if len(piece) > 2]
