"""The normal form's invariant curves on the explorer's surface of section, at its energy.

For an autonomous flow of two degrees of freedom with an elliptic equilibrium, the normal
form (:func:`phaselab.normal_form`) of a chosen order is computed once per parameter values
and order at the elliptic equilibrium of lowest energy. The curves it predicts on the section
``H = E`` are the level lines of an action the normal form conserves, read through the
normalising transformation (:meth:`~phaselab.NormalForm.to_normal`) at the points of the
section's window put on the shell ``H = E`` (the solved component, as the explorer's clicks):

* Birkhoff's form (no resonance among the linear frequencies up to the order): ``J_1``;
  on the shell ``H = E`` its level line at ``J_1 = c`` is the trace of the torus
  ``(c, J_2(E, c))`` (the curve :meth:`~phaselab.NormalForm.invariant_curve` draws);
* a resonance ``k . omega = 0`` met up to the order (``|k_1| + |k_2| <= order``, e.g. 1:1 of
  Henon-Heiles), which Birkhoff's form cannot remove: the resonant form keeps the angle
  ``k . phi``, so single actions are no longer conserved, but ``m . J`` with ``m . k = 0`` is;
  its level lines are the resonant form's tori, islands included.

Grid points where the normal form's own energy misses ``E`` by more than
:data:`ENERGY_MISMATCH` of ``E - E0`` are left out (the series is not to be trusted there),
so curves stop where the form stops holding. The curves are predictions accurate to the
order of the transformation, drawn over computed orbits for comparison.
"""

from __future__ import annotations

import itertools
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
        Polylines in the view's two axes.
    levels : ndarray, shape (count,)
        Values of the conserved action ``m . J`` along each level (units of H times time).
    action : tuple of int
        ``m``, the action combination drawn.
    order : int
    resonance : tuple of int or None
        The resonance kept in the normal form, if any.
    equilibrium : ndarray, shape (4,)
    mismatch : float
        Median of |energy of the normal form - E| / (E - E0) over the points used.
    """

    lines: list
    levels: np.ndarray
    action: tuple
    order: int
    resonance: tuple | None
    equilibrium: np.ndarray
    mismatch: float

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
            for k2 in {total - k1, k1 - total}:
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
        (x0, x1), (y0, y1) = view.ranges
        x, y = np.linspace(x0, x1, GRID), np.linspace(y0, y1, GRID)
        X, Y = np.meshgrid(x, y)
        seeding = view.seeds(np.column_stack([X.ravel(), Y.ravel()]), energy, params)
        ok = np.asarray(seeding.valid, bool)
        if not ok.any():
            raise ModelError(f"the window holds no point of the energy shell at E = {energy:.6g}")
        J, phi = nf.to_normal(seeding.states[ok])
        form_energy = nf.energy(np.clip(J, 0.0, None), phi if k is not None else None)
        miss = np.abs(form_energy - energy) / (energy - E0)
        trusted = np.isfinite(miss) & (miss <= ENERGY_MISMATCH)
        if trusted.sum() < 16:
            raise ModelError(f"E = {energy:.6g} is outside the range where the order-{order} normal form holds "
                             f"(its energy misses E by {np.nanmedian(miss):.0%} or more on this section); "
                             "lower the energy or raise the order")
        m = conserved_action(k)
        values = np.full(X.size, np.nan)
        idx = np.nonzero(ok)[0][trusted]
        values[idx] = J[trusted] @ np.array(m, float)
        lo, hi = float(np.min(values[idx])), float(np.max(values[idx]))
        levels = lo + (hi - lo) * (np.arange(count) + 0.5) / count
        lines = list(itertools.chain.from_iterable(_contour(x, y, values.reshape(X.shape), v) for v in levels))
        return OverlayCurves(lines=lines, levels=levels, action=m, order=nf.order, resonance=k,
                             equilibrium=nf.equilibrium.copy(), mismatch=float(np.median(miss[trusted])))


def _contour(x, y, values, level) -> list:
    import contourpy

    gen = contourpy.contour_generator(x, y, np.ma.masked_invalid(values), line_type=contourpy.LineType.Separate)
    return [np.asarray(piece, dtype=float) for piece in gen.lines(level) if len(piece) > 2]
