"""The Legendre transform from a Lagrangian L(q, qdot, t) to a Hamiltonian H(q, p, t)."""

from __future__ import annotations

import sympy as sp

from phaselab.errors import ModelError
from phaselab.model.params import make_parameters
from phaselab.model.system import as_symbols
from phaselab.model.parser import parse_expression
from phaselab.model.zero import identically_zero


def legendre_transform(cls, L, coords, velocities, params=None, time=None, period=None,
                       name=None, momenta=None):
    """Solve p = dL/dqdot for the velocities and build H = sum(p * qdot) - L.

    Parameters
    ----------
    cls : type
        The Hamiltonian class to build.
    L : sympy.Expr or str
    coords, velocities : sequence of str or sympy.Symbol
    momenta : sequence of str or sympy.Symbol, optional
        Default names ``p_<coord>``.

    Returns
    -------
    Hamiltonian
        With the Lagrangian kept as ``.lagrangian`` and the velocity map as
        ``.velocities_from_momenta``.

    Raises
    ------
    ModelError
        For a degenerate Lagrangian (det of d2L/dqdot2 is identically zero) or when the
        momentum equations cannot be solved for the velocities.
    """
    q = as_symbols(coords, "coordinates")
    v = as_symbols(velocities, "velocities")
    if len(q) != len(v):
        raise ModelError(f"{len(q)} coordinates but {len(v)} velocities; each coordinate needs one velocity")
    p = as_symbols(momenta, "momenta") if momenta is not None else tuple(
        sp.Symbol(f"p_{s.name}", real=True) for s in q)
    if len(p) != len(q):
        raise ModelError(f"{len(q)} coordinates but {len(p)} momentum names")
    t = as_symbols(time, "time")[0] if time is not None else None
    names = [s.name for s in q + v + p] + ([t.name] if t else [])
    parameters = make_parameters(params, set(names))
    known = {s.name: s for s in q + v}
    if t is not None:
        known[t.name] = t
    known.update({prm.name: prm.symbol for prm in parameters})
    if isinstance(L, str):
        L = parse_expression(L, symbols=known, allowed=set(known))
    elif not isinstance(L, sp.Expr):
        raise ModelError(f"the Lagrangian must be a sympy expression or a string, got {type(L).__name__}")
    unknown = sorted(s.name for s in L.free_symbols if s not in set(known.values()))
    if unknown:
        raise ModelError(f"unknown symbols in the Lagrangian: {', '.join(unknown)}")

    grad = [sp.diff(L, vi) for vi in v]
    hessian = sp.Matrix([[sp.diff(g, vj) for vj in v] for g in grad])
    det = hessian.det(method="berkowitz")
    if identically_zero(det):
        raise ModelError(
            "degenerate Lagrangian: the Hessian d2L/dqdot2 is singular, so the momenta "
            f"{', '.join(s.name for s in p)} cannot be solved for the velocities "
            f"{', '.join(s.name for s in v)} (a constrained or gauge system)")

    # p = dL/dv. For L quadratic in v (the mechanical case) this is linear: solve exactly.
    zero_v = {vi: 0 for vi in v}
    quadratic = all(sp.diff(h, vk) == 0 for h in hessian for vk in v)
    if quadratic:
        # L = v.M.v/2 + b.v + L0 gives v = M^-1 (p - b) and H = (p - b).v/2 - L0, which
        # keeps the potential -L0 as written and only the kinetic part as one fraction
        b = [g.subs(zero_v) for g in grad]
        shifted = sp.Matrix([pi - bi for pi, bi in zip(p, b)])
        sol_vec = hessian.LUsolve(shifted)
        solution = {vi: sp.factor(sp.cancel(s)) for vi, s in zip(v, sol_vec)}
        kinetic = sp.factor(sp.cancel(sum(si * solution[vi] for si, vi in zip(shifted, v)) / 2))
        H = kinetic - L.subs(zero_v)
    else:
        found = sp.solve([sp.Eq(pi, g) for pi, g in zip(p, grad)], list(v), dict=True)
        if not found:
            raise ModelError("cannot solve p = dL/dqdot for the velocities in closed form")
        solution = found[0]
        H = sum(pi * solution[vi] for pi, vi in zip(p, v)) - L.subs(solution)
        H = sp.simplify(sp.expand(H))
    ham = cls(H, q, p, params=parameters, time=t, period=None, name=name or "H")
    if period is not None:
        ham.period = ham._to_expr(period, {prm.name: prm.symbol for prm in parameters}, "period")
        if t is None:
            raise ModelError("a driving period was given but the Lagrangian has no time symbol")
    ham.lagrangian = L
    ham.velocity_symbols = v
    ham.velocities_from_momenta = solution
    ham.hessian_determinant = det
    return ham

