"""One-turn maps written as a sequence of named elements, as a lattice is written.

Three elements, each a symplectic map of its own:

* :class:`Drift` ``(length=L)``: ``q_i' = q_i + L p_i`` (the flow of ``H = L |p|^2 / 2``
  for one unit of time; every coordinate, or the named ones);
* :class:`ThinKick` ``(potential=V)``: ``p_i' = p_i - dV/dq_i`` with ``V(q)`` free of the
  momenta (the flow of ``H = V(q)`` for one unit of time: a thin lens, a kick);
* :class:`LinearElement` ``(matrix=M)``: ``z' = M z`` with ``M^T J M = J`` (a transfer
  matrix; entries numbers or expressions in the parameters).

:func:`compose_map` applies them in order (the first element acts first) and returns one
:class:`~phaselab.model.maps.SymplecticMap`. A composition of symplectic maps is symplectic,
so the map's own check is a cheap confirmation; each element is checked where it is read
(a kick that depends on a momentum, a drift length or matrix entry that depends on the
state, a matrix that is not symplectic are refused, naming the element).

Expressions are sympy expressions or strings read by the safe parser
(:func:`phaselab.model.parser.parse_expression`); the composed rules are bounded in size
like sequential map rules.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import sympy as sp

from phaselab.errors import ModelError
from phaselab.model.limits import MAX_TREE_NODES, tree_size
from phaselab.model.maps import SymplecticMap
from phaselab.model.params import make_parameters
from phaselab.model.parser import parse_expression, size_problem
from phaselab.model.symplectic import symplectic_defect
from phaselab.model.system import as_symbols

__all__ = ["Drift", "ThinKick", "LinearElement", "compose_map"]

#: a linear element is refused when its relative defect max|M^T J M - J| exceeds this
MATRIX_TOL = 1e-12
#: most elements in one composition
MAX_ELEMENTS = 10_000


@dataclass(frozen=True)
class Drift:
    """``q_i' = q_i + length * p_i``.

    Parameters
    ----------
    length : number, str or sympy.Expr
        The drift length (in the units that make ``length * p`` a coordinate); may use the
        map's parameters, not its state.
    coords : sequence of str, optional
        The coordinates that drift; default every one.
    """

    length: object = 1
    coords: tuple | None = None


@dataclass(frozen=True)
class ThinKick:
    """``p_i' = p_i - dV/dq_i`` for every coordinate ``q_i``.

    Parameters
    ----------
    potential : str or sympy.Expr
        ``V(q)``: the coordinates and parameters, never a momentum.
    """

    potential: object


@dataclass(frozen=True)
class LinearElement:
    """``z' = M z`` for the whole state ``z = (q1..qn, p1..pn)``.

    Parameters
    ----------
    matrix : sequence of 2n sequences of 2n entries
        Numbers, strings or sympy expressions in the parameters; symplectic
        (``M^T J M = J``, checked at the parameters' defaults).
    """

    matrix: object


def compose_map(elements, coords, momenta, *, params=None, modulus=None, name=None) -> SymplecticMap:
    """The map that applies ``elements`` in order (the first acts first).

    Parameters
    ----------
    elements : sequence of Drift, ThinKick or LinearElement
    coords, momenta : sequence of str or sympy.Symbol
        The state, ``(q1..qn, p1..pn)``.
    params : mapping, optional
        Parameters with defaults, as for :class:`~phaselab.model.maps.SymplecticMap`.
    modulus, name
        As for :class:`~phaselab.model.maps.SymplecticMap`.

    Returns
    -------
    SymplecticMap
        With ``update`` the composed rules in the old variables.

    Raises
    ------
    ModelError
        An element of an unknown kind, one that is not symplectic or reads what it may not
        (named by its position), rules that grow past
        :data:`phaselab.model.limits.MAX_TREE_NODES`, or what the map itself refuses.
    """
    coords_s, momenta_s = as_symbols(coords, "coordinates"), as_symbols(momenta, "momenta")
    if len(coords_s) != len(momenta_s) or not coords_s:
        raise ModelError(f"{len(coords_s)} coordinates but {len(momenta_s)} momenta; each coordinate needs "
                         "one momentum")
    state = coords_s + momenta_s
    parameters = make_parameters(params, {s.name for s in state})
    known = {s.name: s for s in state}
    known.update({p.name: p.symbol for p in parameters})
    elements = list(elements) if not isinstance(elements, (str, Drift, ThinKick, LinearElement)) else [elements]
    if not elements or len(elements) > MAX_ELEMENTS:
        raise ModelError(f"compose_map needs between 1 and {MAX_ELEMENTS} elements, got {len(elements)}")
    reader = _Reader(known, coords_s, momenta_s, parameters)
    current = list(state)
    for k, element in enumerate(elements):
        what = f"element {k} ({type(element).__name__})"
        if isinstance(element, Drift):
            current = _drift(element, current, reader, what)
        elif isinstance(element, ThinKick):
            current = _kick(element, current, reader, what)
        elif isinstance(element, LinearElement):
            current = _linear(element, current, reader, what)
        else:
            raise ModelError(f"element {k} must be a Drift, ThinKick or LinearElement, got {element!r}")
        for sym, expr in zip(state, current):
            _bounded(expr, sym, what)
    return SymplecticMap(current, coords_s, momenta_s, params=parameters, modulus=modulus, name=name)


class _Reader:
    """Reads element expressions with the map's symbols, allowing only what an element may use."""

    def __init__(self, known, coords, momenta, parameters):
        self.known = known
        self.coords = coords
        self.momenta = momenta
        self.param_symbols = {p.symbol for p in parameters}
        self.defaults = {p.symbol: p.default for p in parameters}

    def read(self, expr, what: str, allowed: set) -> sp.Expr:
        if isinstance(expr, str):
            expr = parse_expression(expr, symbols=self.known, allowed=set(self.known))
        elif isinstance(expr, (int, float)) and not isinstance(expr, bool):
            expr = sp.Integer(int(expr)) if float(expr).is_integer() else sp.Float(float(expr))
        elif not isinstance(expr, sp.Expr):
            raise ModelError(f"{what} must be a number, a string or a sympy expression, got {type(expr).__name__}")
        problem = size_problem(expr)
        if problem:
            raise ModelError(f"{what} holds {problem}")
        bad = sorted(s.name for s in expr.free_symbols if s not in allowed)
        if bad:
            raise ModelError(f"{what} may not use {', '.join(bad)}")
        return expr


def _drift(element, current, reader, what):
    n = len(reader.coords)
    length = reader.read(element.length, f"the length of {what}", reader.param_symbols)
    names = [c.name for c in reader.coords]
    chosen = names if element.coords is None else list(element.coords)
    unknown = [c for c in chosen if c not in names]
    if unknown or isinstance(element.coords, str):
        raise ModelError(f"{what}: coords must name coordinates among {', '.join(names)}, got {element.coords!r}")
    new = list(current)
    for c in chosen:
        i = names.index(c)
        new[i] = current[i] + length * current[n + i]
    return new


def _kick(element, current, reader, what):
    n = len(reader.coords)
    V = reader.read(element.potential, f"the potential of {what}", set(reader.coords) | reader.param_symbols)
    at = dict(zip(reader.coords, current[:n]))
    new = list(current)
    for i, q in enumerate(reader.coords):
        new[n + i] = current[n + i] - sp.diff(V, q).xreplace(at)
    return new


def _linear(element, current, reader, what):
    size = len(current)
    rows = element.matrix
    try:
        rows = [list(r) for r in rows]
    except TypeError:
        raise ModelError(f"{what}: matrix must be {size} rows of {size} entries") from None
    if len(rows) != size or any(len(r) != size for r in rows):
        raise ModelError(f"{what}: matrix must be {size} rows of {size} entries for the state "
                         f"of {size} components, got {len(rows)} rows")
    M = sp.Matrix([[reader.read(e, f"entry ({i}, {j}) of {what}", reader.param_symbols)
                    for j, e in enumerate(r)] for i, r in enumerate(rows)])
    try:
        values = np.array(M.xreplace(reader.defaults).evalf(), dtype=float)
    except (TypeError, ValueError):
        raise ModelError(f"{what}: matrix entries must be real at the parameters' defaults") from None
    if not np.all(np.isfinite(values)):
        raise ModelError(f"{what}: matrix entries must be finite at the parameters' defaults")
    defect = symplectic_defect(values)
    if defect > MATRIX_TOL:
        raise ModelError(f"{what}: the matrix is not symplectic (max|M^T J M - J| = {defect:.3g} relative, "
                         "at the parameters' defaults)")
    z = sp.Matrix(current)
    return list(M * z)


def _bounded(expr, sym, what):
    if tree_size(expr, limit=MAX_TREE_NODES) > MAX_TREE_NODES:
        raise ModelError(f"after {what} the rule for {sym.name} has more than {MAX_TREE_NODES} nodes; "
                         "split the lattice into shorter maps")
