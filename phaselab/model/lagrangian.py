"""The Legendre transform from a Lagrangian L(q, qdot, t) to a Hamiltonian H(q, p, t).

Every step has a bounded cost. The momenta p = dL/dqdot are solved for the velocities only
in the cases that have a closed form of known size:

* L quadratic in the velocities (the mechanical case): p is linear in qdot and the linear
  system is solved exactly, for up to :data:`MAX_VELOCITIES` velocities when the kinetic
  matrix is diagonal, :data:`MAX_CONSTANT_COUPLED_VELOCITIES` when it is constant and
  :data:`MAX_COUPLED_VELOCITIES` otherwise;
* one velocity whose momentum equation is a polynomial of degree at most 2 in qdot, possibly
  after clearing square roots (the free relativistic particle is one).

Anything else (``qd**5/5 + q*qd**3 + qd**2`` has a quartic momentum equation) is refused
with a :class:`~phaselab.errors.ModelError` that says so and suggests giving H directly;
sympy is never left to solve or simplify without a limit.
"""

from __future__ import annotations

import random

import sympy as sp
from sympy.polys.polyerrors import PolynomialError

from phaselab.errors import ModelError
from phaselab.model.limits import EXPAND_MAX_TERMS, expanded_terms, plain_det, tree_size
from phaselab.model.params import make_parameters
from phaselab.model.system import as_symbols
from phaselab.model.parser import parse_expression
from phaselab.model.zero import zero_check

#: most velocities of a Lagrangian whose kinetic matrix depends on the state and is not
#: diagonal (its symbolic inverse grows quickly with the size)
MAX_COUPLED_VELOCITIES = 4
#: most velocities coupled through a constant, non-diagonal kinetic matrix
MAX_CONSTANT_COUPLED_VELOCITIES = 16
#: most velocities of any Lagrangian handed to the transform
MAX_VELOCITIES = 64
#: largest momentum equation (tree nodes) for which square roots are cleared and sympy's
#: solver is asked for the velocity
SOLVE_MAX_NODES = 300
#: largest expressions (tree nodes) that are tidied with cancel/factor/simplify
TIDY_MAX_NODES = 200
#: largest expressions (tree nodes) handed to sympy.simplify
SIMPLIFY_MAX_NODES = 80

_NO_CLOSED_FORM = ("the Legendre transform has no closed form here: {why}. phaselab solves "
                   "p = dL/dqdot when it is linear in the velocities (L quadratic in them) or, "
                   "for one velocity, a polynomial of degree at most 2 after clearing square "
                   "roots; give the Hamiltonian directly instead")

_SYMPY_FAILURES = (NotImplementedError, PolynomialError, ArithmeticError, RecursionError,
                   TypeError, ValueError)


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
        For a degenerate Lagrangian (det of d2L/dqdot2 is identically zero), and when the
        momentum equations have no closed-form solution of bounded size (see the module
        docstring); also when sympy cannot carry out a step.
    """
    q = as_symbols(coords, "coordinates")
    v = as_symbols(velocities, "velocities")
    if len(q) != len(v):
        raise ModelError(f"{len(q)} coordinates but {len(v)} velocities; each coordinate needs one velocity")
    if len(v) > MAX_VELOCITIES:
        raise ModelError(f"a Lagrangian may have at most {MAX_VELOCITIES} velocities; this one has {len(v)}")
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

    try:
        H, solution, det = _transform(L, q, v, p, parameters, t)
    except ModelError:
        raise
    except _SYMPY_FAILURES as exc:
        raise ModelError(f"cannot form the Legendre transform of this Lagrangian: sympy failed with "
                         f"{type(exc).__name__}: {_short(exc)}; give the Hamiltonian directly") from None
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


def _transform(L, q, v, p, parameters, t):
    """(H, velocities in terms of momenta, det of the kinetic matrix)."""
    grad = [sp.diff(L, vi) for vi in v]
    hessian = sp.Matrix([[sp.diff(g, vj) for vj in v] for g in grad])
    vset = set(v)
    quadratic = not any(h.free_symbols & vset for h in hessian)
    if not quadratic:
        # a velocity that appears only structurally (and cancels) still leaves L quadratic
        quadratic = all(zero_check(sp.diff(h, vk)).zero for h in hessian for vk in v
                        if vk in h.free_symbols)
    constant = all(not h.free_symbols for h in hessian)
    diagonal = all(hessian[i, j] == 0 for i in range(len(v)) for j in range(len(v)) if i != j)
    if not diagonal or not quadratic:
        if quadratic and constant:
            limit, what = MAX_CONSTANT_COUPLED_VELOCITIES, "a constant kinetic matrix"
        else:
            limit, what = MAX_COUPLED_VELOCITIES, "a kinetic matrix that depends on the state"
        if len(v) > limit:
            raise ModelError(_NO_CLOSED_FORM.format(
                why=f"{len(v)} velocities are coupled through {what} (the limit for that is {limit})"))

    if diagonal:
        det = sp.Mul(*[hessian[i, i] for i in range(len(v))])
    elif constant:
        det = hessian.det(method="bareiss")  # exact numbers: no expressions to grow
    else:
        det = plain_det(hessian)
    if zero_check(det).zero:
        raise ModelError(
            "degenerate Lagrangian: the Hessian d2L/dqdot2 is singular, so the momenta "
            f"{', '.join(s.name for s in p)} cannot be solved for the velocities "
            f"{', '.join(s.name for s in v)} (a constrained or gauge system)")

    zero_v = {vi: 0 for vi in v}
    if quadratic:
        # L = v.M.v/2 + b.v + L0 gives v = M^-1 (p - b) and H = (p - b).v/2 - L0, which
        # keeps the potential -L0 as written and only the kinetic part as one fraction
        b = [g.subs(zero_v) for g in grad]
        shifted = sp.Matrix([pi - bi for pi, bi in zip(p, b)])
        if diagonal:
            sol_vec = [s / hessian[i, i] for i, s in enumerate(shifted)]
        else:
            sol_vec = list(hessian.LUsolve(shifted))
        # tidying (one fraction, factored) pays for one or two velocities; past that the
        # fractions of the linear solve multiply out, so the solution is kept as it is
        tidy = _tidy if len(v) <= 2 else (lambda e: e)
        solution = {vi: tidy(s) for vi, s in zip(v, sol_vec)}
        kinetic = tidy(sum(si * solution[vi] for si, vi in zip(shifted, v)) / 2)
        return kinetic - L.subs(zero_v), solution, det

    if len(v) > 1:
        raise ModelError(_NO_CLOSED_FORM.format(
            why="the momenta are not linear in the velocities and there is more than one velocity"))
    (vel,), (mom,) = v, p
    equation = grad[0] - mom
    _check_solvable(equation, vel)
    found = sp.solve(equation, vel, dict=True)
    branch = _real_branch(found, grad[0], vel, mom, q, parameters, t)
    solution = {vel: branch}
    H = mom * branch - L.subs(solution)
    return _tidy(H, simplify=True), solution, det


def _check_solvable(equation, vel) -> None:
    """Refuse a momentum equation sympy would have to solve without a known bound."""
    if tree_size(equation, limit=SOLVE_MAX_NODES) > SOLVE_MAX_NODES:
        raise ModelError(_NO_CLOSED_FORM.format(why=f"the momentum equation has more than "
                                                    f"{SOLVE_MAX_NODES} terms and factors"))
    if expanded_terms(equation) > EXPAND_MAX_TERMS:
        raise ModelError(_NO_CLOSED_FORM.format(why="the momentum equation is too large once expanded"))
    if equation.is_polynomial(vel):
        degree = sp.degree(equation, vel)
        if degree > 2:
            raise ModelError(_NO_CLOSED_FORM.format(
                why=f"p = dL/d{vel.name} is a polynomial of degree {degree} in {vel.name}"))
        return
    from sympy.solvers.solvers import unrad

    try:
        cleared = unrad(sp.together(equation), vel)
    except _SYMPY_FAILURES:
        cleared = None
    if cleared is None or cleared[1] or not cleared[0].is_polynomial(vel):
        raise ModelError(_NO_CLOSED_FORM.format(
            why=f"p = dL/d{vel.name} is not a polynomial in {vel.name}, even after clearing square roots"))
    degree = sp.degree(cleared[0], vel)
    if degree > 2:
        raise ModelError(_NO_CLOSED_FORM.format(
            why=f"clearing the square roots of p = dL/d{vel.name} leaves a polynomial of degree "
                f"{degree} in {vel.name}"))


def _real_branch(found, grad, vel, mom, q, parameters, t):
    """The solution v(p) that inverts p = dL/dv at sample points (real, and giving back the
    velocity the momentum came from); a ModelError when no single branch does."""
    candidates = [s[vel] for s in found if vel in s]
    if not candidates:
        raise ModelError(_NO_CLOSED_FORM.format(why="sympy found no solution for the velocity"))
    rng = random.Random(7)
    points = []
    for _ in range(6):
        point = {s: sp.Float(rng.uniform(0.3, 1.7)) for s in q}
        point.update({prm.symbol: sp.Float(prm.default) for prm in parameters})
        if t is not None:
            point[t] = sp.Float(rng.uniform(0.0, 1.0))
        speed = rng.uniform(0.05, 0.3) * (1 if len(points) % 2 == 0 else -1)
        momentum = grad.xreplace({**point, vel: sp.Float(speed)}).evalf(30)
        if momentum.is_real and momentum.is_finite:
            points.append((point, speed, momentum))
    for branch in candidates:
        if points and all(_inverts(branch, point, speed, momentum, mom) for point, speed, momentum in points):
            return branch
    raise ModelError(_NO_CLOSED_FORM.format(
        why=f"no single formula for {vel.name} in terms of {mom.name} inverts p = dL/d{vel.name} "
            "at sample states"))


def _inverts(branch, point, speed, momentum, mom) -> bool:
    try:
        value = complex(branch.xreplace({**point, mom: momentum}).evalf(30))
    except (TypeError, ValueError, ArithmeticError):
        return False
    return abs(value.imag) <= 1e-12 and abs(value.real - speed) <= 1e-9 * max(1.0, abs(speed))


def _tidy(expr, simplify: bool = False):
    """``factor(cancel(expr))`` (or ``simplify``) when the expression is small enough for that
    to be cheap; larger expressions are returned as they are."""
    if tree_size(expr, limit=TIDY_MAX_NODES) > TIDY_MAX_NODES or expanded_terms(expr) > EXPAND_MAX_TERMS:
        return expr
    if simplify:
        return sp.simplify(expr) if tree_size(expr, limit=SIMPLIFY_MAX_NODES) <= SIMPLIFY_MAX_NODES else expr
    return sp.factor(sp.cancel(expr))


def _short(exc) -> str:
    text = str(exc) or "no message"
    return text if len(text) <= 200 else text[:197] + "..."
