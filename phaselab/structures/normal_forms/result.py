"""NormalForm: the normal form's Hamiltonian, its detuning, and the change of variables."""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import sympy as sp

from phaselab.base.atomic import atomic_path
from phaselab.errors import ParameterError
from phaselab.structures.normal_forms.curves import torus_curve
from phaselab.structures.normal_forms.islands import resonance_width
from phaselab.structures.normal_forms.polynomials import as_arrays, evaluate
from phaselab.structures.normal_forms.terms import evaluate_terms, term_arrays
from phaselab.engine.provenance import cf_dataset


@dataclass(repr=False, eq=False)
class NormalForm:
    """The normal form of H near an elliptic equilibrium, to a given order.

    In the normal coordinates ``(J, phi)`` (actions ``J_k >= 0`` and angles ``phi_k``, mode
    ``k`` of linear frequency ``omega[k]``) H is ``energy0 + sum of terms``
    (:attr:`hamiltonian`); Birkhoff's form has actions alone, a resonant form also the
    resonant angles ``k . phi`` of the resonances asked for. Near the equilibrium, to
    lowest order, ``q_k ~ sqrt(2 J_k / omega_k) cos(phi_k)`` for a mode in the coordinate
    ``q_k`` with unit mass.

    Attributes
    ----------
    order : int
        Highest degree in the distance from the equilibrium that was normalised.
    dof : int
    omega : ndarray, shape (n,)
        Linear frequencies (rad per unit time); negative for a mode of negative energy.
    omega_exact : tuple of sympy numbers, or None
        The same, exact, when the arithmetic is exact.
    arithmetic : str
        ``"exact"`` (rational arithmetic throughout) or ``"float"``; ``arithmetic_note`` says why.
    resonances : tuple of tuple of int
        The resonance vectors whose terms were kept.
    equilibrium : ndarray, shape (2n,)
    energy0 : float
        H at the equilibrium.
    terms : list of Term
        The normal form's terms (:mod:`phaselab.structures.normal_forms.terms`).
    small_divisors : dict
        ``{degree: smallest |k . omega| of the terms removed at that degree}`` (``inf`` if none):
        a small value warns of a nearby resonance.
    names : tuple of str
        State variable names.
    kind : {"flow", "map"}
        For a map (of the plane) ``omega`` is the rotation angle of the linear map (rad per
        iterate), :meth:`frequencies` the rotation angle per iterate at action J, and the
        Hamiltonian ``K(J)`` the one whose time-one map is the normal form (see
        :mod:`phaselab.structures.normal_forms.maps`); ``area_defect`` is what the
        computation left of a change of area (zero for an exact area-preserving map).
    periods : ndarray or None
        Wrapping period of each state component (NaN where none): states are compared with
        the fixed point modulo these.
    """

    order: int
    dof: int
    omega: np.ndarray
    omega_exact: tuple | None
    arithmetic: str
    arithmetic_note: str
    resonances: tuple
    equilibrium: np.ndarray
    energy0: sp.Expr
    terms: list
    small_divisors: dict
    names: tuple
    system_name: str
    params: dict
    to_complex: np.ndarray
    to_real: np.ndarray
    scales: np.ndarray
    old_of_new: list = field(default_factory=list)
    new_of_old: list = field(default_factory=list)
    kind: str = "flow"
    periods: np.ndarray | None = None
    area_defect: float = 0.0

    def __post_init__(self):
        self._arrays = term_arrays(self.terms, self.dof)
        m = 2 * self.dof
        self._forward = [as_arrays(p, m) for p in self.old_of_new]
        self._backward = [as_arrays(p, m) for p in self.new_of_old]

    @property
    def transformation_terms(self) -> int:
        """Monomials in the change of variables, both directions, all ``2n`` components."""
        return int(sum(len(c) for _, c in self._forward) + sum(len(c) for _, c in self._backward))

    # ----------------------------------------------------------------- symbolic
    @property
    def actions(self) -> tuple:
        """The action symbols ``J1..Jn``."""
        return tuple(sp.Symbol(f"J{k + 1}", nonnegative=True) for k in range(self.dof))

    @property
    def angles(self) -> tuple:
        """The angle symbols ``phi1..phin``."""
        return tuple(sp.Symbol(f"phi{k + 1}", real=True) for k in range(self.dof))

    def _term_expressions(self) -> list:
        """The constant, then each term as a sympy expression, in increasing degree."""
        J, phi = self.actions, self.angles
        out = [self.energy0]
        for t in self.terms:
            power = sp.Mul(*[j ** p for j, p in zip(J, t.powers)])
            arg = sum(k * f for k, f in zip(t.harmonic, phi))
            angle = t.cos_coef if not any(t.harmonic) else t.cos_coef * sp.cos(arg) + t.sin_coef * sp.sin(arg)
            out.append(angle * power)
        return out

    @property
    def hamiltonian(self) -> sp.Expr:
        """H in the normal coordinates, a sympy expression in :attr:`actions` (and
        :attr:`angles` for resonant forms), constant ``energy0`` included."""
        return sp.Add(*self._term_expressions())

    def latex(self) -> str:
        """The normal form as a LaTeX equation ``H = ...``, terms in increasing degree."""
        parts = [sp.latex(e) for e in self._term_expressions() if e != 0]
        text = " + ".join(parts) if parts else "0"
        return "H = " + text.replace("+ - ", "- ")

    # ----------------------------------------------------------------- numeric
    def _actions(self, J, what="J") -> np.ndarray:
        J = np.asarray(J, dtype=float)
        if J.ndim == 0 or J.shape[-1] != self.dof:
            raise ParameterError(f"{what} must have a last axis of length {self.dof} (one value per mode), "
                                 f"got shape {J.shape}")
        if not np.all(np.isfinite(J)):
            raise ParameterError(f"{what} must be finite")
        return J

    def energy(self, J, phi=None) -> np.ndarray:
        """H of the normal form at actions ``J`` (shape (..., n)); ``phi`` (same shape) adds
        the resonant terms, else only the terms of the actions alone are summed."""
        J = self._actions(J)
        if np.any(J < 0):
            raise ParameterError("actions J must be >= 0")
        flat = J.reshape(-1, self.dof)
        ph = None if phi is None else self._actions(phi, "phi").reshape(-1, self.dof)
        return (float(self.energy0) + evaluate_terms(self._arrays, flat, ph)).reshape(J.shape[:-1])

    def frequencies(self, J, phi=None) -> np.ndarray:
        """The frequencies ``dH/dJ`` of the normal form (the detuning with amplitude).

        Parameters
        ----------
        J : array_like, shape (..., n)
            Actions (>= 0), in the units of H times time.
        phi : array_like, shape (..., n), optional
            Angles; only a resonant form depends on them. Without them the terms of the
            actions alone are differentiated (the angle-free part of the frequencies).

        Returns
        -------
        ndarray, shape (..., n)
            Angular frequencies (rad per unit time).
        """
        J = self._actions(J)
        if np.any(J < 0):
            raise ParameterError("actions J must be >= 0")
        flat = J.reshape(-1, self.dof)
        ph = None if phi is None else self._actions(phi, "phi").reshape(-1, self.dof)
        out = np.stack([evaluate_terms(self._arrays, flat, ph, derivative=k) for k in range(self.dof)], axis=1)
        return out.reshape(J.shape)

    def to_normal(self, states) -> tuple[np.ndarray, np.ndarray]:
        """Actions and angles of states, through the normalising transformation.

        Parameters
        ----------
        states : array_like, shape (m, 2n) or (2n,)

        Returns
        -------
        J, phi : ndarray, shape (m, n) each (or (n,) for one state)
            Actions and angles (rad, in (-pi, pi]), accurate to the order computed.
        """
        z = np.asarray(states, dtype=float)
        single = z.ndim == 1
        z = np.atleast_2d(z)
        if z.ndim != 2 or z.shape[1] != 2 * self.dof:
            raise ParameterError(f"states must have shape (m, {2 * self.dof}), got {np.shape(states)}")
        if not np.all(np.isfinite(z)):
            raise ParameterError("states must be finite")
        dz = z - self.equilibrium
        if self.periods is not None:
            wrapped = np.isfinite(self.periods)
            P = self.periods[wrapped]
            dz[:, wrapped] = (dz[:, wrapped] + P / 2) % P - P / 2
        u = dz @ self.to_complex.T
        w = np.stack([evaluate(e, c, u) for e, c in self._backward], axis=1)
        n = self.dof
        xi, eta = w[:, :n], w[:, n:]
        J = (xi * eta).real / self.scales
        phi = 0.5 * (np.angle(eta) - np.angle(xi))
        return (J[0], phi[0]) if single else (J, phi)

    def from_normal(self, J, phi) -> np.ndarray:
        """States at actions ``J`` and angles ``phi`` (shape (m, n) each), through the inverse
        transformation; returns shape (m, 2n)."""
        J = np.atleast_2d(self._actions(J))
        phi = np.atleast_2d(self._actions(phi, "phi"))
        if np.any(J < 0):
            raise ParameterError("actions J must be >= 0")
        J, phi = np.broadcast_arrays(J, phi)
        amp = np.sqrt(self.scales * J)
        w = np.concatenate([amp * np.exp(-1j * phi), amp * np.exp(1j * phi)], axis=1)
        u = np.stack([evaluate(e, c, w) for e, c in self._forward], axis=1)
        return self.equilibrium + (u @ self.to_real.T).real

    def resonance_width(self, J, resonance=None):
        """The island of an isolated resonance at actions ``J`` (shape (n,)), from the
        pendulum model of the resonant normal form: full width in the action along the
        resonance vector and in each ``J_j``, the detuning and the centres' resonant angle.
        See :mod:`phaselab.structures.normal_forms.islands`.

        Returns
        -------
        ResonanceWidth
        """
        return resonance_width(self._arrays, self.resonances, J, resonance)

    def invariant_curve(self, J, plane, *, direction=+1, points=200) -> np.ndarray:
        """The trace of the torus of actions ``J`` (shape (2,)) on a surface of section, from
        :meth:`from_normal` (flows of two degrees of freedom; see
        :mod:`phaselab.structures.normal_forms.curves`).

        Parameters
        ----------
        J : array_like, shape (2,)
        plane : mapping
            ``{coordinate name: value}``, crossed in ``direction`` (+1: increasing).
        points : int
            Values of the other angle.

        Returns
        -------
        ndarray, shape (points + 1, 4)
            States on the plane (a closed curve), NaN where the torus misses it.
        """
        return torus_curve(self, J, plane, direction=direction, points=points)

    # ----------------------------------------------------------------- reports
    def table(self) -> list[dict]:
        """One row per term: degree, powers of the actions, harmonic ``k``, coefficients
        (as text, exact when the arithmetic is), and floats of them."""
        rows = [{"degree": 0, "powers": (0,) * self.dof, "harmonic": (0,) * self.dof,
                 "cos": str(self.energy0), "sin": "0", "cos_value": float(self.energy0), "sin_value": 0.0}]
        for t in self.terms:
            rows.append({"degree": t.degree, "powers": tuple(str(p) for p in t.powers), "harmonic": t.harmonic,
                         "cos": str(t.cos_coef), "sin": str(t.sin_coef),
                         "cos_value": float(t.cos_coef), "sin_value": float(t.sin_coef)})
        return rows

    def summary(self) -> dict:
        """Everything needed to rebuild the Hamiltonian, as plain JSON-ready values."""
        return {"result": "normal_form", "system": self.system_name, "params": self.params,
                "state_names": list(self.names), "equilibrium": self.equilibrium.tolist(),
                "kind": self.kind, "order": self.order, "arithmetic": self.arithmetic, "arithmetic_note": self.arithmetic_note,
                "omega": self.omega.tolist(), "resonances": [list(r) for r in self.resonances],
                "small_divisors": {str(k): (None if not np.isfinite(v) else v)
                                   for k, v in self.small_divisors.items()},
                "hamiltonian": str(self.hamiltonian), "latex": self.latex(),
                "terms": [{k: (list(v) if isinstance(v, tuple) else v) for k, v in row.items()}
                          for row in self.table()]}

    def to_xarray(self):
        """The terms as an ``xarray.Dataset`` (dimensions ``term``, ``mode``, ``degree``)."""
        import xarray as xr

        rows = self.table()
        degrees = sorted(self.small_divisors)
        return cf_dataset(xr.Dataset(
            {"powers": (("term", "mode"), np.array([[float(sp.Rational(p)) for p in r["powers"]] for r in rows])),
             "harmonic": (("term", "mode"), np.array([r["harmonic"] for r in rows], dtype=int)),
             "cos": ("term", np.array([r["cos_value"] for r in rows])),
             "sin": ("term", np.array([r["sin_value"] for r in rows])),
             "term_degree": ("term", np.array([r["degree"] for r in rows], dtype=int)),
             "omega": ("mode", self.omega),
             "small_divisor": ("degree", np.array([self.small_divisors[d] for d in degrees]))},
            coords={"mode": np.arange(1, self.dof + 1), "degree": np.array(degrees, dtype=int)},
            attrs={"kind": "normal_form", "system_kind": self.kind, "system": self.system_name, "order": self.order,
                   "arithmetic": self.arithmetic, "arithmetic_note": self.arithmetic_note,
                   "resonances": json.dumps([list(r) for r in self.resonances]),
                   "equilibrium": json.dumps(self.equilibrium.tolist()), "params": json.dumps(self.params),
                   "state_names": json.dumps(list(self.names)), "hamiltonian": str(self.hamiltonian),
                   "model_note": "model results: confirm with validated tools"}))

    def save(self, path, **kwargs) -> Path:
        """Write the normal form: ``.json`` (summary), ``.nc`` (:meth:`to_xarray`), ``.tex``
        (:meth:`latex`) or the figure of :meth:`plot`, atomically (a temporary file renamed
        into place); the suffixes come from :data:`phaselab.export.SAVERS`."""
        from phaselab.export import save

        return save(self, path, **kwargs)

    def plot(self, **kwargs):
        """A matplotlib figure of the detuning, dH/dJ against the action (see
        :func:`phaselab.export.result_figures.normal_form_figure`)."""
        from phaselab.export.result_figures import normal_form_figure

        return normal_form_figure(self, **kwargs)

    def write_file(self, path) -> Path:
        """The writer of :meth:`save` for ``.json``, ``.nc`` and ``.tex``."""
        path = Path(path)
        suffix = path.suffix.lower()
        if suffix == ".json":
            text = json.dumps(self.summary(), indent=1) + "\n"
        elif suffix == ".tex":
            text = "\\begin{equation}\n" + self.latex() + "\n\\end{equation}\n"
        elif suffix == ".nc":
            ds = cf_dataset(self.to_xarray())
            with atomic_path(path) as tmp:
                ds.to_netcdf(tmp)
            return path
        else:
            raise ParameterError(f"cannot save a normal form as {suffix or 'a file without suffix'!r}; "
                                 "use .json, .nc or .tex")
        with atomic_path(path) as tmp:
            Path(tmp).write_text(text, encoding="utf-8")
        return path

    def __repr__(self) -> str:
        kind = "Birkhoff" if not self.resonances else f"resonant {list(self.resonances)}"
        omega = ", ".join(f"{w:.6g}" for w in self.omega)
        what = "omega" if self.kind == "flow" else "map, rotation per iterate"
        return (f"NormalForm({kind}, order {self.order}, {self.arithmetic} arithmetic, {what} = ({omega}), "
                f"{len(self.terms)} terms)")
