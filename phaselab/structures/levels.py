"""Level sets of a Hamiltonian on a grid: phase portraits and zero-velocity curves.

What is computed
----------------
The two state variables named in ``ranges`` are the shown axes (in state order, so the
first one is the horizontal axis). Every other state variable is either

* fixed by ``plane`` (e.g. ``{"x": 0.0}``), or
* a momentum not named anywhere, which is *eliminated*: at each grid point H is minimised
  over the eliminated momenta. The minimiser solves ``dH/dp = 0`` and is found by Newton's
  method vectorised over the whole grid, started at ``p = 0`` (exact in one step when H is
  quadratic in those momenta, as for ``|p|^2/2 + ...`` and for rotating frames). The Hessian
  ``d2H/dp2`` must be positive definite there, otherwise H has no minimum in those momenta
  and a :class:`~phaselab.errors.ModelError` says so.

A coordinate that is neither shown nor fixed is an error (only momenta are eliminated).
So ``values = H_min(shown; plane) = min over eliminated momenta of H``. For one degree of
freedom nothing is eliminated and ``values`` is H(q, p): its contours are the phase
portrait. For more degrees of freedom the contour ``H_min = E`` is the boundary of the
energetically allowed region (the zero-velocity curve when the eliminated momenta are all
momenta): a point of the shown plane is reachable at energy E exactly when
``H_min <= E`` (:meth:`LevelSet.allowed`).

Contours are drawn by contourpy (``contour_generator`` with separate lines); grid points
where H is not finite (singularities) are masked.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field
from typing import Mapping

import numpy as np
import sympy as sp

from phaselab.engine import inputs
from phaselab.model.params import finite_number
from phaselab.errors import ModelError, ParameterError

NEWTON_STEPS = 50
NEWTON_TOL = 1e-12
MAX_RESOLUTION = 8000


@dataclass(eq=False)
class Separatrix:
    """The level curve through a hyperbolic equilibrium (one degree of freedom).

    Attributes
    ----------
    equilibrium : Equilibrium
    energy : float
        H at the equilibrium, the level of the curve.
    lines : list of ndarray, each shape (m, 2)
        Contour pieces ``(q, p)`` at that level inside the grid.
    """

    equilibrium: object
    energy: float
    lines: list


@dataclass(repr=False, eq=False)
class LevelSet:
    """Contours of H (or of H minimised over eliminated momenta) on a regular grid.

    Attributes
    ----------
    x : ndarray, shape (nx,)
        Grid values of the first shown variable ``axes[0]``.
    y : ndarray, shape (ny,)
        Grid values of the second shown variable ``axes[1]``.
    values : ndarray, shape (ny, nx)
        ``values[j, i]`` is H_min at ``(x[i], y[j])``; NaN where not finite or where the
        minimisation over eliminated momenta did not converge.
    levels : ndarray, shape (k,)
        The requested levels, in the order given.
    lines : list of list of ndarray
        ``lines[k]`` is the list of contour pieces at ``levels[k]``, each of shape (m, 2)
        holding ``(axes[0], axes[1])`` points.
    axes : tuple of sympy.Symbol
        The two shown state variables.
    plane : dict of str to float
        State variables held fixed.
    eliminated : tuple of str
        Momenta minimised over at each grid point.
    minimisers : dict of str to ndarray, shape (ny, nx)
        The minimising value of each eliminated momentum.
    separatrices : list of Separatrix
        For one degree of freedom when asked: level curves through hyperbolic equilibria.
    description : str
        In words, what ``values`` is.
    params : dict
        Parameter values used.
    system_name : str
        The name of the system contoured (for footers of figures).
    """

    x: np.ndarray
    y: np.ndarray
    values: np.ndarray
    levels: np.ndarray
    lines: list
    axes: tuple
    plane: dict = field(default_factory=dict)
    eliminated: tuple = ()
    minimisers: dict = field(default_factory=dict)
    separatrices: list = field(default_factory=list)
    description: str = ""
    params: dict = field(default_factory=dict)
    system_name: str = ""

    def allowed(self, energy: float) -> np.ndarray:
        """Boolean mask, shape (ny, nx): grid points energetically allowed at ``energy``
        (``values <= energy``; NaN points are not allowed)."""
        e = _finite_level(energy, "energy")
        with np.errstate(invalid="ignore"):
            return np.asarray(self.values <= e)

    def contour(self, level: float) -> list:
        """Contour pieces (each (m, 2)) at any other level of the same grid."""
        return _contour(self.x, self.y, self.values, _finite_level(level, "level"))

    def save(self, path, **kwargs):
        """Write a static figure (.svg, .pdf or .png) of the level curves, separatrices and,
        for a single level, the shaded forbidden region (see
        :func:`phaselab.export.level_set_figure`), or the grid as .nc or .zarr.
        Returns the path written."""
        from phaselab.export import save

        return save(self, path, **kwargs)

    def to_xarray(self):
        """An ``xarray.Dataset`` with CF attributes: ``values`` over the two shown variables
        and the ``levels``."""
        from phaselab.structures.labelled import level_set_dataset

        return level_set_dataset(self)

    def plot(self, **kwargs):
        """A matplotlib figure of the level curves (see :func:`phaselab.export.level_set_figure`)."""
        from phaselab.export.portraits import level_set_figure

        return level_set_figure(self, **kwargs)

    def __repr__(self) -> str:
        n_pieces = sum(len(ls) for ls in self.lines)
        sep = f", {len(self.separatrices)} separatrices" if self.separatrices else ""
        return (f"LevelSet({self.description}; grid {len(self.x)} x {len(self.y)}, "
                f"{len(self.levels)} levels, {n_pieces} contour pieces{sep})")


# --------------------------------------------------------------------------- helpers
def _finite_level(value, what: str) -> float:
    return finite_number(value, what)


def _check_levels(levels) -> np.ndarray:
    if isinstance(levels, (str, bytes)):
        raise ParameterError(f"levels must be a number or a list of numbers, got {levels!r}")
    items = [levels] if np.ndim(levels) == 0 else list(np.asarray(levels, dtype=object).ravel())
    if not items:
        raise ParameterError("levels is empty; give at least one energy")
    return np.array([_finite_level(v, "each level") for v in items], dtype=float)


def _check_resolution(resolution) -> tuple[int, int]:
    items = [resolution, resolution] if np.ndim(resolution) == 0 else list(resolution)
    if len(items) != 2:
        raise ParameterError(f"resolution must be an integer or (nx, ny), got {resolution!r}")
    out = []
    for r in items:
        if isinstance(r, bool) or not isinstance(r, (int, np.integer)) or not 2 <= r <= MAX_RESOLUTION:
            raise ParameterError(f"resolution must be integers between 2 and {MAX_RESOLUTION}, got {resolution!r}")
        out.append(int(r))
    return out[0], out[1]


def _contour(x, y, values, level: float) -> list:
    import contourpy

    z = np.ma.masked_invalid(values)
    gen = contourpy.contour_generator(x, y, z, line_type=contourpy.LineType.Separate)
    return [np.asarray(piece, dtype=float) for piece in gen.lines(level)]


def _as_grid(v, shape) -> np.ndarray:
    return np.broadcast_to(np.asarray(v, dtype=float), shape)


# --------------------------------------------------------------------------- public entry
def level_set(system, ranges, levels, *, params=None, resolution=400, plane=None,
              separatrices: bool = False) -> LevelSet:
    """Contours of H on a grid of two state variables.

    Parameters
    ----------
    system : Hamiltonian
        An autonomous Hamiltonian (see Raises for time-dependent ones and maps).
    ranges : mapping of str to (float, float)
        Exactly two state variables with their ``(low, high)`` intervals; for one degree of
        freedom ``{"q": (lo, hi), "p": (lo, hi)}``.
    levels : float or sequence of float
        Energies to draw.
    params : mapping of str to float, optional
        Parameter values.
    resolution : int or (int, int)
        Grid points per axis (``nx, ny``); default 400 x 400.
    plane : mapping of str to float, optional
        State variables held fixed (e.g. ``{"x": 0.0}``). Momenta neither shown nor fixed are
        eliminated by minimising H over them (see the module docstring).
    separatrices : bool
        For one degree of freedom: also the level curves through the hyperbolic equilibria
        inside ``ranges`` (energies from :func:`phaselab.structures.equilibria.equilibria`).

    Returns
    -------
    LevelSet

    Raises
    ------
    ParameterError
        Unknown or repeated names in ``ranges``/``plane``, not exactly two shown variables,
        empty or non-finite intervals, non-finite levels or plane values, a coordinate left
        neither shown nor fixed, ``separatrices`` asked for more than one degree of freedom.
    ModelError
        A map or a time-dependent H, or H without a minimum in the eliminated momenta.
    """
    from phaselab.structures.equilibria import check_bounds

    inputs.system(system), inputs.flag(separatrices, "separatrices")
    if system.kind != "flow":
        raise ModelError(f"system {getattr(system, 'name', '')!r} is a map: it has no Hamiltonian to draw "
                         "level sets of")
    if not system.is_autonomous:
        raise ModelError(
            f"system {system.name!r} depends on time explicitly; draw the level sets of the frozen "
            f"system by building it with {system.time.name!r} declared as a parameter and passing "
            "the time you want in params")
    names = tuple(s.name for s in system.state_symbols)
    if not isinstance(ranges, Mapping) or len(ranges) != 2:
        raise ParameterError("ranges must name exactly two state variables with (low, high), e.g. "
                             f"{{{names[0]!r}: (-1, 1), {names[system.dof]!r}: (-1, 1)}}; got {ranges!r}")
    rng = check_bounds(ranges, names, what="ranges")
    if len(rng) != 2:
        raise ParameterError(f"ranges names the same variable twice: {list(ranges)}")
    fixed = _check_plane(system, plane, rng)
    levels_arr = _check_levels(levels)
    nx, ny = _check_resolution(resolution)
    if separatrices and system.dof != 1:
        raise ParameterError(
            "separatrices are drawn for one degree of freedom; for more, pass the energies of "
            "the equilibria (phaselab.equilibria) as levels")
    values_p = system.param_values(params)
    param_dict = {p.name: float(v) for p, v in zip(system.parameters, values_p)}

    state = system.state_symbols
    shown_idx = sorted(names.index(n) for n in rng)
    sx, sy = state[shown_idx[0]], state[shown_idx[1]]
    n = system.dof
    elim = [state[i] for i in range(2 * n) if names[i] not in rng and names[i] not in fixed]
    stray = [s.name for s in elim if state.index(s) < n]
    if stray:
        raise ParameterError(
            f"coordinates {', '.join(stray)} are neither shown (ranges) nor fixed (plane); only "
            "momenta are eliminated, so fix them in plane=")

    x = np.linspace(*rng[sx.name], nx)
    y = np.linspace(*rng[sy.name], ny)
    X, Y = np.meshgrid(x, y)
    base = np.zeros(2 * n)
    for k, v in fixed.items():
        base[names.index(k)] = v
    with np.errstate(all="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        values, minimisers = _minimised_values(system, values_p, base, shown_idx,
                                               [state.index(s) for s in elim], X, Y)
    values = np.where(np.isfinite(values), values, np.nan)

    description = _describe(system, sx, sy, fixed, elim)
    lines = [_contour(x, y, values, lev) for lev in levels_arr]
    seps = []
    if separatrices:
        from phaselab.structures.equilibria import equilibria

        eqs = equilibria(system, params=params, ranges={sx.name: rng[sx.name], sy.name: rng[sy.name]})
        for eq in eqs:
            if eq.stability == "hyperbolic":
                seps.append(Separatrix(eq, eq.energy, _contour(x, y, values, eq.energy)))
    return LevelSet(x=x, y=y, values=values, levels=levels_arr, lines=lines, axes=(sx, sy), plane=fixed,
                    eliminated=tuple(s.name for s in elim), minimisers=minimisers, separatrices=seps,
                    description=description, params=param_dict, system_name=str(getattr(system, "name", "") or ""))


def allowed_mask(system, ranges, energy, params=None, resolution=400, plane=None) -> np.ndarray:
    """Boolean mask, shape (ny, nx), of the grid points energetically allowed at ``energy``.

    Same grid and conventions as :func:`level_set` (``H_min <= energy``).
    """
    return level_set(system, ranges, energy, params=params, resolution=resolution, plane=plane).allowed(energy)


def _check_plane(system, plane, shown) -> dict[str, float]:
    fixed = inputs.plane(system, plane, stroboscopic=False)
    for name in fixed.names:
        if name in shown:
            raise ParameterError(f"plane fixes {name!r}, which ranges also shows; a variable is one or the other")
    return fixed.as_dict()


def _minimised_values(system, prm, base, shown, elim, X, Y):
    """H on the grid, minimised over the eliminated momenta by vectorised Newton from p = 0.

    H, dH/dp and d2H/dp2 come from the system's compiled kernels (the vector field's first n
    components are dH/dp, the rows of its Jacobian for them hold d2H/dp dz), evaluated over
    the whole grid in one compiled call each.
    """
    from phaselab.engine.compiled import loops

    cs = loops(system)
    shape = X.shape
    n = system.dof
    Z = np.tile(base, (X.size, 1))
    Z[:, shown[0]] = X.ravel()
    Z[:, shown[1]] = Y.ravel()
    if not elim:
        return cs.evaluate("hamiltonian", Z, prm).reshape(shape), {}
    names = [s.name for s in system.state_symbols]
    k = len(elim)
    pos = [i - n for i in elim]          # eliminated momenta: p_(i - n)
    converged = np.zeros(X.size, dtype=bool)

    def grad_hess(Z):
        f = cs.evaluate("vector_field", Z, prm)
        J = cs.evaluate("jacobian", Z, prm)
        g = f[:, pos]
        Hm = J[:, pos][:, :, elim]
        return g, Hm

    for _ in range(NEWTON_STEPS):
        g, Hm = grad_hess(Z)
        ok = np.all(np.isfinite(g), axis=-1) & np.all(np.isfinite(Hm), axis=(-1, -2))
        Hm_safe = np.where(ok[:, None, None], Hm, np.eye(k))
        g_safe = np.where(ok[:, None], g, 0.0)
        try:
            step = np.linalg.solve(Hm_safe, g_safe[..., None])[..., 0]
        except np.linalg.LinAlgError:
            raise ModelError("the Hessian of H in the eliminated momenta "
                             f"({', '.join(names[i] for i in elim)}) is singular on the grid; H has no "
                             "unique minimum in them") from None
        Z[:, elim] -= step
        size = np.max(np.abs(step), axis=-1)
        scale = 1.0 + np.max(np.abs(Z[:, elim]), axis=-1)
        converged = ok & (size <= NEWTON_TOL * scale)
        if np.all(converged | ~ok):
            break
    _, Hm = grad_hess(Z)
    finite = np.all(np.isfinite(Hm), axis=(-1, -2))
    eig = np.linalg.eigvalsh(np.where(finite[:, None, None], Hm, np.eye(k)))
    not_min = finite & (eig[:, 0] <= 0)
    if np.any(not_min):
        raise ModelError(
            f"H has no minimum in the eliminated momenta ({', '.join(names[i] for i in elim)}) at "
            f"{int(not_min.sum())} grid points (d2H/dp2 not positive definite there); show or fix "
            "those momenta instead")
    values = cs.evaluate("hamiltonian", Z, prm)
    values[~converged] = np.nan
    return values.reshape(shape), {names[i]: Z[:, i].reshape(shape) for i in elim}


def _describe(system, sx, sy, fixed, elim) -> str:
    where = f"H({sx.name}, {sy.name}"
    if fixed:
        where += "; " + ", ".join(f"{k}={v:g}" for k, v in fixed.items())
    where += ")"
    if elim:
        return f"min over {', '.join(p.name for p in elim)} of {where}"
    return where
