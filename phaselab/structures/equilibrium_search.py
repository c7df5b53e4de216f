"""How equilibria are found: the symbolic route for small polynomial systems, a multi-start
Newton search over a box otherwise (angles folded into their period), and the fixed points
of maps; duplicates merged and each solution classified (see :mod:`phaselab.structures.equilibria`
for the method and its guarantees)."""

from __future__ import annotations

import math
import warnings
from typing import Mapping

import numpy as np
import sympy as sp
from scipy import optimize

from phaselab.codegen import compile_kernel
from phaselab.errors import ParameterError
from phaselab.structures.equilibrium_result import Equilibrium
from phaselab.structures.stability import ZERO_EIGENVALUE, classify_flow, classify_map


SAME_POINT = 1e-6
"""Solutions closer than this times (1 + |z|) are one equilibrium."""
RESIDUAL = 1e-8
"""Accepted max |grad H| relative to (1 + |Hess H| * (1 + |z|))."""
DEFAULT_HALF_WIDTH = 3.0
"""Default bounds of non-angle state variables: (-3, 3)."""
MAX_DEGREE = 4
MAX_BEZOUT = 64



# --------------------------------------------------------------------------- helpers
def exact_number(value: float) -> sp.Rational:
    """A float as the exact decimal it prints as (so 0.01 becomes 1/100)."""
    return sp.Rational(repr(float(value)))


def check_bounds(bounds, names: tuple[str, ...], what: str = "ranges") -> dict[str, tuple[float, float]]:
    """Validate a mapping of state-variable name to (lo, hi)."""
    if bounds is None:
        return {}
    if not isinstance(bounds, Mapping):
        raise ParameterError(f"{what} must be a mapping of name to (low, high), got {type(bounds).__name__}")
    out = {}
    for key, rng in bounds.items():
        name = str(getattr(key, "name", key))
        if name not in names:
            raise ParameterError(f"{what}: unknown state variable {name!r}; this system has: {', '.join(names)}")
        try:
            lo, hi = (float(rng[0]), float(rng[1]))
            if len(rng) != 2:
                raise ValueError
        except (TypeError, ValueError, IndexError):
            raise ParameterError(f"{what}[{name!r}] must be (low, high), got {rng!r}") from None
        if not (math.isfinite(lo) and math.isfinite(hi)):
            raise ParameterError(f"{what}[{name!r}] = {rng!r} must be finite")
        if not lo < hi:
            raise ParameterError(f"{what}[{name!r}] = {rng!r} is empty: low must be below high")
        out[name] = (lo, hi)
    return out


def _periodic_vars(fn, n_vars: int, candidates, rng, period=2 * np.pi) -> set[int]:
    """Indices among ``candidates`` in which ``fn`` is ``period`` periodic, tested numerically."""
    out = set()
    points = rng.uniform(-2.0, 2.0, size=(5, n_vars))
    with np.errstate(all="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        base = np.array([_scalar(fn(*z)) for z in points])
        if not np.all(np.isfinite(base)):
            return out
        for i in candidates:
            shifted = points.copy()
            shifted[:, i] += period
            vals = np.array([_scalar(fn(*z)) for z in shifted])
            if np.all(np.abs(vals - base) <= 1e-9 * (1.0 + np.abs(base))):
                out.add(i)
    return out


def _scalar(v) -> float:
    try:
        return float(np.real_if_close(np.asarray(v, dtype=complex)))
    except (TypeError, ValueError):
        return float("nan")


class _Box:
    """Search box, angle handling and de-duplication shared by flows and maps."""

    def __init__(self, names, given, angles: dict[int, float], lows: dict[int, float] | None = None,
                 default_half_width=DEFAULT_HALF_WIDTH):
        self.names = names
        self.angles = angles  # index -> period
        self.lows = lows or {}  # index -> low end of the wrapping interval (maps)
        lo, hi = [], []
        for i, name in enumerate(names):
            if name in given:
                a, b = given[name]
            elif i in angles:
                low = self.lows.get(i, -angles[i] / 2)
                a, b = low, low + angles[i]
            else:
                a, b = -default_half_width, default_half_width
            lo.append(a)
            hi.append(b)
        self.lo, self.hi = np.array(lo), np.array(hi)
        self.centre = 0.5 * (self.lo + self.hi)

    def reduce(self, z: np.ndarray) -> np.ndarray:
        z = z.copy()
        for i, period in self.angles.items():
            if i in self.lows:
                r = np.mod(z[i] - self.lows[i], period)
                w = self.lows[i] + (0.0 if period - r <= 1e-12 * period else r)  # a hair below the top
            else:
                w = period / 2 - np.mod(period / 2 - z[i], period)  # into (-period/2, period/2]
            if not (self.lo[i] - 1e-12 <= w <= self.hi[i] + 1e-12):
                w = self.lo[i] + np.mod(z[i] - self.lo[i], period)
            z[i] = w
        return z

    def inside(self, z: np.ndarray) -> bool:
        span = self.hi - self.lo
        return bool(np.all(z >= self.lo - 1e-9 * span) and np.all(z <= self.hi + 1e-9 * span))

    def same(self, a: np.ndarray, b: np.ndarray) -> bool:
        d = a - b
        for i, period in self.angles.items():
            d[i] = d[i] - period * np.round(d[i] / period)
        return bool(np.max(np.abs(d)) <= SAME_POINT * (1.0 + max(np.max(np.abs(a)), np.max(np.abs(b)))))

    def random(self, count: int, seed) -> np.ndarray:
        rng = np.random.default_rng(seed)
        pts = rng.uniform(self.lo, self.hi, size=(count, len(self.lo)))
        return np.vstack([self.centre[None, :], pts])


def _add_unique(found: list, z: np.ndarray, residual: float, method: str, box: _Box) -> None:
    for k, (other, res, _m) in enumerate(found):
        if box.same(z, other):
            if residual < res:
                found[k] = (z, residual, _m if _m == "symbolic" else method)
            return
    found.append((z, residual, method))


def _used(system, params) -> dict:
    """The parameter values in force: the system's defaults overridden by ``params``
    (already checked by ``system.param_values``)."""
    return {**dict(getattr(system, "params", {}) or {}), **dict(params or {})}


# --------------------------------------------------------------------------- flows
class FlowSearch:
    def __init__(self, system, params, bounds):
        self.system = system
        self.params = params
        self.values = system.param_values(params)
        state = system.state_symbols
        self.names = tuple(s.name for s in state)
        given = check_bounds(bounds, self.names)
        self.explicit_bounds = bounds is not None
        n2 = len(state)
        num = dict(zip(system.param_symbols, [sp.Float(v) for v in self.values]))
        H = system.expr.xreplace(num)
        free = H.free_symbols
        self.fixed_idx = [i for i, s in enumerate(state) if s not in free]
        self.var_idx = [i for i in range(n2) if i not in self.fixed_idx]
        self.state = state
        # numbers come from the compiled kernels: the vector field is (dH/dp, -dH/dq) and its
        # Jacobian is J Hess H, J = [[0, I], [-I, 0]], so Hess H = -J (J Hess H)
        self.kernel = compile_kernel(system)
        n = system.dof
        self._J = np.block([[np.zeros((n, n)), np.eye(n)], [-np.eye(n), np.zeros((n, n))]])
        self._H = lambda *z: self.kernel.call("hamiltonian", np.array(z, dtype=float), self.values)
        rng = np.random.default_rng(12345)
        n = system.dof
        coord_idx = [i for i in range(n) if i not in self.fixed_idx]
        angles = {i: 2 * np.pi for i in _periodic_vars(self._H, n2, coord_idx, rng)}
        self.box = _Box(self.names, given, angles)
        exact = dict(zip(system.param_symbols, [exact_number(v) for v in self.values]))
        self.grad_exact = [sp.diff(system.expr.xreplace(exact), s) for s in state]

    # numeric pieces on the reduced unknowns
    def _full(self, x: np.ndarray) -> np.ndarray:
        z = self.box.centre.copy()
        z[self.var_idx] = x
        return z

    def grad(self, z):
        f = self.kernel.call("vector_field", np.asarray(z, dtype=float), self.values)
        n = len(f) // 2
        return np.concatenate([-f[n:], f[:n]])

    def hess(self, z):
        return -self._J @ self.kernel.call("jacobian", np.asarray(z, dtype=float), self.values)

    def _fun(self, x):
        return self.grad(self._full(x))[self.var_idx]

    def _jac(self, x):
        return self.hess(self._full(x))[np.ix_(self.var_idx, self.var_idx)]

    def _newton(self, x0):
        with np.errstate(all="ignore"), warnings.catch_warnings():
            warnings.simplefilter("ignore")
            try:
                sol = optimize.root(self._fun, x0, jac=self._jac, method="hybr", options={"xtol": 1e-13})
            except (ValueError, ZeroDivisionError, OverflowError, FloatingPointError, TypeError):
                return None
            x = sol.x
            if not np.all(np.isfinite(x)):
                return None
            # a few plain Newton steps polish what hybr returns
            for _ in range(3):
                g = self._fun(x)
                Jm = self._jac(x)
                if not (np.all(np.isfinite(g)) and np.all(np.isfinite(Jm))):
                    return None
                try:
                    dx = np.linalg.solve(Jm, -g)
                except np.linalg.LinAlgError:
                    break
                if not np.all(np.isfinite(dx)) or np.max(np.abs(dx)) > 1e-3 * (1 + np.max(np.abs(x))):
                    break
                x = x + dx
            g = self._fun(x)
            Jm = self._jac(x)
        if not (np.all(np.isfinite(g)) and np.all(np.isfinite(Jm))):
            return None
        res = float(np.max(np.abs(g))) if len(g) else 0.0
        tol = RESIDUAL * (1.0 + (np.max(np.abs(Jm)) if Jm.size else 0.0) * (1.0 + np.max(np.abs(x), initial=0.0)))
        return (x, res) if res <= tol else None

    def _symbolic(self):
        """Real solutions from sympy for small polynomial systems, else None."""
        unknowns = [self.state[i] for i in self.var_idx]
        eqs = [sp.expand(self.grad_exact[i]) for i in self.var_idx]
        eqs = [e for e in eqs if e != 0]
        if not eqs or not all(e.is_polynomial(*unknowns) for e in eqs):
            return None
        try:
            polys = [sp.Poly(e, *unknowns) for e in eqs]
        except sp.PolynomialError:
            return None
        if not all(p.domain.is_QQ or p.domain.is_ZZ for p in polys):
            return None
        degrees = [p.total_degree() for p in polys]
        if max(degrees) > MAX_DEGREE or math.prod(degrees) > MAX_BEZOUT:
            return None
        try:
            solutions = sp.solve_poly_system(polys, *unknowns)
        except (NotImplementedError, sp.PolynomialError, ValueError, TypeError):
            return None
        if solutions is None:
            return None
        out = []
        for sol in solutions:
            try:
                vals = [complex(sp.N(v, 30)) for v in sol]
            except (TypeError, ValueError):
                return None  # free symbols left: not zero-dimensional
            if all(abs(v.imag) <= 1e-12 * (1.0 + abs(v.real)) for v in vals):
                out.append(np.array([v.real for v in vals]))
        return out

    def run(self, starts: int, seed) -> list[Equilibrium]:
        found: list = []
        symbolic = self._symbolic() if self.var_idx else None
        method = "symbolic"
        if not self.var_idx:
            candidates = [(np.zeros(0), 0.0)]
        elif symbolic is not None:
            candidates = []
            for x0 in symbolic:
                polished = self._newton(x0)
                candidates.append(polished if polished is not None else (x0, float(np.max(np.abs(self._fun(x0))))))
        else:
            method = "newton"
            candidates = []
            for z0 in self.box.random(starts, seed):
                r = self._newton(z0[self.var_idx])
                if r is not None:
                    candidates.append(r)
        keep_all = method == "symbolic" and not self.explicit_bounds
        directions = []
        for x, res in candidates:
            x, dirs = self._on_line(x)
            z = self.box.reduce(self._full(x))
            if keep_all or self.box.inside(z):
                before = len(found)
                _add_unique(found, z, res, method, self.box)
                if len(found) > before:
                    directions.append(dirs)
        out = [self._make(z, res, m, d) for (z, res, m), d in zip(found, directions)]
        out.sort(key=lambda e: (e.energy, tuple(e.state)))
        return out

    def _on_line(self, x):
        """Straight lines of equilibria through ``x`` (e.g. a translation symmetry).

        Null directions ``v`` of the Hessian along which grad H stays zero at distances
        0.1 and 0.5 (times 1 + |x|) are taken as lines of equilibria; ``x`` is then moved
        along them to the point nearest the box centre, so one line gives one result.
        Returns the (possibly moved) point and the directions, shape (m, 2n).
        """
        nv = len(x)
        empty = np.zeros((0, len(self.names)))
        if nv == 0:
            return x, empty
        Hs = self._jac(x)
        _, sv, vt = np.linalg.svd(Hs)
        scale = max(float(sv[0]), 1.0)
        null = vt[sv < ZERO_EIGENVALUE * scale]
        if not len(null):
            return x, empty
        size = 1.0 + float(np.max(np.abs(x)))
        tol = RESIDUAL * (1.0 + scale * size)
        lines = []
        with np.errstate(all="ignore"):
            for v in null:
                ok = all(np.all(np.abs(self._fun(x + sgn * d * size * v)) <= tol)
                         for d in (0.1, 0.5) for sgn in (1.0, -1.0))
                if ok:
                    lines.append(v)
        if not lines:
            return x, empty
        D = np.array(lines)
        centre = self.box.centre[self.var_idx]
        moved = x - D.T @ (D @ (x - centre))
        # judged at the moved point's own size: a far-away point where the gradient fades
        # (Newton run off to infinity) has no line to carry onto the box
        near = RESIDUAL * (1.0 + scale * (1.0 + float(np.max(np.abs(moved)))))
        with np.errstate(all="ignore"):
            if np.all(np.abs(self._fun(moved)) <= min(tol, near)):
                x = moved
        full = np.zeros((len(D), len(self.names)))
        full[:, self.var_idx] = D
        return x, full

    def _make(self, z, res, method, directions=None) -> Equilibrium:
        n = self.system.dof
        Hs = self.hess(z)
        J = np.block([[np.zeros((n, n)), np.eye(n)], [-np.eye(n), np.zeros((n, n))]])
        lam, stability = classify_flow(J @ Hs)
        energy = float(self.system.energy(z, self.params))
        return Equilibrium(state=z, energy=energy, eigenvalues=lam, stability=stability, names=self.names,
                           method=method, residual=res, free=tuple(self.names[i] for i in self.fixed_idx),
                           directions=np.zeros((0, len(z))) if directions is None else directions,
                           system_name=str(getattr(self.system, "name", "") or ""),
                           params=_used(self.system, self.params))


# --------------------------------------------------------------------------- maps
def map_fixed_points(system, params, bounds, starts, seed) -> list[Equilibrium]:
    """Fixed points z = M(z) (modulo the map's modulus), by multi-start Newton on the wrapped
    residual ``wrap(M(z) - z)``, whose Jacobian is ``DM - I``."""
    state = system.state_symbols
    names = tuple(s.name for s in state)
    given = check_bounds(bounds, names)
    values = system.param_values(params)
    kernel = compile_kernel(system)
    n2 = len(state)
    periods = tuple(getattr(system, "modulus", None) or (None,) * n2)
    lows = tuple(getattr(system, "modulus_low", None) or (0.0,) * n2)
    periodic = {i: float(periods[i]) for i in range(n2) if periods[i] is not None}
    box = _Box(names, given, periodic, lows={i: float(lows[i] or 0.0) for i in periodic})

    def step(z):
        return kernel.call("map_step", np.asarray(z, dtype=float), values)

    def residual(z):
        d = step(z) - z
        for i, period in periodic.items():
            d[i] -= period * np.round(d[i] / period)
        return d

    def jacobian(z):
        return kernel.call("map_jacobian", np.asarray(z, dtype=float), values) - np.eye(n2)

    found: list = []
    for z0 in box.random(starts, seed):
        with np.errstate(all="ignore"), warnings.catch_warnings():
            warnings.simplefilter("ignore")
            try:
                sol = optimize.root(residual, z0, jac=jacobian, method="hybr", options={"xtol": 1e-13})
            except (ValueError, ZeroDivisionError, OverflowError, FloatingPointError, TypeError):
                continue
            z = sol.x
            if not np.all(np.isfinite(z)):
                continue
            r = residual(z)
        res = float(np.max(np.abs(r)))
        if not np.isfinite(res) or res > RESIDUAL * (1.0 + np.max(np.abs(z))):
            continue
        z = box.reduce(z)
        if box.inside(z):
            _add_unique(found, z, res, "newton", box)
    out = []
    for z, res, method in found:
        lam, stability = classify_map(kernel.call("map_jacobian", np.asarray(z, dtype=float), values))
        out.append(Equilibrium(state=z, energy=float("nan"), eigenvalues=lam, stability=stability,
                               names=names, method=method, residual=res, directions=np.zeros((0, n2)),
                               system_name=str(getattr(system, "name", "") or ""), params=_used(system, params)))
    out.sort(key=lambda e: tuple(e.state))
    return out
