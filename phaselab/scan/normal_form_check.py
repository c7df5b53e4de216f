"""phaselab.normal_form_check: a normal form's prediction beside the measurement.

Orbits are launched at several amplitudes (actions ``J`` of the normal form, through
:meth:`~phaselab.structures.normal_forms.result.NormalForm.from_normal`); their frequencies
are measured by Laskar's frequency analysis (:func:`phaselab.frequencies`) and set beside
the normal form's detuning ``dH/dJ`` at the same actions. For a resonant normal form the
island of the resonance is measured on a surface of section beside its predicted width
(:mod:`phaselab.scan.island_check`). The result has the protocol of every result
(``table``, ``to_xarray``, ``save``, ``plot``).

Model results: where they inform a design decision, confirm them with validated tools.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass

import numpy as np

from phaselab.engine import inputs
from phaselab.engine import status as codes
from phaselab.engine.provenance import cf_dataset, provenance
from phaselab.errors import ParameterError
from phaselab.frequency.frequencies import DEFAULT_SAMPLES, frequencies
from phaselab.scan.island_check import ISLAND_ORBITS, IslandCheck, measure_island
from phaselab.structures.normal_forms.curves import separatrix_curves
from phaselab.structures.normal_forms.result import NormalForm

#: lines found per coordinate, among which each mode's line is chosen
LINES = 3
#: a mode's measured line lies within this fraction of its linear frequency from it
WINDOW = 0.25


@dataclass
class NormalFormCheck:
    """Frequencies predicted by a normal form beside those measured on integrated orbits.

    Attributes
    ----------
    actions : ndarray, shape (m, n)
        The actions the orbits were launched at (normal-form coordinates).
    angles : ndarray, shape (m, n)
        Their angles (rad).
    states : ndarray, shape (m, 2n)
        The launched states.
    predicted : ndarray, shape (m, n)
        ``dH/dJ`` of the normal form at ``actions`` (the angle-free part for a resonant
        form), rad per unit time (per iterate for a map).
    measured : ndarray, shape (m, n)
        ``2 pi nu`` of each mode measured by Laskar's method, same units; NaN where the
        analysis failed (see :attr:`status`), no line was found near the mode, or the mode
        was launched with zero action.
    status : ndarray of int, shape (m,)
        The frequency analysis' status per orbit (:mod:`phaselab.engine.status`).
    order : int
        The normal form's order.
    resonances : tuple
    names : tuple of str
        The state's names.
    unit : str
    island : IslandCheck or None
        The predicted and measured island, when asked for.
    system : object
    params : dict
    method : str
    dt : float
    t : float or None
        Length of each record (flows); None for maps.
    n_samples : int
    normal_form : NormalForm
        The normal form checked.
    """

    actions: np.ndarray
    angles: np.ndarray
    states: np.ndarray
    predicted: np.ndarray
    measured: np.ndarray
    status: np.ndarray
    order: int
    resonances: tuple
    names: tuple
    unit: str
    island: IslandCheck | None
    system: object
    params: dict
    method: str
    dt: float
    t: float | None
    n_samples: int
    normal_form: NormalForm

    @property
    def gap(self) -> np.ndarray:
        """``predicted - measured``, shape (m, n)."""
        return self.predicted - self.measured

    @property
    def status_text(self) -> list[str]:
        return [codes.STATUS.get(int(s), f"status {int(s)}") for s in self.status]

    @property
    def dof(self) -> int:
        return self.actions.shape[1]

    def table(self) -> list[dict]:
        """One row per orbit: actions, predicted and measured frequency of each mode, and the
        gap (mode k's keys end in k, from 1)."""
        rows = []
        for i in range(self.actions.shape[0]):
            row = {"orbit": i}
            for k in range(self.dof):
                row[f"J{k + 1}"] = float(self.actions[i, k])
            for k in range(self.dof):
                row[f"predicted{k + 1}"] = float(self.predicted[i, k])
                row[f"measured{k + 1}"] = float(self.measured[i, k])
                row[f"gap{k + 1}"] = float(self.gap[i, k])
            row["status"] = self.status_text[i]
            rows.append(row)
        return rows

    def metadata(self) -> dict:
        """Provenance: system, parameters, method, step, record, normal form, versions."""
        return provenance(self.system, self.params, kind="normal_form_check", method=self.method, dt=self.dt,
                          t=self.t, n_samples=self.n_samples, order=self.order,
                          resonances=[list(r) for r in self.resonances])

    def to_xarray(self):
        """The numbers as an ``xarray.Dataset``: dims ``orbit`` and ``mode``; with an island,
        also ``island_orbit`` and ``crossing`` and the two widths as scalars."""
        import xarray as xr

        unit = self.unit
        data = {
            "actions": (("orbit", "mode"), self.actions, {"description": "normal-form action J of the launched orbit"}),
            "angles": (("orbit", "mode"), self.angles, {"description": "normal-form angle of the launched orbit",
                                                        "units": "rad"}),
            "predicted": (("orbit", "mode"), self.predicted,
                          {"description": "angular frequency dH/dJ of the normal form", "units": unit}),
            "measured": (("orbit", "mode"), self.measured,
                         {"description": "angular frequency measured by Laskar's frequency analysis", "units": unit}),
            "status": ("orbit", np.asarray(self.status, dtype=int), {"description": "status of the analysis"}),
        }
        if self.island is not None:
            isl = self.island
            data.update({
                "predicted_width": ((), isl.predicted_width, {"description": "island full width in I, predicted"}),
                "measured_width": ((), isl.measured_width, {"description": "island full width in I, measured"}),
                "width_resolution": ((), isl.resolution, {"description": "spacing of the launched I"}),
                "center_actions": ("mode", isl.center_actions, {"description": "actions J* on the resonance"}),
                "launched": ("island_orbit", isl.launched, {"description": "I of each orbit launched across the island"}),
                "librating": ("island_orbit", isl.librating.astype(np.int8),
                              {"description": "1 where the resonant angle librates"}),
                "island_status": ("island_orbit", np.asarray(isl.status, dtype=int),
                                  {"description": "status of the section orbit"}),
                "psi": (("island_orbit", "crossing"), isl.psi,
                        {"description": "resonant angle k.phi at each section point", "units": "rad"}),
                "island_action": (("island_orbit", "crossing"), isl.action,
                                  {"description": "action I along k at each section point"}),
            })
        ds = xr.Dataset({k: xr.Variable(dims, np.asarray(v), attrs) for k, (dims, v, attrs) in data.items()},
                        coords={"mode": np.arange(1, self.dof + 1)})
        meta = self.metadata()
        attrs = {k: (json.dumps(v) if isinstance(v, (dict, list, tuple)) or v is None else v)
                 for k, v in meta.items()}
        if self.island is not None:
            attrs["island_resonance"] = json.dumps(list(self.island.resonance))
            attrs["island_center_angle"] = float(self.island.center_angle)
            attrs["island_plane"] = json.dumps({k: v for k, v in self.island.plane.items()
                                                if isinstance(v, (int, float, str))})
        ds.attrs = attrs
        return cf_dataset(ds, title=f"normal form beside measurement for {meta['system']}".strip())

    def separatrix_curves(self, plane, *, direction=+1, points=160) -> list:
        """The island's predicted separatrix on a surface of section ``plane`` (a mapping
        ``{coordinate name: value}``): polylines of states, shape (points, 4) each, one per
        branch and island (:func:`phaselab.structures.normal_forms.curves.separatrix_curves`)."""
        if self.island is None:
            raise ParameterError("this check measured no island; ask for one with island=J")
        return separatrix_curves(self.normal_form, self.island, plane, direction=direction, points=points)

    def save(self, path, **kwargs):
        """Write ``.nc``/``.zarr`` (:meth:`to_xarray`) or the figure of :meth:`plot` as
        ``.svg``, ``.pdf``, ``.png``, atomically (the suffixes of :data:`phaselab.export.SAVERS`)."""
        from phaselab.export import save

        return save(self, path, **kwargs)

    def plot(self, **kwargs):
        """The prediction beside the measurement as a matplotlib figure (see
        :func:`phaselab.export.normal_form_figures.normal_form_check_figure`)."""
        from phaselab.export.normal_form_figures import normal_form_check_figure

        return normal_form_check_figure(self, **kwargs)

    def __repr__(self) -> str:
        worst = np.nanmax(np.abs(self.gap)) if np.isfinite(self.gap).any() else math.nan
        text = (f"NormalFormCheck({self.actions.shape[0]} orbits, order {self.order}, "
                f"largest |predicted - measured| = {worst:.3g} {self.unit}")
        if self.island is not None:
            text += (f", island width predicted {self.island.predicted_width:.4g}, "
                     f"measured {self.island.measured_width:.4g}")
        return text + ")"


def normal_form_check(system, nf, actions, t=None, *, angles=None, samples=DEFAULT_SAMPLES, dt=None, method="auto",
                      island=None, resonance=None, island_orbits=ISLAND_ORBITS, crossings=None, plane=None,
                      direction=+1) -> NormalFormCheck:
    """Measure the frequencies (and an island) a normal form predicts.

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
        The system ``nf`` was computed for; it is integrated at the normal form's parameters.
    nf : NormalForm
        From :func:`phaselab.normal_form`.
    actions : array_like, shape (m, n) or (m,) for one degree of freedom
        Actions ``J >= 0`` of the orbits to launch (units of action: H times time).
    t : float, optional
        Length of each orbit's record (flows; required for them). Not used for maps.
    angles : array_like, shape (m, n), optional
        Angles of the launched orbits (rad; default 0).
    samples : int
        Samples per orbit for the frequency analysis (iterates for a map).
    dt, method
        Integration step and method (flows), as in :func:`phaselab.frequencies`.
    island : array_like, shape (n,), optional
        For a resonant form: actions near the resonance; its island is predicted and
        measured on a section (:func:`phaselab.scan.island_check.measure_island`).
    resonance : sequence of int, optional
        Which kept resonance the island belongs to (default: the only one).
    island_orbits : int
        Orbits launched across the island.
    crossings : int, optional
        Section points per island orbit (default: a few oscillations inside the island).
    plane : mapping, optional
        The island's section plane (default: the last resonant mode's coordinate at the
        equilibrium).
    direction : {+1, -1}

    Returns
    -------
    NormalFormCheck

    Notes
    -----
    Mode ``k`` is measured on the coordinate it moves most (for an uncoupled quadratic part,
    ``q_k``): the largest of the leading lines within ``WINDOW |omega_k|`` of the linear
    frequency. For a resonant form the prediction is the angle-free part of ``dH/dJ``,
    which the measured mean frequencies approach away from the resonance.

    Raises
    ------
    ParameterError
        Bad actions, a normal form of another system, a missing ``t`` for a flow.
    ModelError
        An island asked of a Birkhoff form, or a resonance not met.
    """
    inputs.system(system)
    inputs.instance(nf, NormalForm, "nf", "a NormalForm from phaselab.normal_form")
    names = tuple(s.name for s in system.state_symbols)
    if names != tuple(nf.names) or system.kind != nf.kind:
        raise ParameterError(f"nf is a normal form of {nf.system_name or 'another system'} (state "
                             f"{', '.join(nf.names)}), not of this {system.kind} (state {', '.join(names)})")
    J = _actions(actions, nf.dof)
    phi = np.zeros_like(J) if angles is None else _angles(angles, J.shape)
    flow = system.kind == "flow"
    if flow:
        if t is None:
            raise ParameterError("t (the length of each record) is needed to measure a flow's frequencies")
        t = inputs.positive_number(t, "t")
    isl = None
    if island is not None:  # first: its argument errors come before any integration
        if not flow:
            raise ParameterError("island: maps have no resonant normal forms here; leave island out")
        isl = measure_island(system, nf, island, resonance=resonance, orbits=island_orbits, crossings=crossings,
                             plane=plane, direction=direction, dt=dt, method=method)
    states = nf.from_normal(J, phi)
    options = {"samples": samples, "params": nf.params, "lines": LINES, "diffusion": False}
    if flow:
        options.update(dt=dt, method=method)
        measured_result = frequencies(system, states, t, **options)
    else:
        measured_result = frequencies(system, states, **options)
    measured = _mode_lines(nf, measured_result)
    measured[J == 0] = np.nan   # a mode launched without action has no line of its own to measure
    predicted = nf.frequencies(J)
    unit = "rad per unit time" if flow else "rad per iterate"
    return NormalFormCheck(J, phi, states, predicted, measured, np.asarray(measured_result.status, dtype=int),
                           nf.order, tuple(nf.resonances), names, unit, isl, system, dict(nf.params),
                           measured_result.method, float(measured_result.dt), t if flow else None,
                           int(measured_result.n_samples), nf)


def _floats(value):
    """``value`` as a float array, or None when it is not numbers."""
    if isinstance(value, (str, bytes)):
        return None
    try:
        return np.asarray(value, dtype=float)
    except (TypeError, ValueError, OverflowError):
        return None


def _actions(actions, dof: int) -> np.ndarray:
    J = _floats(actions)
    if J is not None and J.ndim == 1 and dof == 1:
        J = J[:, None]
    if J is None or J.ndim != 2 or J.shape[1] != dof or J.shape[0] < 1:
        raise ParameterError(f"actions must have shape (m, {dof}) (one row per orbit, one action per mode), "
                             f"got {np.shape(actions)}")
    if not np.all(np.isfinite(J)) or np.any(J < 0):
        raise ParameterError("actions must be finite and >= 0")
    return J


def _angles(angles, shape) -> np.ndarray:
    phi = _floats(angles)
    if phi is None or phi.shape != shape or not np.all(np.isfinite(phi)):
        raise ParameterError(f"angles must be finite numbers with the shape of actions {shape}, got "
                             f"{np.shape(angles) if phi is not None else type(angles).__name__}")
    return phi


def _mode_lines(nf, result) -> np.ndarray:
    """Each mode's measured angular frequency (see the Notes of :func:`normal_form_check`)."""
    n = nf.dof
    weights = np.abs(nf.to_complex[:n, :n]) ** 2 + np.abs(nf.to_complex[:n, n:]) ** 2
    lines = result.lines
    out = np.full((result.nu.shape[0], n), np.nan)
    for k in range(n):
        column = int(np.argmax(weights[k]))
        omega = 2 * np.pi * lines.nu[:, column, :]
        amp = np.where(np.abs(omega - nf.omega[k]) <= WINDOW * abs(nf.omega[k]), lines.amplitude[:, column, :], -1.0)
        amp = np.where(np.isfinite(amp), amp, -1.0)
        best = np.argmax(amp, axis=1)
        found = amp[np.arange(len(best)), best] > 0
        out[found, k] = omega[found, best[found]]
    out[np.asarray(result.status) != codes.OK] = np.nan
    return out
