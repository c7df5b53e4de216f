"""Initial states on an energy shell: one momentum (or other state component) solved from H = E.

A surface of section of a system with two degrees of freedom is seeded by fixing the
section plane (``{"x": 0.0}``), choosing the shown coordinates freely (``y``, ``p_y``) and
solving the remaining momentum (``p_x``) from H = E. Points where H = E has no real
solution lie outside the energetically allowed region; they are kept as NaN rows with a
reason, never dropped.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field
from functools import lru_cache
from typing import Mapping

import numpy as np
import sympy as sp

from phaselab.engine import inputs
from phaselab.engine.inputs import state_index
from phaselab.model.numeric import numeric_function
from phaselab.errors import ModelError, ParameterError


@dataclass
class ShellSeeds:
    """States on (or attempted on) the energy shell H = E.

    Attributes
    ----------
    states : ndarray, shape (n_points, 2n)
        Full states ``(q1..qn, p1..pn)``; rows of invalid points are NaN.
    valid : ndarray of bool, shape (n_points,)
        True where a real solution of H = E was found.
    reasons : list of str, length n_points
        ``""`` for valid points, else why the point has no state on the shell.
    energy : float
        The energy E.
    plane : dict
        The fixed components by name.
    solve_for : str
        The name of the solved component.
    free : tuple of str
        The names of the free components, in the column order of ``points``.
    sign : int
        +1 took the largest real root, -1 the smallest.
    method : str
        ``"closed form"`` (a sympy root formula) or ``"bracketed root"`` (scipy brentq).
    system : object
    params : dict
    """

    states: np.ndarray
    valid: np.ndarray
    reasons: list
    energy: float
    plane: dict
    solve_for: str
    free: tuple
    sign: int
    method: str
    system: object = None
    params: dict = field(default_factory=dict)

    def to_xarray(self):
        """An ``xarray.Dataset`` with CF attributes: ``states``, ``valid``, ``reason``."""
        from phaselab.orbits.labelled import shell_seeds_dataset

        return shell_seeds_dataset(self)

    def plot(self, **kwargs):
        """A matplotlib figure of the valid seeds in their two free components."""
        from phaselab.export.result_figures import shell_seeds_figure

        return shell_seeds_figure(self, **kwargs)

    def save(self, path, **kwargs):
        """Write .nc, .zarr, .svg, .pdf or .png (:data:`phaselab.export.SAVERS`); returns the path."""
        from phaselab.export import save

        return save(self, path, **kwargs)

    @property
    def n_points(self) -> int:
        return self.states.shape[0]

    def valid_states(self) -> np.ndarray:
        """The states of the valid points only, shape (n_valid, 2n)."""
        return self.states[self.valid]

    def invalid(self) -> list[tuple[int, str]]:
        """``(index, reason)`` of every point without a state on the shell."""
        return [(i, r) for i, r in enumerate(self.reasons) if not self.valid[i]]

    def __repr__(self) -> str:
        return (f"ShellSeeds({self.n_points} points at E = {self.energy:g}, {int(self.valid.sum())} valid, "
                f"{self.solve_for} solved by {self.method})")


def _as_float(value, what: str) -> float:
    return inputs.number(value, what)


@lru_cache(maxsize=64)
def _closed_form(system, solve_index: int):
    """Root formulas of H = E for state component ``solve_index`` when H is at most quadratic
    in it, as a numpy function of (other state components..., E, params...) returning the
    roots stacked on the first axis; ``None`` when no closed form is used."""
    x = system.state_symbols[solve_index]
    E = sp.Dummy("E", real=True)
    try:
        poly = sp.Poly(system.expr - E, x)
    except sp.PolynomialError:
        return None
    if poly.degree() < 1 or poly.degree() > 2:
        return None
    if any(x in c.free_symbols for c in poly.coeffs()):
        return None
    # the root formula written out from the coefficients: sympy.solve would simplify the
    # roots first, which for long coefficients can take minutes (and depends on hash order)
    coeffs = poly.all_coeffs()
    if poly.degree() == 1:
        b, c = coeffs
        roots = [-c / b]
    else:
        a, b, c = coeffs
        disc = sp.sqrt(b**2 - 4 * a * c)
        roots = [(-b + disc) / (2 * a), (-b - disc) / (2 * a)]
    others = [s for i, s in enumerate(system.state_symbols) if i != solve_index]
    args = others + [E] + list(system.param_symbols)
    fn = numeric_function(args, list(roots))
    return fn


def _real_array(value, what: str) -> np.ndarray:
    """``value`` as a float array, or a ParameterError naming ``what``."""
    try:
        arr = np.asarray(value) if not isinstance(value, str) else np.asarray([value])
    except ValueError:   # ragged nested sequences
        arr = np.asarray([None])
    if arr.dtype.kind not in "iuf":
        raise ParameterError(f"{what} must be real numbers, got {value!r:.60}")
    return arr.astype(float)


def _broadcast_points(system, points, free: list[str]) -> np.ndarray:
    """The free components as an array (n_points, len(free))."""
    k = len(free)
    if isinstance(points, Mapping):
        keys = [getattr(n, "name", n) for n in points]
        unknown = [n for n in keys if n not in free]
        missing = [n for n in free if n not in keys]
        if unknown or missing:
            raise ParameterError(
                "points must give exactly the free components " + ", ".join(free)
                + (f"; unknown or fixed: {', '.join(map(str, unknown))}" if unknown else "")
                + (f"; missing: {', '.join(missing)}" if missing else ""))
        values = {getattr(n, "name", n): _real_array(v, f"points of {getattr(n, 'name', n)!r}")
                  for n, v in points.items()}
        try:
            cols = np.broadcast_arrays(*[np.atleast_1d(values[n]).ravel() for n in free]) if k else []
        except ValueError:
            raise ParameterError("the points of " + ", ".join(free) + " must have equal lengths") from None
        arr = np.stack(cols, axis=1) if k else np.zeros((1, 0))
    else:
        arr = _real_array(points, "points")
        if k == 0:
            arr = arr.reshape(-1, 0) if arr.size == 0 else arr.reshape(len(arr), 0)
        elif arr.ndim == 1 and k == 1:
            arr = arr[:, None]
        elif arr.ndim == 1 and arr.shape[0] == k:
            arr = arr[None, :]
        if arr.ndim != 2 or arr.shape[1] != k:
            raise ParameterError(f"points must have shape (n_points, {k}) with columns ({', '.join(free)}), "
                             f"got shape {arr.shape}")
    return arr


def shell_seeds(system, points, *, energy, plane, solve_for, params=None, sign=+1) -> ShellSeeds:
    """Put points on the energy shell H = E by solving one state component.

    Parameters
    ----------
    system : Hamiltonian
        An autonomous system (H without explicit time).
    points : array_like, shape (n_points, k), or mapping of name to array
        The remaining (free) components. As an array, the columns are the free components in
        state order ``(q1..qn, p1..pn)`` with the fixed and the solved ones left out (for
        Henon-Heiles with plane x = 0 solving px: columns (y, py)). As a mapping, name to
        values, broadcast against each other.
    energy : float
        The energy E (units of H).
    plane : mapping of str to float, or None
        The fixed state components, e.g. ``{"x": 0.0}`` for a section plane x = 0 (names as
        text or sympy symbols; None fixes none; see :func:`phaselab.engine.inputs.plane`).
    solve_for : str or sympy.Symbol
        The component solved from H = E, usually the momentum conjugate to the plane's
        coordinate (``"px"``).
    params : mapping, optional
        Parameter values by name.
    sign : {+1, -1}
        +1 takes the largest real root, -1 the smallest. For H quadratic in the solved
        momentum this is the root with dH/dp >= 0 (resp. <= 0), i.e. the crossing direction;
        for H = p^2/2m + V it is simply p >= 0 (resp. p <= 0).

    Returns
    -------
    ShellSeeds

    Notes
    -----
    When H is at most quadratic in the solved component, sympy's root formula is used and
    checked to be real; otherwise each point is solved by a bracketed root search
    (``scipy.optimize.brentq``) on the side of the minimum of H given by ``sign``.
    """
    inputs.system(system)
    if system.kind != "flow":
        raise ModelError("shell_seeds needs a Hamiltonian flow; a map has no energy shell")
    if not system.is_autonomous:
        raise ModelError("H depends on time explicitly, so it has no energy shell; seed the "
                         "stroboscopic section with plain states instead")
    if isinstance(sign, (bool, np.bool_)) or sign not in (1, -1):
        raise ParameterError(f"sign must be +1 or -1, got {sign!r}")
    E = _as_float(energy, "energy")
    where = inputs.plane(system, plane, stroboscopic=False)
    fixed = dict(zip(where.indices, where.values))
    si = state_index(system, solve_for, "solve_for component")
    if si in fixed:
        raise ParameterError(f"{system.state_symbols[si].name} is both fixed by the plane and solved for")
    names = [s.name for s in system.state_symbols]
    free_idx = [i for i in range(len(names)) if i not in fixed and i != si]
    free = [names[i] for i in free_idx]
    pts = _broadcast_points(system, points, free)
    n_pts = pts.shape[0]
    prm = system.param_values(params)
    states = np.full((n_pts, len(names)), np.nan)
    for i, v in fixed.items():
        states[:, i] = v
    for c, i in enumerate(free_idx):
        states[:, i] = pts[:, c]
    finite = np.all(np.isfinite(pts), axis=1)
    reasons = ["" if f else "non-finite free components" for f in finite]
    fn = _closed_form(system, si)
    sname = names[si]
    if fn is not None:
        method = "closed form"
        solved, ok, why = _solve_closed(system, fn, states, si, E, prm, sign, finite)
    else:
        method = "bracketed root"
        solved, ok, why = _solve_bracketed(system, states, si, E, prm, sign, finite)
    states[:, si] = solved
    valid = finite & ok
    for j in range(n_pts):
        if finite[j] and not ok[j]:
            reasons[j] = why[j]
    states[~valid] = np.nan
    return ShellSeeds(states=states, valid=valid, reasons=reasons, energy=E,
                      plane={names[i]: v for i, v in fixed.items()}, solve_for=sname, free=tuple(free),
                      sign=int(sign), method=method, system=system,
                      params=dict(zip((p.name for p in system.parameters), prm.tolist())))


def _energy_at(system, states, prm) -> np.ndarray:
    return system.energy(states, params=dict(zip((p.name for p in system.parameters), prm.tolist())))


def _forbidden_reason(name: str, gap: float, at: float) -> str:
    return (f"outside the energetically allowed region: H - E = {gap:.3g} > 0 at {name} = {at:.6g}")


def _solve_closed(system, fn, states, si, E, prm, sign, finite):
    n_pts = states.shape[0]
    others = [states[:, i].astype(complex) for i in range(states.shape[1]) if i != si]
    with np.errstate(all="ignore"):
        roots = [np.broadcast_to(np.asarray(r, dtype=complex), (n_pts,))
                 for r in fn(*others, complex(E), *[complex(v) for v in prm])]
    R = np.stack(roots, axis=0)  # (n_roots, n_pts)
    tol = 1e-9 * (1.0 + np.abs(R.real))
    real = np.isfinite(R.real) & (np.abs(R.imag) <= tol)
    cand = np.where(real, R.real, np.nan)
    with np.errstate(all="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore")  # all-NaN columns are the forbidden points, reported below
        pick = np.nanmax(cand, axis=0) if sign > 0 else np.nanmin(cand, axis=0)
    ok = finite & np.isfinite(pick)
    why = [""] * n_pts
    bad = np.flatnonzero(finite & ~ok)
    if bad.size:
        trial = states[bad].copy()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            at = np.nanmean(np.where(np.isfinite(R.real[:, bad]), R.real[:, bad], np.nan), axis=0)
        at = np.where(np.isfinite(at), at, 0.0)
        trial[:, si] = at
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            gap = _energy_at(system, trial, prm) - E
        name = system.state_symbols[si].name
        for j, g, a in zip(bad, np.atleast_1d(gap), at):
            why[j] = (_forbidden_reason(name, float(g), float(a)) if g > 0
                      else f"no real root of H = E for {name}")
    return pick, ok, why


def _solve_bracketed(system, states, si, E, prm, sign, finite):
    from scipy.optimize import brentq, minimize_scalar

    from phaselab.codegen import compile_kernel

    n_pts = states.shape[0]
    name = system.state_symbols[si].name
    kernel = compile_kernel(system)
    out = np.full(n_pts, np.nan)
    ok = np.zeros(n_pts, dtype=bool)
    why = [""] * n_pts
    for j in range(n_pts):
        if not finite[j]:
            continue
        z = list(states[j])

        def g(v, z=z):
            z[si] = v
            value = kernel.call("hamiltonian", np.array(z, dtype=float), prm) - E
            return value if np.isfinite(value) else np.nan

        try:
            m = minimize_scalar(g, bracket=(-1.0, 1.0), method="brent")
            v0 = float(m.x) if np.isfinite(m.fun) else 0.0
        except (ValueError, FloatingPointError, RuntimeError):
            v0 = 0.0
        g0 = g(v0)
        if not np.isfinite(g0):
            why[j] = f"H is not finite at {name} = {v0:.6g}"
            continue
        if g0 > 0:
            why[j] = _forbidden_reason(name, g0, v0)
            continue
        if g0 == 0:
            out[j], ok[j] = v0, True
            continue
        step = max(1.0, abs(v0))
        hi = v0 + sign * step
        found = False
        for _ in range(80):
            gh = g(hi)
            if np.isfinite(gh) and gh >= 0:
                found = True
                break
            step *= 2.0
            hi = v0 + sign * step
        if not found:
            why[j] = f"no root of H = E for {name} found on the side {'+' if sign > 0 else '-'} of {v0:.6g}"
            continue
        a, b = (v0, hi) if sign > 0 else (hi, v0)
        out[j] = brentq(g, a, b, xtol=1e-300, rtol=8.9e-16, maxiter=400)
        ok[j] = True
    return out, ok, why
