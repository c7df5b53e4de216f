"""The derivatives a model's compiled kernels need, formed and checked when the model is made.

A flow's kernels hold H, its gradient, the vector field ``(dH/dp, -dH/dq)`` and the field's
Jacobian (the Hessian of H up to signs); a map's hold its update rules and their Jacobian.
They are formed here once, on the renamed symbols of :func:`phaselab.model.numeric.rename_map`
(``s0..`` for the state, ``k0..`` for parameters), so that a model that could not be compiled
is refused when it is made, with a message saying what is too large or not compilable, and
the code generator prints exactly these expressions without differentiating again.

Work is bounded: every group is measured against
:data:`phaselab.model.limits.MAX_DERIVATIVE_NODES` before the next one is formed, and the
model's expression was measured by :func:`phaselab.model.limits.work_problem` before any
derivative (towers of nested functions are refused before differentiating).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import sympy as sp

from phaselab.errors import ModelError
from phaselab.model.compilable import check_supported
from phaselab.model.limits import MAX_DERIVATIVE_NODES, derivative_problem, derivative_size_bound, tree_size
from phaselab.model.numeric import rename_map

#: how far past the budget the estimate of a derivative's size (which is seldom below the size
#: sympy forms, and up to about twice it) may go before the derivative is refused unformed
ESTIMATE_ALLOWANCE = 2


@dataclass(frozen=True)
class KernelDerivatives:
    """The expressions of a system's kernels, in renamed symbols.

    Attributes
    ----------
    renamed : dict
        Model symbol -> kernel symbol (``s0..``, ``k0..``).
    groups : dict of str to (list of sympy.Expr, int)
        Per kernel name (``"hamiltonian"``, ``"grad_q"``, ... or ``"map_step"``,
        ``"map_jacobian"``): its expressions and its output length (0 for the scalar H).
        Jacobians are row-major, shape ``(2n, 2n)`` flattened.
    """

    renamed: dict
    groups: dict


def _derivatives(exprs, variables, what: str) -> list:
    """Row-major Jacobian entries d expr_i / d var_j, measured as they are formed: past
    :data:`~phaselab.model.limits.MAX_DERIVATIVE_NODES` nodes the model is refused at once
    (the rest is not formed). Entries of variables an expression does not contain are 0
    without calling sympy (large sparse chains stay fast)."""
    out, total, guessed = [], 0, 0
    for e in exprs:
        free = e.free_symbols
        for x in variables:
            if x not in free:
                out.append(sp.S.Zero)
                continue
            # sympy's time to form a derivative grows faster than its size: one far past the
            # budget on the estimate is refused without being formed
            guessed += derivative_size_bound(e, x, limit=ESTIMATE_ALLOWANCE * MAX_DERIVATIVE_NODES - guessed)
            if guessed > ESTIMATE_ALLOWANCE * MAX_DERIVATIVE_NODES:
                raise ModelError(f"the {what} would hold far more than {MAX_DERIVATIVE_NODES} nodes "
                                 "(estimated before forming them): too large to compile; write the "
                                 "system with fewer nested functions or shorter terms")
            d = sp.diff(e, x)
            total += tree_size(d, limit=MAX_DERIVATIVE_NODES - total)
            if total > MAX_DERIVATIVE_NODES:
                raise ModelError(f"the {what} hold more than {MAX_DERIVATIVE_NODES} nodes (counted as a "
                                 "tree): too large to compile; write the system with fewer nested "
                                 "functions or shorter terms")
            out.append(d)
    return out


def _check_size(exprs, what: str) -> None:
    problem = derivative_problem(exprs, what)
    if problem:
        raise ModelError(problem + "; write the system with fewer nested functions or shorter terms")


def _check_symbols(expr, renamed: dict, where: str) -> None:
    stray = sorted(str(x) for x in expr.free_symbols if x not in renamed)
    if stray:
        raise ModelError(f"the {where} has symbols that are neither state nor parameters: "
                         + ", ".join(stray))


def flow_derivatives(expr: sp.Expr, state: Sequence[sp.Symbol], params: Sequence[sp.Symbol],
                     name: str = "Hamiltonian") -> KernelDerivatives:
    """Form and check the kernels' expressions of an autonomous Hamiltonian.

    Parameters
    ----------
    expr : sympy.Expr
        H in the model's symbols.
    state : sequence of sympy.Symbol
        ``(q1..qn, p1..pn)``, length 2n.
    params : sequence of sympy.Symbol
    name : str
        What ``expr`` is, for messages.

    Raises
    ------
    ModelError
        A function or number that cannot be compiled, a stray symbol, or derivatives past the
        size budget (saying which).
    """
    renamed = rename_map(state, params)
    display = {v: k for k, v in renamed.items()}
    check_supported(expr, name)
    _check_symbols(expr, renamed, name)
    H = expr.xreplace(renamed)
    s = [renamed[x] for x in state]
    m = len(s)
    n = m // 2
    first = _derivatives([H], s, "first derivatives of the Hamiltonian")
    grad_q, grad_p = first[:n], first[n:]
    field = grad_p + [-d for d in grad_q]
    jac = _derivatives(field, s, "second derivatives of the Hamiltonian")
    for i, e in enumerate(jac):
        check_supported(e, f"second derivative of the Hamiltonian (entry {i})", display)
    # d2H/dp_i dp_j = d(qdot_i)/dp_j and d2H/dq_i dq_j = -d(pdot_i)/dq_j: entries of jac
    hess_pp = [jac[i * m + n + j] for i in range(n) for j in range(n)]
    hess_qq = [-jac[(n + i) * m + j] for i in range(n) for j in range(n)]
    groups = {"hamiltonian": ([H], 0), "grad_q": (grad_q, n), "grad_p": (grad_p, n),
              "vector_field": (field, m), "jacobian": (jac, m * m), "hess_pp": (hess_pp, n * n),
              "hess_qq": (hess_qq, n * n)}
    return KernelDerivatives(renamed=renamed, groups=groups)


def map_derivatives(update: Sequence[sp.Expr], state: Sequence[sp.Symbol],
                    params: Sequence[sp.Symbol]) -> KernelDerivatives:
    """Form and check the kernels' expressions of a map: its update rules and their Jacobian.

    Parameters
    ----------
    update : sequence of sympy.Expr
        The new value of each state component, in the model's symbols (length 2n).
    state, params : sequence of sympy.Symbol

    Raises
    ------
    ModelError
        As :func:`flow_derivatives`.
    """
    renamed = rename_map(state, params)
    display = {v: k for k, v in renamed.items()}
    for i, e in enumerate(update):
        check_supported(e, f"update of {state[i]}")
        _check_symbols(e, renamed, f"update of {state[i]}")
    rules = [e.xreplace(renamed) for e in update]
    _check_size(rules, "update rules of the map")
    s = [renamed[x] for x in state]
    jacobian = _derivatives(rules, s, "Jacobian entries of the map")
    for i, e in enumerate(jacobian):
        check_supported(e, f"Jacobian of the map (entry {i})", display)
    m = len(s)
    return KernelDerivatives(renamed=renamed, groups={"map_step": (rules, m), "map_jacobian": (jacobian, m * m)})
