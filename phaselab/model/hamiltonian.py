"""The symbolic Hamiltonian system: H(q, p; params, t) and what follows from its form."""

from __future__ import annotations

import hashlib
from functools import cached_property
import numpy as np
import sympy as sp
from sympy.core.function import AppliedUndef

from phaselab.errors import ModelError
from phaselab.model.angles import declared_angles
from phaselab.model.derivatives import KernelDerivatives, flow_derivatives
from phaselab.model.limits import work_problem
from phaselab.model.numeric import numeric_function
from phaselab.model.params import Parameter, make_parameters
from phaselab.model.parser import parse_expression
from phaselab.model.system import PhaseSpaceSystem, as_symbols


class Hamiltonian(PhaseSpaceSystem):
    """A Hamiltonian system with ``n`` degrees of freedom.

    Parameters
    ----------
    expr : sympy.Expr or str
        H as a sympy expression, or as a string parsed by the safe parser
        (:func:`phaselab.model.parser.parse_expression`).
    coords, momenta : sequence of str or sympy.Symbol
        The generalized coordinates and their conjugate momenta, in state order.
    params : mapping, optional
        Parameters with defaults, ``{"mu": 0.01}`` or ``{"mu": (0.01, (0.0, 0.1))}`` with a
        slider range.
    time : str or sympy.Symbol, optional
        The time symbol when H depends on time explicitly.
    period : float, str or sympy.Expr, optional
        The driving period of an explicitly time-periodic H (may involve parameters); used
        by stroboscopic sections.
    name : str, optional
        A label for plots and files.
    angles : mapping or sequence of str, optional
        Coordinates that are angles: ``{"theta": 2*pi}`` (a period: wrapped into
        ``[-period/2, period/2)`` where shown or saved), ``{"theta": (0, 2*pi)}`` (an
        interval), or a list of names (period 2 pi each). See :mod:`phaselab.model.angles`.
    units : mapping of str to str, optional
        Unit strings of coordinates, momenta, the time (``"t"`` unless ``time`` names it) and
        parameters, ``{"x": "m", "px": "kg m/s", "t": "s"}``; checked by
        :func:`phaselab.model.units.parse_unit` and carried into axis labels and files.

    Notes
    -----
    A state is ordered ``(q1..qn, p1..pn)``; a batch of states has shape ``(n_orbits, 2n)``.
    """

    kind = "flow"

    def __init__(self, expr, coords, momenta, *, params=None, time=None, period=None, name=None,
                 angles=None, units=None):
        self._set_state(coords, momenta, "a Hamiltonian")
        self.time = as_symbols(time, "time")[0] if time is not None else None
        names = [s.name for s in self.coords + self.momenta] + ([self.time.name] if self.time else [])
        dupes = sorted({n for n in names if names.count(n) > 1})
        if dupes:
            raise ModelError(f"names used twice among coordinates, momenta and time: {', '.join(dupes)}")
        self.parameters: tuple[Parameter, ...] = make_parameters(params, set(names))
        known = {s.name: s for s in self.coords + self.momenta}
        if self.time is not None:
            known[self.time.name] = self.time
        known.update({p.name: p.symbol for p in self.parameters})
        self.expr = self._to_expr(expr, known, "Hamiltonian")
        problem = work_problem(self.expr)
        if problem:
            raise ModelError(f"the Hamiltonian is too large to differentiate and compile: it has {problem}")
        self.period = None
        if period is not None:
            self.period = self._to_expr(period, {p.name: p.symbol for p in self.parameters}, "period")
            if self.time is None:
                raise ModelError("a driving period was given but the Hamiltonian has no time symbol")
        self.name = name or "H"
        self._declare(angles, units)
        # the derivatives the compiled kernels need, formed now so that a model that cannot be
        # compiled is refused when it is made (a driven system: those of its extended form);
        # a model holding functions without a definition (V(r)) is symbolic only
        self._extended_form = None
        if not self.expr.atoms(AppliedUndef):
            if self.is_autonomous:
                self.kernel_derivatives
            else:
                self.extended()

    def _declare(self, angles, units) -> None:
        """Set the angles and units declared with the model (checked)."""
        self.angle_intervals = declared_angles(angles, [s.name for s in self.state_symbols],
                                               [s.name for s in self.coords])
        self._set_units(units, self.time.name if self.time is not None else None)

    # ----------------------------------------------------------------- construction helpers
    def _to_expr(self, expr, known: dict, what: str) -> sp.Expr:
        if isinstance(expr, str):
            expr = parse_expression(expr, symbols=known, allowed=set(known))
        elif isinstance(expr, (int, float)):
            expr = sp.sympify(float(expr))  # a plain number, not a user string
        elif not isinstance(expr, sp.Expr):
            raise ModelError(f"{what} must be a sympy expression or a string, got {type(expr).__name__}")
        allowed = set(known.values())
        unknown = sorted(s.name for s in expr.free_symbols if s not in allowed)
        if unknown:
            raise ModelError(
                f"unknown symbols in the {what}: {', '.join(unknown)}; declare them as coordinates, "
                "momenta, time or parameters")
        return expr

    @classmethod
    def from_lagrangian(cls, L, coords, velocities, *, params=None, time=None, period=None, name=None,
                        momenta=None, angles=None, units=None) -> "Hamiltonian":
        """Build H from a Lagrangian by the Legendre transform.

        Parameters
        ----------
        L : sympy.Expr or str
            The Lagrangian L(q, qdot; params, t).
        coords, velocities : sequence of str or sympy.Symbol
            The generalized coordinates and the symbols standing for their time derivatives.
        momenta : sequence of str or sympy.Symbol, optional
            Names for the conjugate momenta; default ``p_<coord>``.
        angles, units : optional
            As for :class:`Hamiltonian` (units of the momenta under their names).

        Raises
        ------
        ModelError
            If the Hessian of L in the velocities is singular (a degenerate Lagrangian) or
            the momenta cannot be solved for the velocities.
        """
        from phaselab.model.lagrangian import legendre_transform

        ham = legendre_transform(cls, L, coords, velocities, params=params, time=time,
                                 period=period, name=name, momenta=momenta)
        ham._declare(angles, units)
        return ham

    # ----------------------------------------------------------------- structure
    @property
    def is_autonomous(self) -> bool:
        """True when H has no explicit time dependence."""
        return self.time is None or self.time not in self.expr.free_symbols

    @cached_property
    def is_separable(self) -> bool:
        """True when H = T(p) + V(q) (time treated as a parameter).

        Decided by d2H/dq_i dp_j == 0 for every pair, differentiating without expanding: a
        nonzero value of a mixed derivative at a sample point settles "not separable";
        derivatives that vanish everywhere they are tried are confirmed with bounded work
        (see :func:`phaselab.model.zero.zero_check`). :attr:`separable_check` says whether
        the answer is symbolic or rests on random points.
        """
        return self._separability.zero

    @property
    def separable_check(self) -> str:
        """``"symbolic"`` or ``"numeric"``: how :attr:`is_separable` was decided."""
        return self._separability.how

    @cached_property
    def _separability(self):
        from phaselab.model.zero import ZeroCheck, zero_check

        how = "symbolic"
        for q in self.coords:
            dq = sp.diff(self.expr, q)
            if dq == 0:
                continue
            present = dq.free_symbols
            for p in self.momenta:
                if p not in present:
                    continue
                check = zero_check(sp.diff(dq, p))
                if not check.zero:
                    return ZeroCheck(False, check.how)
                if check.how == "numeric":
                    how = "numeric"
        return ZeroCheck(True, how)

    @property
    def cyclic_coordinates(self) -> tuple[sp.Symbol, ...]:
        """Coordinates absent from H; their conjugate momenta are conserved."""
        free = self.expr.free_symbols
        return tuple(q for q in self.coords if q not in free)

    def conserved(self) -> dict[str, sp.Expr]:
        """Quantities conserved because of the form of H.

        Returns
        -------
        dict of str to sympy.Expr
            The momentum of each cyclic coordinate (dp/dt = -dH/dq = 0), each coordinate whose
            conjugate momentum is absent from H (dq/dt = dH/dp = 0), and ``"H"`` itself when
            the system is autonomous.
        """
        free = self.expr.free_symbols
        out: dict[str, sp.Expr] = {}
        for q, p in zip(self.coords, self.momenta):
            if q not in free:
                out[p.name] = p
            if p not in free:
                out[q.name] = q
        if self.is_autonomous:
            out["H"] = self.expr
        return out

    def equations(self) -> list[sp.Eq]:
        """Hamilton's equations dq/dt = dH/dp, dp/dt = -dH/dq as sympy ``Eq`` objects."""
        t = self.time if self.time is not None else sp.Symbol("t", real=True)
        eqs = [sp.Eq(sp.Derivative(q, t), sp.diff(self.expr, p), evaluate=False)
               for q, p in zip(self.coords, self.momenta)]
        eqs += [sp.Eq(sp.Derivative(p, t), -sp.diff(self.expr, q), evaluate=False)
                for q, p in zip(self.coords, self.momenta)]
        return eqs

    def vector_field(self) -> list[sp.Expr]:
        """The right-hand side (dH/dp, -dH/dq) as a list of 2n expressions."""
        return ([sp.diff(self.expr, p) for p in self.momenta]
                + [-sp.diff(self.expr, q) for q in self.coords])

    # ----------------------------------------------------------------- time dependence
    def extended(self) -> "Hamiltonian":
        """The autonomous system in extended phase space.

        Time becomes a coordinate ``tau`` (named after the time symbol) with conjugate
        momentum ``p_<tau>``, and K = H(q, p, tau) + p_tau. K is conserved along orbits; tau
        advances at unit rate, so sections and integrators treat the result as autonomous.
        An autonomous system is returned unchanged.
        """
        if self.is_autonomous:
            return self
        if self._extended_form is not None:
            return self._extended_form
        tau = self.time
        p_tau = sp.Symbol(f"p_{tau.name}", real=True)
        ext = Hamiltonian(self.expr + p_tau, self.coords + (tau,), self.momenta + (p_tau,),
                          params=self.parameters, name=f"{self.name} (extended)")
        ext.period = self.period
        ext.angle_intervals = dict(self.angle_intervals)   # tau and p_tau are not angles
        ext.units = dict(self.units)
        ext.time_coordinate = self.dof  # index of tau among the coordinates
        ext.original = self
        self._extended_form = ext
        return ext

    @cached_property
    def kernel_derivatives(self) -> KernelDerivatives:
        """H, its gradient, the vector field and its Jacobian in the kernels' renamed symbols
        (:mod:`phaselab.model.derivatives`); formed and checked when the model is made.

        Raises
        ------
        ModelError
            For a time-dependent H (its kernels are those of :meth:`extended`).
        """
        if not self.is_autonomous:
            raise ModelError("this Hamiltonian depends on time explicitly; kernels are generated for "
                             "autonomous systems, so lift it with .extended() first")
        return flow_derivatives(self.expr, self.state_symbols, self.param_symbols)

    def driving_period(self, params=None) -> float:
        """The numerical driving period for the given parameters."""
        if self.period is None:
            raise ModelError(f"system {self.name!r} has no driving period")
        values = self.param_values(params)
        val = self.period.subs(dict(zip(self.param_symbols, values)))
        try:
            out = float(val)
        except TypeError:
            raise ModelError(f"the driving period {self.period} does not evaluate to a number") from None
        if not np.isfinite(out) or out <= 0:
            raise ModelError(f"the driving period must be positive and finite, got {out}")
        return out

    # ----------------------------------------------------------------- numbers
    @cached_property
    def _energy_fn(self):
        args = list(self.state_symbols) + list(self.param_symbols)
        if self.time is not None:
            args.append(self.time)
        return numeric_function(args, self.expr)

    def energy(self, states, params=None, t=0.0) -> np.ndarray:
        """H evaluated on a batch of states.

        Parameters
        ----------
        states : array_like, shape (n_orbits, 2n) or (2n,)
        params : mapping of str to float, optional
        t : float or array_like, optional
            Time, for an explicitly time-dependent H.

        Returns
        -------
        numpy.ndarray, shape (n_orbits,) or a float for a single state
        """
        z = np.asarray(states, dtype=float)
        single = z.ndim == 1
        z = np.atleast_2d(z)
        if z.shape[-1] != 2 * self.dof:
            raise ModelError(f"states must have {2 * self.dof} columns (q1..qn, p1..pn), got shape {z.shape}")
        values = self.param_values(params)
        args = [z[..., i] for i in range(2 * self.dof)] + list(values)
        if self.time is not None:
            args.append(t)
        e = np.broadcast_to(np.asarray(self._energy_fn(*args), dtype=float), z.shape[:-1]).copy()
        return float(e[0]) if single else e

    # ----------------------------------------------------------------- identity
    @cached_property
    def key(self) -> str:
        """A hash of the system's form (expression, symbol order, parameters), for caches."""
        parts = [self.kind, sp.srepr(self.expr), repr([s.name for s in self.state_symbols]),
                 repr([p.name for p in self.parameters]), repr(self.time.name if self.time else None)]
        return hashlib.sha256("|".join(parts).encode()).hexdigest()[:20]

    def __repr__(self) -> str:
        params = ", ".join(f"{k}={v:g}" for k, v in self.params.items())
        return (f"Hamiltonian({self.name!r}: H = {self.expr}; q = {list(self.coords)}, "
                f"p = {list(self.momenta)}" + (f"; {params}" if params else "") + ")")

    def _repr_latex_(self) -> str:
        return f"$H = {sp.latex(self.expr)}$"


