"""Branch switching: the new family born where a flagged multiplier pair passes +1 or -1.

Along a family (:func:`phaselab.continue_family`) a pair of multipliers of the monodromy M
may pass +1 (its stability index b = lambda + 1/lambda crosses 2: a pitchfork, such as the
vertical bifurcation of a planar Lyapunov family where the spatial family is born out of the
plane) or -1 (b crosses -2: period doubling). There a second family of periodic orbits
leaves the old one. :func:`branch_family` starts it in three steps, the standard recipe of
numerical continuation (H. B. Keller, "Numerical solution of bifurcation and nonlinear
eigenvalue problems", in Applications of Bifurcation Theory, Academic Press 1977, 359;
recalled from memory):

1. the crossing is located between the two members beside the flag: the old family is
   corrected at fixed parameter values chosen by regula falsi (Illinois variant) on
   b(lambda) - 2 (or + 2) of the flagged pair, until b is 2 (-2) to ``1e-9``;
2. at that point the eigenvector v of M for the critical multiplier (+1, or -1 for period
   doubling; in the reduced coordinates of the section) is the direction off the old family:
   in (u, lambda) the direction (v, 0), made orthogonal to the old family's tangent;
3. from the predictor x* + offset (v, 0), Newton's method of the continuation with the
   pseudo-arclength row (v, 0) . (x - x*) = offset corrects to a member of the new family
   (for period doubling, a fixed point of the return map taken twice), which
   :func:`phaselab.continue_family` then follows.

At a pitchfork the new family leaves on both sides of the old one (z > 0 and z < 0 for a
family born out of a plane); ``side`` picks one. The new family is followed from its first
member away from the bifurcation, towards the end of the span on that member's side.

These are model results; where a family informs a design (a mission's orbit family, the
working range of a machine) confirm it with validated tools and the responsible engineers.
"""

from __future__ import annotations

import warnings

import numpy as np

from phaselab.engine import inputs
from phaselab.errors import IntegrationError, ModelError, ParameterError
from phaselab.structures import multipliers
from phaselab.structures.families import Family, continue_family, correct, set_value
from phaselab.structures.periodic.assembly import assemble, image_of

LEVELS = {"tangent (multiplier +1)": 1.0, "period doubling (multiplier -1)": -1.0}
"""The flags a new family can be started from, with the critical multiplier."""

INDEX_TOL = 1e-9
"""The located crossing has its pair's index within this of +-2."""


def branch_family(family: Family, bifurcation, span, *, side=1, offset=None, steps=200, ds=None,
                  ds_max=None, tol=1e-10, maxit=12, resonances=None) -> Family:
    """Start the family born at a flagged bifurcation of ``family`` and continue it.

    Parameters
    ----------
    family : Family
        From :func:`phaselab.continue_family`.
    bifurcation : int or dict
        One of ``family.bifurcations`` (or its position in that list) whose kind is
        ``"tangent (multiplier +1)"`` or ``"period doubling (multiplier -1)"``.
    span : (float, float)
        The range of the family's parameter (or energy) to cover along the new family. It
        must contain the first member of the new family, which lies next to the
        bifurcation; the new family is followed from there away from the bifurcation.
    side : {+1, -1}
        Which way along the eigenvector to leave the old family (the two halves of a
        pitchfork, e.g. above and below a plane).
    offset : float, optional
        Distance of the first member from the bifurcation along the eigenvector, in the
        reduced coordinates of the section (default 1e-3 (1 + max |u|) at the bifurcation).
    steps, ds_max, tol, maxit, resonances
        As for :func:`phaselab.continue_family` (``ds_max`` default: the larger of a tenth
        of the span and 20 ``offset``).
    ds : float, optional
        First arclength step of the continuation (default ``offset``).

    Returns
    -------
    Family
        The new family; ``first`` is its first member, a :class:`PeriodicOrbit` with
        ``crossings`` twice the old family's after period doubling.

    Raises
    ------
    ParameterError
        Not a family, a flag of another family or of another kind, a bad option, or a span
        that does not contain the new family's first member.
    ModelError
        A family of orbits with conserved momenta (their reduced monodromy is not that of
        the return map being continued).
    IntegrationError
        The crossing could not be located, or Newton's method did not reach the new family.
    """
    inputs.instance(family, Family, "family", "a Family (from phaselab.continue_family)")
    flag = _flag(family, bifurcation)
    lo, hi = inputs.pair(span, "span")
    side = _side(side)
    tol = inputs.positive_number(tol, "tol")
    maxit = inputs.count(maxit, "maxit", minimum=1, maximum=1000)
    offset = None if offset is None else inputs.positive_number(offset, "offset")
    steps = inputs.count(steps, "steps", minimum=1, maximum=100_000)
    i, j = flag["between"]
    if family.orbit(i).symmetries:
        raise ModelError("branch switching is not available for orbits of a flow with conserved momenta")
    sigma = LEVELS[flag["kind"]]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        orbit, ret, shift, x_star, M, tangent = locate(family, flag, tol=tol, maxit=maxit)
        if offset is None:
            offset = 1e-3 * (1.0 + np.max(np.abs(x_star[:-1])))
        direction = leaving_direction(M, sigma, tangent) * side
        first = first_member(family, orbit, ret, shift, x_star, direction, offset, doubled=sigma < 0, tol=tol,
                             maxit=maxit)
    lam1 = float(first.energy) if family.parameter == "energy" else float(first.params[family.parameter])
    if not min(lo, hi) <= lam1 <= max(lo, hi):
        raise ParameterError(f"the new family starts at {family.parameter} = {lam1:.10g}, outside the span "
                             f"({lo:g}, {hi:g}); give a span that contains it")
    far = max(lo, hi) if lam1 > x_star[-1] else min(lo, hi) if lam1 < x_star[-1] else hi
    if far == lam1:
        raise ParameterError(f"the new family starts at {family.parameter} = {lam1:.10g}, at the end of the "
                             f"span ({lo:g}, {hi:g}) on its side; extend the span beyond it")
    ds = offset if ds is None else inputs.positive_number(ds, "ds")
    ds_max = max(abs(far - lam1) / 10.0, 20.0 * offset) if ds_max is None else ds_max
    return continue_family(first, family.parameter, (lam1, far), steps=steps, ds=ds, ds_max=ds_max, tol=tol,
                           maxit=maxit, resonances=resonances)


def _side(value) -> int:
    """+1 or -1 (the side of the old family to leave to)."""
    if isinstance(value, (int, np.integer)) and not isinstance(value, bool) and value in (1, -1):
        return int(value)
    raise ParameterError(f"side must be +1 or -1, got {value!r:.40}")


def _flag(family, bifurcation) -> dict:
    """The flag ``bifurcation`` of ``family`` (a dict of its list or a position in it)."""
    flags = family.bifurcations
    if isinstance(bifurcation, (int, np.integer)) and not isinstance(bifurcation, bool):
        if not -len(flags) <= bifurcation < len(flags):
            raise ParameterError(f"bifurcation {bifurcation} is not a position in the family's list of "
                                 f"{len(flags)} flagged bifurcations")
        flag = flags[bifurcation]
    elif isinstance(bifurcation, dict) and any(b is bifurcation or b == bifurcation for b in flags):
        flag = bifurcation
    else:
        raise ParameterError("bifurcation must be one of family.bifurcations (the dict or its position), "
                             f"got {type(bifurcation).__name__}")
    if flag["kind"] not in LEVELS:
        raise ParameterError(f"a new family is started where a pair passes +1 or -1 "
                             f"({', '.join(map(repr, LEVELS))}); this flag is {flag['kind']!r}")
    return flag


def locate(family, flag, *, tol, maxit):
    """The crossing of ``flag`` between its two members, corrected on the old family.

    Returns
    -------
    orbit : PeriodicOrbit
        The member before the crossing.
    ret : ReturnMap
        The family's return map (its parameter set at the crossing).
    shift : ndarray, shape (d,)
    x : ndarray, shape (d + 1,)
        (u*, lambda*) at the crossing.
    M : ndarray, shape (d, d)
        The monodromy there.
    tangent : ndarray, shape (d + 1,)
        The old family's unit tangent (the secant of the last bracket).
    """
    name, k = family.parameter, flag["pair"]
    level = 2.0 * LEVELS[flag["kind"]]
    i, j = flag["between"]
    a, b = family.orbit(i), family.orbit(j)
    ret = a.return_map()
    ends = [np.concatenate([_coords(ret, o), [family.values[m]]]) for o, m in ((a, i), (b, j))]
    shift = np.asarray(a.shift, dtype=float)
    g = [family.stability_indices[m, k].real - level for m in (i, j)]
    if not g[0] * g[1] < 0:
        raise IntegrationError(f"the flagged pair does not cross {level:+g} between members {i} and {j}")
    reference = family.stability_indices[i]
    best, M, last = None, None, None
    for _ in range(60):
        frac = g[0] / (g[0] - g[1])
        pred = ends[0] + frac * (ends[1] - ends[0])
        done = correct(ret, name, pred, shift, tol=tol, maxit=maxit, fixed=pred[-1])
        if done is None:
            break
        x, Ju, _, _ = done
        M = Ju + np.eye(len(Ju))
        pairs = multipliers.multiplier_pairs(M)
        gx = pairs.indices[multipliers.track(reference, pairs.indices)][k].real - level
        best = x
        if abs(gx) <= INDEX_TOL or abs(ends[1][-1] - ends[0][-1]) <= 1e-14 * (1.0 + abs(x[-1])):
            break
        side = 0 if gx * g[0] > 0 else 1
        ends[side], g[side] = x, gx
        if side == last:     # Illinois: halve the kept end's value so the bracket shrinks on both sides
            g[1 - side] *= 0.5
        last = side
    if best is None:
        raise IntegrationError(f"the crossing near {name} = {flag['parameter']:.10g} could not be located: "
                               "Newton's method failed on the old family there")
    tangent = ends[1] - ends[0]
    tangent /= np.linalg.norm(tangent)
    set_value(ret, name, best[-1])
    return a, ret, shift, best, M, tangent


def _coords(ret, orbit) -> np.ndarray:
    return ret.coordinates(orbit.points[:1])[0]


def leaving_direction(M, sigma, tangent) -> np.ndarray:
    """The unit direction (v, 0) in (u, lambda) off the old family: v the real eigenvector of
    ``M`` (d, d) for the multiplier nearest ``sigma`` (+1 or -1), its largest component made
    positive, without its part along the old family's ``tangent`` (d + 1,)."""
    lam, V = np.linalg.eig(M)
    v = V[:, np.argmin(np.abs(lam - sigma))]
    v = (v / v[np.argmax(np.abs(v))]).real
    v /= np.linalg.norm(v)
    w = np.concatenate([v, [0.0]])
    w -= (w @ tangent) * tangent
    norm = np.linalg.norm(w)
    if not norm > 1e-8:
        raise IntegrationError("the eigenvector of the critical multiplier lies along the old family "
                               "(a fold, where no new family is born)")
    return w / norm


def first_member(family, orbit, ret, shift, x_star, direction, offset, *, doubled, tol, maxit):
    """The first member of the new family: Newton's method from x* + offset direction on the
    (doubled, for period doubling) return map with the pseudo-arclength row, as a
    :class:`PeriodicOrbit`."""
    name = family.parameter
    if doubled:
        ret = orbit.return_map(2 * ret.k)
        set_value(ret, name, x_star[-1])
        shift = 2.0 * shift
    done = correct(ret, name, x_star + offset * direction, shift, tol=tol, maxit=max(maxit, 20),
                   plane=(direction, x_star, offset))
    if done is None:
        raise IntegrationError(f"Newton's method did not reach the new family {offset:.3g} off the bifurcation "
                               f"at {name} = {x_star[-1]:.10g}; try another offset")
    x = done[0]
    set_value(ret, name, x[-1])
    u = _wrapped(ret, x[:-1])
    img = ret.apply(u[None, :])
    own = ret.winding(img.u[0] - u, shift)
    residual = float(np.max(np.abs(img.u[0] - u - own)))
    return assemble(ret, u, image_of(img, 0), own, residual, 0)


def _wrapped(ret, u) -> np.ndarray:
    """Coordinates ``u`` (d,) with the model's angles in their intervals."""
    z = ret.lift(np.asarray(u, dtype=float)[None, :])[0]
    return ret.coordinates(ret.wrap(z))[0]
