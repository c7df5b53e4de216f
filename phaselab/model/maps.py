"""Symplectic maps given by symbolic update rules.

A map sends a state ``z = (q1..qn, p1..pn)`` to a new state ``z'``. Its rules can be given
in two ways:

* **simultaneous**: a sequence of ``2n`` expressions, the new values of ``(q1..qn, p1..pn)``
  in state order, every one written in the *old* values;
* **sequential**: an ordered sequence of ``(target, expression)`` pairs (or a dict, taken in
  its insertion order). The assignments are applied one after another, so an expression may
  use values already updated by earlier assignments, as in a kick followed by a drift::

      [("p", "p + K*sin(q)"),   # p' = p + K sin q
       ("q", "q + p")]          # q' = q + p'   (p is the new p here)

  A target may be assigned more than once (kick-drift-kick compositions); a component
  never assigned keeps its value.

Either way :attr:`SymplecticMap.update` holds ``2n`` expressions in the old variables,
in state order, obtained by substitution. On construction the Jacobian determinant of the
map is checked to be 1 (symbolically when sympy can show it, else numerically at random
sample points); a map that is not area-preserving is refused. A map of ``2n >= 4``
dimensions must moreover be symplectic, ``M^T J M = J`` for its Jacobian ``M`` at sample
points (:mod:`phaselab.model.symplectic`): one that only preserves volume is refused. For
one degree of freedom the two checks are the same.

``SymplecticMap`` names what is checked; ``AreaPreservingMap``, its earlier name, stays as an
alias of the same class (public surface, kept for existing code and study files).
Maps built from named elements (drifts, thin kicks, linear matrices) are in
:mod:`phaselab.model.elements`.
"""

from __future__ import annotations

import hashlib
from functools import cached_property
from typing import Mapping

import numpy as np
import sympy as sp

from phaselab.errors import ModelError
from phaselab.model.derivatives import KernelDerivatives, map_derivatives
from phaselab.model.angles import declared_angles
from phaselab.model.system import PhaseSpaceSystem
from phaselab.model.numeric import numeric_function
from phaselab.model.limits import (EXPAND_MAX_TERMS, MAX_TREE_NODES, derivative_size_bound, expanded_terms,
                                   plain_det, tree_size, work_problem)
from phaselab.model.params import Parameter, finite_number, make_parameters
from phaselab.model.parser import parse_expression, size_problem
from phaselab.model.symplectic import check_determinant, check_symplectic, symplectic_form
from phaselab.model.zero import zero_check

#: number of random points used when the determinant cannot be simplified to 1
N_SAMPLES = 20
#: tolerance of the numerical determinant check, |det - 1| <= DET_TOL * max(1, |terms|)
DET_TOL = 1e-9
#: determinants with more operations than this are not expanded (numerical check instead)
SIMPLIFY_MAX_OPS = 400
#: most state components whose Jacobian determinant is formed symbolically; larger maps are
#: checked with the Jacobian evaluated at sample points
SYMBOLIC_DET_MAX_COMPONENTS = 6
#: most state components of a map (12 degrees of freedom)
MAX_COMPONENTS = 24
#: most nodes (counted as trees) of all the Jacobian's entries together
MAX_JACOBIAN_NODES = 200_000


class SymplecticMap(PhaseSpaceSystem):
    """A symplectic map of phase space (area-preserving for one degree of freedom).

    ``AreaPreservingMap`` is the same class under its earlier name.

    Parameters
    ----------
    update : sequence
        The rules, either ``2n`` expressions (simultaneous, in state order) or ``(target,
        expression)`` pairs / a dict (sequential; see the module docstring). Expressions are
        sympy expressions or strings read by the safe parser.
    coords, momenta : sequence of str or sympy.Symbol
        The coordinates and momenta, in state order.
    params : mapping, optional
        Parameters with defaults, ``{"K": 0.9}`` or ``{"K": (0.9, (0.0, 5.0))}``.
    modulus : None, number, or sequence, optional
        Wrapping of each state component after every iterate: ``None`` (no wrapping), a
        period ``P`` (values wrapped into ``[0, P)``) or an interval tuple ``(low, high)``
        (wrapped into ``[low, high)``). A single period or interval tuple applies to every
        component; a *list* gives one entry per state component, e.g.
        ``[2*pi, None]`` or ``[(-pi, pi), 2*pi]``. Numbers may be strings such as ``"2*pi"``.
    name : str, optional
        A label for plots and files.
    angles : mapping or sequence of str, optional
        The same wrapping in the form flows declare it (:class:`~phaselab.Hamiltonian`):
        ``{"q": 2*pi}`` wraps ``q`` into ``[-pi, pi)``, ``{"q": (0, 2*pi)}`` into ``[0, 2 pi)``;
        not together with ``modulus``. Either fills :attr:`angle_intervals` / ``angles``.
    units : mapping of str to str, optional
        Unit strings of components and parameters (the time is the iterate count, ``"t"``).
    reversor : sequence, optional
        An involution R of phase space that reverses the map, R M R = M^-1, given like
        ``update`` (2n expressions, or (target, expression) pairs). Its fixed sets are the
        symmetry lines on which symmetric periodic orbits are searched (Greene's method, see
        :func:`phaselab.periodic_orbit` with ``symmetric=True``). For the kick-then-drift
        standard map, ``["-q", "p + K*sin(q)"]``. Checked at sample points.

    Attributes
    ----------
    update : list of sympy.Expr
        The ``2n`` new values in the old variables, state order.
    modulus : tuple of (float or None)
        The period of each state component (``None``: not wrapped).
    modulus_low : tuple of (float or None)
        The low end of each wrapped component's interval.
    determinant : sympy.Expr or None
        The Jacobian determinant as found (``1`` when shown symbolically; None for maps of
        more than :data:`SYMBOLIC_DET_MAX_COMPONENTS` components, checked numerically).
    area_check : str
        ``"symbolic"`` or ``"numeric"``: how det = 1 was established.
    symplectic_defect : float
        For ``2n >= 4``: the worst relative ``max|M^T J M - J|`` over the sample points
        (:func:`phaselab.model.symplectic.check_symplectic`); 0.0 for one degree of
        freedom, where det = 1 is the whole condition.

    Raises
    ------
    ModelError
        For rules that do not match the state, unknown symbols, a map whose Jacobian
        determinant is not 1 (the message shows the determinant found), a map of 2n >= 4
        dimensions that is not symplectic (the message says when it only preserves
        volume, with the point and the defect), more than
        :data:`MAX_COMPONENTS` state components, or sequential rules that compose into an
        expression beyond :data:`phaselab.model.limits.MAX_TREE_NODES` nodes.
    """

    kind = "map"

    time = None
    period = None
    is_autonomous = True

    def __init__(self, update, coords, momenta, *, params=None, modulus=None, name=None, reversor=None,
                 angles=None, units=None):
        self._set_state(coords, momenta, "a map")
        if len(self.state_symbols) > MAX_COMPONENTS:
            raise ModelError(f"a map has at most {MAX_COMPONENTS} state components; this one has "
                             f"{len(self.state_symbols)}")
        names = [s.name for s in self.state_symbols]
        dupes = sorted({n for n in names if names.count(n) > 1})
        if dupes:
            raise ModelError(f"names used twice among coordinates and momenta: {', '.join(dupes)}")
        self.parameters: tuple[Parameter, ...] = make_parameters(params, set(names))
        self.name = name or "map"
        self._known = {s.name: s for s in self.state_symbols}
        self._known.update({p.name: p.symbol for p in self.parameters})
        self.update: list[sp.Expr] = self._rules(update)
        self.modulus, self.modulus_low = self._modulus(self._modulus_of(modulus, angles))
        self.angle_intervals = {s.name: (low, low + period) for s, period, low in
                                zip(self.state_symbols, self.modulus, self.modulus_low) if period is not None}
        self._set_units(units, None)
        self._check_jacobian_size()
        self.kernel_derivatives  # the compiled kernels' expressions, formed and checked now
        self.symplectic_defect = self._check_symplectic()
        self.determinant, self.area_check = self._check_area()
        self.reversor = None if reversor is None else self._check_reversor(reversor)

    # ----------------------------------------------------------------- construction helpers
    def _expr(self, expr, what: str) -> sp.Expr:
        if isinstance(expr, str):
            expr = parse_expression(expr, symbols=self._known, allowed=set(self._known))
        elif isinstance(expr, (int, float)) and not isinstance(expr, bool):
            expr = sp.Float(float(expr)) if not float(expr).is_integer() else sp.Integer(int(expr))
        elif not isinstance(expr, sp.Expr):
            raise ModelError(f"{what} must be a sympy expression or a string, got {type(expr).__name__}")
        allowed = set(self._known.values())
        unknown = sorted(s.name for s in expr.free_symbols if s not in allowed)
        if unknown:
            raise ModelError(f"unknown symbols in {what}: {', '.join(unknown)}; declare them as "
                             "coordinates, momenta or parameters")
        problem = work_problem(expr)
        if problem:
            raise ModelError(f"{what} is too large to differentiate and compile: it has {problem}")
        return expr

    def _target(self, target) -> sp.Symbol:
        name = target.name if isinstance(target, sp.Symbol) else target
        if not isinstance(name, str) or name not in self._known or name not in {
                s.name for s in self.state_symbols}:
            raise ModelError(f"update target {target!r} is not a coordinate or momentum of this map; "
                             f"the state is {', '.join(s.name for s in self.state_symbols)}")
        return self._known[name]

    def _rules(self, update) -> list[sp.Expr]:
        state = self.state_symbols
        if isinstance(update, Mapping):
            update = list(update.items())
        if isinstance(update, (str, sp.Expr)) or not hasattr(update, "__iter__"):
            raise ModelError("update must be a sequence of 2n expressions or of (target, expression) pairs")
        update = list(update)
        if not update:
            raise ModelError("update has no rules")
        pairs = [isinstance(u, (tuple, list)) and len(u) == 2 for u in update]
        if all(pairs):
            current = {s: s for s in state}
            for target, expr in update:
                sym = self._target(target)
                new = self._expr(expr, f"the update of {sym.name}")
                # express the rule in the old variables: substitute the values so far
                current[sym] = self._bounded(new.xreplace(current), sym)
            return [current[s] for s in state]
        if any(pairs):
            raise ModelError("update mixes (target, expression) pairs with bare expressions; use one form")
        if len(update) != len(state):
            raise ModelError(f"update gives {len(update)} expressions but the state has {len(state)} "
                             f"components ({', '.join(s.name for s in state)})")
        return [self._expr(e, f"the update of {s.name}") for s, e in zip(state, update)]

    def _bounded(self, expr: sp.Expr, target: sp.Symbol) -> sp.Expr:
        """Refuse a composed rule that is too large to work with (each substitution can
        double its size) or that holds a number or exponent beyond the parser's limits."""
        size = tree_size(expr, limit=MAX_TREE_NODES)
        if size > MAX_TREE_NODES:
            raise ModelError(
                f"the update rules of map {self.name!r} compose into an expression for "
                f"{target.name} of more than {MAX_TREE_NODES} nodes; write the map with fewer "
                "nested substitutions")
        problem = size_problem(expr) or work_problem(expr)
        if problem:
            raise ModelError(f"the update rules of map {self.name!r} compose into an expression for "
                             f"{target.name} that holds {problem}")
        return expr

    def _number(self, value, what: str) -> float:
        if isinstance(value, str):
            value = parse_expression(value, symbols={}, allowed=set())
        return finite_number(value, what, ModelError)

    def _modulus_of(self, modulus, angles):
        """``angles=`` (the flows' form, any state component of a map) as a modulus list."""
        if angles is None:
            return modulus
        if modulus is not None:
            raise ModelError("give either modulus= or angles= (they are the same wrapping), not both")
        names = [s.name for s in self.state_symbols]
        given = declared_angles(angles, names, names)
        return [given.get(n) for n in names]

    def _modulus(self, modulus):
        n = len(self.state_symbols)
        if modulus is None:
            return (None,) * n, (None,) * n
        single = isinstance(modulus, (int, float, str, sp.Expr)) or (
            isinstance(modulus, tuple) and len(modulus) == 2
            and all(isinstance(m, (int, float, str, sp.Expr)) for m in modulus))
        entries = [modulus] * n if single else list(modulus)
        if len(entries) != n:
            raise ModelError(f"modulus has {len(entries)} entries but the state has {n} components")
        periods, lows = [], []
        for sym, entry in zip(self.state_symbols, entries):
            if entry is None:
                periods.append(None)
                lows.append(None)
                continue
            if isinstance(entry, (tuple, list)):
                if len(entry) != 2:
                    raise ModelError(f"modulus of {sym.name} must be a period or (low, high), got {entry!r}")
                low = self._number(entry[0], f"low end of the modulus of {sym.name}")
                high = self._number(entry[1], f"high end of the modulus of {sym.name}")
            else:
                low, high = 0.0, self._number(entry, f"modulus of {sym.name}")
            if not high > low:
                raise ModelError(f"modulus of {sym.name} must be a positive period, got [{low}, {high})")
            periods.append(high - low)
            lows.append(low)
        return tuple(periods), tuple(lows)

    # ----------------------------------------------------------------- reversor
    def _check_reversor(self, rules) -> list:
        """The reversor's rules, checked at sample points: R(R(z)) = z and M(R(M(z))) = R(z)
        (equivalent to R M R = M^-1 for an involution), both up to the modulus."""
        exprs = self._rules(rules)
        args = list(self.state_symbols) + list(self.param_symbols)
        r_fn = numeric_function(args, exprs)
        rng = np.random.default_rng(20241202)
        z = self._sample_states(rng, N_SAMPLES)
        k = self._sample_params(rng, N_SAMPLES)

        def apply(fn, states, prm):
            cols = fn(*[states[..., i] for i in range(states.shape[-1])], *prm)
            return np.stack([np.broadcast_to(np.asarray(c, dtype=float), states.shape[:-1]) for c in cols],
                            axis=-1)

        worst = 0.0
        with np.errstate(all="ignore"):
            for zi, ki in zip(z, k):
                zi = zi[None, :]
                rz = apply(r_fn, zi, ki)
                back = apply(r_fn, rz, ki)
                mrm = apply(self._step_fn, apply(r_fn, apply(self._step_fn, zi, ki), ki), ki)
                for a, b in ((back, zi), (mrm, rz)):
                    gap = self._wrapped_gap(a - b)
                    if np.isfinite(gap):
                        worst = max(worst, gap)
        if worst > 1e-8:
            raise ModelError(f"the reversor of map {self.name!r} is not an involution that reverses the map "
                             f"(R(R(z)) = z and M(R(M(z))) = R(z) fail by {worst:.3g} at sample points)")
        return exprs

    def _wrapped_gap(self, diff) -> float:
        diff = np.array(diff, dtype=float)
        for i, period in enumerate(self.modulus):
            if period is not None:
                diff[..., i] = (diff[..., i] + 0.5 * period) % period - 0.5 * period
        return float(np.max(np.abs(diff)))

    # ----------------------------------------------------------------- area preservation
    @cached_property
    def jacobian_matrix(self) -> sp.Matrix:
        """The symbolic Jacobian d z' / d z, shape (2n, 2n)."""
        return sp.Matrix([[sp.diff(e, x) for x in self.state_symbols] for e in self.update])

    @cached_property
    def kernel_derivatives(self) -> KernelDerivatives:
        """The update rules and their Jacobian in the kernels' renamed symbols
        (:mod:`phaselab.model.derivatives`); formed and checked when the map is made."""
        return map_derivatives(self.update, self.state_symbols, self.param_symbols)

    def _check_jacobian_size(self) -> None:
        # sympy's time to form a derivative grows faster than its size: a Jacobian far past
        # the budget on the estimate (model/limits.py) is refused before it is formed
        guessed = 0
        for e in self.update:
            for x in self.state_symbols:
                guessed += derivative_size_bound(e, x, limit=2 * MAX_JACOBIAN_NODES - guessed)
                if guessed > 2 * MAX_JACOBIAN_NODES:
                    raise ModelError(f"the Jacobian of map {self.name!r} would have far more than "
                                     f"{MAX_JACOBIAN_NODES} nodes (estimated before forming it); the "
                                     "map is too large to check and compile")
        size = 0
        for entry in self.jacobian_matrix:
            size += tree_size(entry, limit=MAX_JACOBIAN_NODES)
            if size > MAX_JACOBIAN_NODES:
                raise ModelError(f"the Jacobian of map {self.name!r} has more than {MAX_JACOBIAN_NODES} "
                                 "nodes; the map is too large to check and compile")

    def _check_symplectic(self) -> float:
        """``M^T J M = J`` at sample points for 2n >= 4 (refused otherwise); 0.0 for 2n = 2."""
        if len(self.state_symbols) < 4:
            return 0.0
        rng = np.random.default_rng(20261205)
        args = list(self.state_symbols) + list(self.param_symbols)
        return check_symplectic(self.jacobian_matrix, args, self._sample_states(rng, 4 * N_SAMPLES),
                                self._sample_params(rng, 4 * N_SAMPLES), self.name)

    def _check_area(self):
        """det = 1, symbolically when cheap, else at sample points. For 2n >= 4 the symplectic
        check has already passed, which implies det = 1: the numerical fallback is skipped."""
        implied = len(self.state_symbols) >= 4
        if len(self.state_symbols) > SYMBOLIC_DET_MAX_COMPONENTS:
            if not implied:
                self._numeric_det_check(None)
            return None, "numeric"
        det = plain_det(self.jacobian_matrix)
        if tree_size(det, limit=MAX_TREE_NODES) > MAX_TREE_NODES:
            if not implied:
                self._numeric_det_check(None)
            return None, "numeric"
        residual = det - 1
        if (expanded_terms(residual) <= EXPAND_MAX_TERMS
                and sp.count_ops(residual) <= SIMPLIFY_MAX_OPS):
            residual = sp.expand(residual)
            if residual == 0:
                return sp.Integer(1), "symbolic"
            if residual.is_number:
                # floating-point coefficients (a rotation matrix from cos and sin) leave a
                # round-off residual: judged with the tolerance of the numerical check
                off = complex(residual.evalf())
                if abs(off) <= DET_TOL:
                    return sp.Float(1.0 + off.real), "numeric"
                raise ModelError(
                    f"map {self.name!r} is not area-preserving: its Jacobian determinant is "
                    f"{complex(residual.evalf() + 1).real:.12g}, not 1")
            det = residual + 1
        if not implied:
            self._numeric_det_check(det)
        return det, "numeric"

    def _sample_states(self, rng, count: int) -> np.ndarray:
        n = len(self.state_symbols)
        z = rng.uniform(-2.0, 2.0, size=(count, n))
        for i, (period, low) in enumerate(zip(self.modulus, self.modulus_low)):
            if period is not None:
                z[:, i] = low + period * rng.uniform(0.0, 1.0, size=count)
        return z

    def _sample_params(self, rng, count: int) -> np.ndarray:
        out = np.empty((count, len(self.parameters)))
        for j, prm in enumerate(self.parameters):
            if prm.range is not None:
                out[:, j] = rng.uniform(prm.range[0], prm.range[1], size=count)
            else:
                scale = max(abs(prm.default), 1.0)
                out[:, j] = prm.default + 0.5 * scale * rng.uniform(-1.0, 1.0, size=count)
            out[0, j] = prm.default
        return out

    def _numeric_det_check(self, det: sp.Expr | None) -> None:
        """Check det = 1 at sample states and parameters (:func:`phaselab.model.symplectic.check_determinant`)."""
        rng = np.random.default_rng(20240607)
        n = len(self.state_symbols)
        shown = _short(det) if det is not None else f"(a {n} x {n} Jacobian)"
        check_determinant(self.name, self.jacobian_matrix, det, list(self.state_symbols) + list(self.param_symbols),
                          self._sample_states(rng, 4 * N_SAMPLES), self._sample_params(rng, 4 * N_SAMPLES),
                          shown, N_SAMPLES, DET_TOL)

    # ----------------------------------------------------------------- structure
    @cached_property
    def is_symplectic(self) -> bool:
        """True when J^T Omega J = Omega holds identically (for one degree of freedom this is
        the same as det J = 1). Each entry of the difference is tested with bounded work
        (:func:`phaselab.model.zero.zero_check`): a nonzero value at a sample point settles
        "not symplectic"."""
        omega = sp.Matrix(symplectic_form(self.dof).astype(int))
        J = self.jacobian_matrix
        diff = J.T * omega * J - omega
        return all(d == 0 or zero_check(d).zero for d in diff)

    # ----------------------------------------------------------------- numbers
    @cached_property
    def _step_fn(self):
        args = list(self.state_symbols) + list(self.param_symbols)
        return numeric_function(args, self.update)

    def wrap(self, states) -> np.ndarray:
        """Wrap the components that have a modulus into their intervals.

        Parameters
        ----------
        states : array_like, shape (..., 2n)

        Returns
        -------
        numpy.ndarray, same shape
        """
        z = np.array(states, dtype=float, copy=True)
        for i, (period, low) in enumerate(zip(self.modulus, self.modulus_low)):
            if period is not None:
                z[..., i] = low + np.mod(z[..., i] - low, period)
        return z

    def step(self, states, params=None) -> np.ndarray:
        """One iterate of a batch of states, evaluated with numpy (a reference; the compute
        layer uses the compiled kernels), wrapped by the modulus.

        Parameters
        ----------
        states : array_like, shape (n_orbits, 2n) or (2n,)
        params : mapping of str to float, optional

        Returns
        -------
        numpy.ndarray, same shape as ``states``
        """
        z = np.asarray(states, dtype=float)
        n = len(self.state_symbols)
        if z.shape[-1] != n:
            raise ModelError(f"states must have {n} columns ({', '.join(s.name for s in self.state_symbols)}), "
                             f"got shape {z.shape}")
        values = self.param_values(params)
        cols = self._step_fn(*[z[..., i] for i in range(n)], *values)
        out = np.stack([np.broadcast_to(np.asarray(c, dtype=float), z.shape[:-1]) for c in cols], axis=-1)
        return self.wrap(out)

    # ----------------------------------------------------------------- identity
    @cached_property
    def key(self) -> str:
        """A hash of the map's form (update rules, symbol order, parameters, modulus)."""
        parts = [self.kind, repr([sp.srepr(e) for e in self.update]),
                 repr([s.name for s in self.state_symbols]), repr([p.name for p in self.parameters]),
                 repr(self.modulus), repr(self.modulus_low)]
        return hashlib.sha256("|".join(parts).encode()).hexdigest()[:20]

    def __repr__(self) -> str:
        rules = "; ".join(f"{s}' = {e}" for s, e in zip(self.state_symbols, self.update))
        params = ", ".join(f"{k}={v:g}" for k, v in self.params.items())
        return f"SymplecticMap({self.name!r}: {rules}" + (f"; {params}" if params else "") + ")"

    def _repr_latex_(self) -> str:
        rows = r" \\ ".join(f"{sp.latex(s)}' &= {sp.latex(e)}" for s, e in zip(self.state_symbols, self.update))
        return rf"$\begin{{aligned}} {rows} \end{{aligned}}$"


AreaPreservingMap = SymplecticMap
"""The earlier name of :class:`SymplecticMap` (the same class), kept on the public surface."""


def _short(expr) -> str:
    text = str(expr)
    return text if len(text) <= 120 else text[:117] + "..."
