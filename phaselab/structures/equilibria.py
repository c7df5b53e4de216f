"""Equilibria of an autonomous Hamiltonian flow and fixed points of an area-preserving map.

An equilibrium of Hamilton's equations is a state where the vector field
``(dH/dp, -dH/dq)`` vanishes, i.e. where ``grad H = 0`` (the symplectic matrix is
invertible). Each one is classified by the eigenvalues of the linearised vector field
``A = J * Hess H`` with ``J = [[0, I], [-I, 0]]``, the compiled ``jacobian`` kernel (the
classification itself is :mod:`phaselab.structures.stability`).

How they are found
------------------
1. Symbolically, when every component of ``grad H`` (parameters replaced by their numeric
   values, as exact decimals) is a polynomial in the state with total degree at most
   :data:`MAX_DEGREE` and a Bezout bound (product of degrees) at most :data:`MAX_BEZOUT`:
   ``sympy.solve_poly_system`` then returns every solution, the real ones are kept and each
   is polished by Newton's method. This path is complete (no equilibrium is missed).
2. Otherwise (or when sympy declines the system), a multi-start Newton search: ``starts``
   points drawn uniformly (``numpy.random.default_rng(seed)``) in the ``ranges`` box plus its
   centre, each handed to ``scipy.optimize.root`` (method ``hybr``) with the lambdified
   Hessian as Jacobian. This path finds the equilibria whose basins the starts hit; more
   starts or tighter bounds find more.

Conventions
-----------
* Default bounds: ``(-pi, pi)`` for an angle coordinate, ``(-3, 3)`` in the model's units for
  every other state variable. Names missing from ``ranges`` keep their default.
* A coordinate counts as an angle when H is 2 pi periodic in it (checked numerically at
  random states to 1e-9 relative). Angles are reported reduced into ``(-pi, pi]`` when that
  value lies in the bounds (else the first representative at or above the lower bound), and
  equilibria that differ by multiples of 2 pi in angles are the same equilibrium.
* Maps: fixed points solve ``M(z) - z = 0`` with every wrapped component's difference
  reduced modulo its period (``AreaPreservingMap.modulus``); they are reported inside the
  wrapping interval, and default bounds of wrapped components are that interval.
* State variables absent from H (cyclic coordinates, or momenta H does not contain) make the
  equilibria come in lines; they are held at the centre of their bounds, listed in
  ``Equilibrium.free``, and such equilibria have zero eigenvalues ("degenerate").
* Symbolic solutions are all returned when ``ranges`` is None; with explicit bounds, and
  always for the Newton search, only equilibria inside the box are returned.
* Straight lines of equilibria (null directions of the Hessian along which grad H stays
  zero, as for a lattice invariant under translation) give one result each, the point of
  the line nearest the box centre, with the line in ``Equilibrium.directions``.
* Two solutions are the same equilibrium when they agree to ``1e-6 * (1 + |z|)`` (max norm).

Tolerances of the classification (``scale`` = largest singular value of ``A``):
``|Re l| < 1e-9 * scale`` is a zero real part, ``|l| < 1e-6 * scale`` is a zero eigenvalue,
eigenvalues closer than ``1e-6 * scale`` are repeated, and a repeated eigenvalue whose
eigenspace is smaller than its multiplicity (a Jordan block) makes the equilibrium
"degenerate". For maps the same tests are made on ``|l| - 1`` (unit circle) and ``l - 1``.

These are model results: the stability of a real machine lattice or spacecraft orbit must be
confirmed with validated tools and the responsible engineers.
"""

from __future__ import annotations

from phaselab.engine import inputs
from phaselab.structures.equilibrium_result import Equilibrium
from phaselab.structures.equilibrium_search import (DEFAULT_HALF_WIDTH, RESIDUAL, SAME_POINT, FlowSearch,
                                                    check_bounds, exact_number, map_fixed_points)
from phaselab.structures.stability import classify_flow, classify_map
from phaselab.errors import ModelError

__all__ = ["equilibria", "Equilibrium", "check_bounds", "exact_number", "classify_flow", "classify_map",
           "SAME_POINT", "RESIDUAL", "DEFAULT_HALF_WIDTH"]


# --------------------------------------------------------------------------- public entry
def equilibria(system, *, params=None, ranges=None, starts: int = 200, seed: int = 0) -> list[Equilibrium]:
    """Equilibria of an autonomous Hamiltonian flow, or fixed points of an area-preserving map.

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
        A time-dependent Hamiltonian is refused (see Raises).
    params : mapping of str to float, optional
        Parameter values; defaults from the model.
    ranges : mapping of str to (float, float), optional
        Search box per state variable name; see the module docstring for defaults, the
        handling of angles and which solutions are returned.
    starts : int
        Number of random Newton starts (the box centre is always tried as well).
    seed : int
        Seed of the random starts, so results are reproducible.

    Returns
    -------
    list of Equilibrium
        Sorted by energy (maps: by position).

    Raises
    ------
    ModelError
        For a Hamiltonian with explicit time dependence.
    ParameterError
        For unknown names or empty/non-finite intervals in ``ranges``, unknown parameters,
        or a non-positive ``starts``.
    """
    inputs.system(system)
    starts = inputs.count(starts, "starts", minimum=0, maximum=100_000)
    seed = inputs.count(seed, "seed", minimum=0)
    if system.kind == "map":
        return map_fixed_points(system, params, ranges, int(starts), seed)
    if not system.is_autonomous:
        raise ModelError(
            f"system {system.name!r} depends on time explicitly, so it has no equilibria in the "
            f"usual sense; for the equilibria of the frozen system at a fixed time, build it with "
            f"the time symbol {system.time.name!r} declared as a parameter (e.g. "
            f"params={{'{system.time.name}': 0.0}}) and pass the time you want in params")
    return FlowSearch(system, params, ranges).run(int(starts), seed)
