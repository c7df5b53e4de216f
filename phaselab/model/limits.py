"""Size limits on symbolic work: how big an expression is, and how big it would get expanded.

sympy's ``expand``, ``simplify`` and ``solve`` have no bound on their cost: ``(x + y + 1)**1000``
is a short expression whose expansion has half a million terms. Model code measures first
and only hands sympy work whose size is known to be small; past these limits it decides
numerically or refuses with a clear error.
"""

from __future__ import annotations

import math

import sympy as sp

#: most terms an expansion may produce before it is skipped
EXPAND_MAX_TERMS = 400
#: most nodes (counted as a tree, shared parts counted each time they are used) an
#: expression built from user rules may have
MAX_TREE_NODES = 20_000
#: largest number (in bits) an expansion may compute exactly: the parser's own cap on the
#: numbers a user writes is 4,300 digits, about 14,300 bits
MAX_NUMBER_BITS = 20_000


def tree_size(expr: sp.Basic, limit: int | None = None) -> int:
    """Nodes of ``expr`` counted as a tree: a subexpression used twice counts twice.

    This is what tree walks (printing, differentiation, substitution) cost, even when sympy
    stores the shared parts once. Counting is linear in the number of *distinct* parts, so a
    composition that doubles its size at each step is measured without being walked.

    Parameters
    ----------
    expr : sympy.Basic
    limit : int, optional
        Stop counting once the size exceeds ``limit`` (the result is then ``limit + 1``).
    """
    cap = math.inf if limit is None else limit + 1
    sizes: dict = {}
    stack = [(expr, False)]
    while stack:
        node, ready = stack.pop()
        if node in sizes:
            continue
        if not node.args:
            sizes[node] = 1
            continue
        if ready:
            sizes[node] = min(cap, 1 + sum(sizes[a] for a in node.args))
            if sizes[node] >= cap:
                return int(cap)
            continue
        stack.append((node, True))
        stack.extend((a, False) for a in node.args if a not in sizes)
    return int(min(sizes[expr], cap))


#: most weighted nesting (:func:`nesting_work`) of functions and symbolic powers a model may
#: have: sympy's differentiation and common-subexpression search cost grows with the cube of
#: the nesting (measured on 2 cores, 2026-12-05: exp(x*exp(y*...)) 8 deep, work 140, takes
#: 2 s of CPU for the separability check and the printed kernels; 11 deep, work 385, 5.3 s)
MAX_NESTING_WORK = 150
#: most nodes (counted as a tree) of all first or all second derivatives of a system, past
#: which the model is refused when it is made: a 64-particle chain from the catalogue has
#: 19,000; a product of 19 cosines, 78,000, took 4.3 s of CPU to form, check and print (and a
#: product of secants near 100,000 took 13 s), past the 5 s every model must end within
#: (measured on 2 cores, 2026-12-05)
MAX_DERIVATIVE_NODES = 40_000
#: most nodes (counted as a tree) of a group of kernel expressions for which common
#: subexpressions are searched after sympy's "basic" rewriting (factor_terms), whose cost grows
#: faster than the size: 0.35 s for the Jacobian of a 64-particle chain (2,800 nodes), 2.8 s
#: for products of six powers of sums raised to sums (51,000 nodes; measured 2026-12-05).
#: Larger groups are searched as they are (linear in their distinct parts).
CSE_BASIC_MAX_NODES = 10_000


def nesting_work(expr: sp.Basic, limit: int = MAX_NESTING_WORK) -> tuple[int, int]:
    """How deeply ``expr`` nests functions and symbolic powers, and the work that costs.

    A node's level is the most functions met on a path from it down to a leaf: a function
    call adds 1, a power with a non-numeric exponent adds 2 (it is ``exp(e*log(b))``), other
    nodes add nothing. The work is the sum, over the function and power nodes of the tree
    (a shared part counted each time it is used), of ``(level - 1)**2``: nothing for
    functions of plain arguments however many, and growing with the cube of the depth for a
    tower such as ``exp(x*exp(y*exp(...)))``, as sympy's work on it does.

    Parameters
    ----------
    expr : sympy.Basic
    limit : int
        Stop counting once the work exceeds ``limit`` (the work is then ``limit + 1``).

    Returns
    -------
    (work, depth) : (int, int)
        The capped work and the deepest level.
    """
    cap = limit + 1
    level: dict = {}
    work: dict = {}
    stack = [(expr, False)]
    while stack:
        node, ready = stack.pop()
        if node in level:
            continue
        if not node.args:
            level[node], work[node] = 0, 0
            continue
        if not ready:
            stack.append((node, True))
            stack.extend((a, False) for a in node.args if a not in level)
            continue
        step = _nesting_step(node)
        level[node] = step + max(level[a] for a in node.args)
        own = (level[node] - 1) ** 2 if step else 0
        work[node] = min(cap, own + sum(work[a] for a in node.args))
    return int(work[expr]), int(level[expr])


def _nesting_step(node: sp.Basic) -> int:
    """Levels a node adds: 1 for a function call, 2 for a power with a non-numeric exponent."""
    if isinstance(node, sp.Function):
        return 1
    if node.is_Pow and not node.exp.is_number:
        return 2
    return 0


def work_problem(expr: sp.Basic) -> str | None:
    """Why differentiating and compiling ``expr`` would take too long, in words, or None.

    Measured before any symbolic work: the size as a tree (:data:`MAX_TREE_NODES`) and the
    nesting of functions and symbolic powers (:data:`MAX_NESTING_WORK`).
    """
    if tree_size(expr, limit=MAX_TREE_NODES) > MAX_TREE_NODES:
        return f"more than {MAX_TREE_NODES} nodes (counted as a tree, shared parts each time they are used)"
    work, depth = nesting_work(expr)
    if work > MAX_NESTING_WORK:
        return (f"functions and symbolic powers nested {depth} levels deep (nesting work above "
                f"{MAX_NESTING_WORK}; a function counts 1 level, a power with a symbolic exponent 2): "
                "its derivatives would take minutes to form")
    return None


def derivative_problem(exprs, what: str) -> str | None:
    """Why the derivatives ``exprs`` are too large to print and compile, or None."""
    total = 0
    for e in exprs:
        total += tree_size(e, limit=MAX_DERIVATIVE_NODES - total)
        if total > MAX_DERIVATIVE_NODES:
            return (f"the {what} hold more than {MAX_DERIVATIVE_NODES} nodes (counted as a tree): "
                    "too large to compile")
    return None


def expanded_terms(expr: sp.Basic, limit: int = EXPAND_MAX_TERMS) -> int:
    """An upper estimate of the number of terms of ``sympy.expand(expr)``, capped at
    ``limit + 1``; cheap (no expansion is done).

    A sum has the terms of its parts, a product the product of their counts, a power
    ``b**n`` with a whole ``n`` the number of monomials of degree ``|n|`` in the terms of
    ``b`` (a denominator counts as fully as a numerator, since putting fractions over one
    denominator multiplies it out); a function call counts as one term, and its arguments
    (which ``expand`` also expands) must fit the limit themselves. The estimate also bounds
    the work of ``together`` and ``cancel``.
    """
    cap = limit + 1
    memo: dict = {}

    def terms(e) -> int:
        if e in memo:
            return memo[e]
        if not e.args:
            out = 1
        elif e.is_Add:
            out = min(cap, sum(terms(a) for a in e.args))
        elif e.is_Mul:
            out = 1
            for a in e.args:
                out = min(cap, out * terms(a))
        elif e.is_Pow:
            base = terms(e.base)
            exp_terms = terms(e.exp)
            n = _whole_part(e.exp, MAX_NUMBER_BITS)
            if max(base, exp_terms) >= cap or (n > limit and base > 1) or _number_too_big(e.base, n):
                out = cap
            elif n > 0 and base > 1:
                # b**-n counts as b**n: combining fractions (together, cancel) multiplies
                # the denominators out
                out = min(cap, math.comb(base + n - 1, n))
            else:
                out = 1
        else:  # a function: one term if its arguments are small
            out = cap if any(terms(a) >= cap for a in e.args) else 1
        memo[e] = out
        return out

    if tree_size(expr, limit=50 * limit) > 50 * limit:
        return cap
    return terms(expr)


def has_huge_number_power(expr: sp.Basic) -> bool:
    """Whether some power in ``expr`` has a rational base (or a product with a rational
    coefficient) and an exponent whose number part would make that number exceed
    :data:`MAX_NUMBER_BITS` bits if computed exactly, as ``expand``, ``factor_terms`` and
    the "basic" preprocessing of ``cse`` do (``7**(10**15 - x)``)."""
    return any(_number_too_big(p.base, _whole_part(p.exp, MAX_NUMBER_BITS)) for p in expr.atoms(sp.Pow))


def _number_too_big(base: sp.Basic, n: int) -> bool:
    """Whether expanding ``base**(n + ...)`` would compute a number of more than
    :data:`MAX_NUMBER_BITS` bits: ``expand`` raises a rational base, or the rational
    coefficient of a product, to the whole power ``n`` exactly (``7**(10**15 - x)`` becomes
    ``7**(10**15) * 7**(-x)``)."""
    number = base if base.is_Number else (base.as_coeff_Mul()[0] if base.is_Mul else None)
    if number is None or not number.is_Rational or n <= 1:
        return False
    size = max(abs(number.p), abs(number.q))
    return size > 1 and n * size.bit_length() > MAX_NUMBER_BITS


def _whole_part(exponent: sp.Basic, limit: int) -> int:
    """The whole power ``expand`` may multiply out of ``b**exponent``, capped at ``limit + 1``.

    An integer exponent is multiplied out in full, a fraction ``p/q`` by its whole part (``b**(5/2)``
    becomes ``b**2 * sqrt(b)``), and an exponent ``c + rest`` with a number ``c`` is split
    into ``b**c * b**rest`` when sympy knows ``b`` is positive, so ``(E + 5)**(1000 - x)``
    expands ``(E + 5)**1000``. A float part counts the same way (an over-estimate: floats
    are left unexpanded), which keeps the estimate an upper bound.
    """
    coeff = exponent.as_coeff_Add()[0] if (exponent.is_Add or exponent.is_Number) else None
    if coeff is None or not coeff.is_Number or not coeff.is_finite:
        return 0 if coeff is None or coeff.is_finite is not False else limit + 1
    size = abs(coeff)
    if size > limit:
        return limit + 1
    return int(size)


def plain_det(matrix: sp.Matrix) -> sp.Expr:
    """The determinant of a small square matrix by cofactor expansion, with no simplification.

    sympy's ``Matrix.det`` simplifies its intermediate products (for 2 x 2 and 3 x 3
    matrices always), which has no bound on entries that come from user expressions. The
    expansion here costs ``n!`` products of entries and is meant for ``n <= 6``.
    """
    n = matrix.rows
    if n != matrix.cols:
        raise ValueError(f"a determinant needs a square matrix, got {matrix.rows} x {matrix.cols}")
    if n == 0:
        return sp.Integer(1)
    if n == 1:
        return matrix[0, 0]
    terms = []
    for j in range(n):
        entry = matrix[0, j]
        if entry == 0:
            continue
        minor = matrix[1:, [k for k in range(n) if k != j]]
        terms.append((-1) ** j * entry * plain_det(minor))
    return sp.Add(*terms)


#: how many copies of its argument the derivative of a function holds (cos u -> -sin u: 1;
#: asin u -> 1/sqrt(1 - u**2): 2); functions not named here count 2
_COPIES_IN_DERIVATIVE = {"sin": 1, "cos": 1, "exp": 1, "sinh": 1, "cosh": 1, "log": 1, "Abs": 1,
                         "sign": 1, "tan": 1, "tanh": 1, "Heaviside": 1, "DiracDelta": 1}


def derivative_size_bound(expr: sp.Basic, x: sp.Symbol, limit: int) -> int:
    """An estimate of the tree size of d expr / dx, formed without differentiating.

    It counts the terms the product, power and chain rules write before sympy combines
    anything (a product of N factors gives N terms of N factors), so it is close to the
    size sympy forms and seldom below it; sympy's own time to form a derivative grows faster
    than its size, so a derivative far past the budget is refused on this estimate instead
    of being formed (a product of 60 cosines: 13 s to form its second derivative).

    Parameters
    ----------
    expr : sympy.Basic
    x : sympy.Symbol
    limit : int
        Stop once the estimate exceeds ``limit`` (the result is then ``limit + 1``).
    """
    cap = limit + 1
    size: dict = {}
    deriv: dict = {}
    stack = [(expr, False)]
    while stack:
        node, ready = stack.pop()
        if node in size:
            continue
        if not node.args:
            size[node] = 1
            deriv[node] = 1 if node == x else 0
            continue
        if not ready:
            stack.append((node, True))
            stack.extend((a, False) for a in node.args if a not in size)
            continue
        s = min(cap, 1 + sum(size[a] for a in node.args))
        size[node] = s
        moving = [a for a in node.args if deriv[a]]
        if not moving:
            deriv[node] = 0
            continue
        if isinstance(node, sp.Add):
            d = 1 + sum(deriv[a] for a in moving)
        elif isinstance(node, sp.Mul):
            d = 1 + sum(s - size[a] + deriv[a] + 1 for a in moving)
        elif isinstance(node, sp.Pow):
            base, exponent = node.args
            if not deriv[exponent]:
                d = 2 * size[exponent] + size[base] + deriv[base] + 4
            else:
                d = 2 * s + deriv[exponent] + deriv[base] + 2 * size[base] + size[exponent] + 6
        else:
            copies = _COPIES_IN_DERIVATIVE.get(getattr(node.func, "__name__", ""), 2)
            d = sum(copies * s + deriv[a] + 2 for a in moving)
        deriv[node] = min(cap, d)
        if deriv[node] >= cap and node is expr:
            break
    return int(min(deriv.get(expr, cap), cap))
