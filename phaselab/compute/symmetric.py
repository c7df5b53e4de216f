"""Symmetric periodic orbits of reversible maps (Greene's method) and the breakup of an
invariant torus by Greene's residue criterion.

A map M with a reversor R (an involution with R M R = M^-1) is the product of two
involutions, M = R2 R1 with R1 = R and R2 = M R. A point z on the fixed set of R1 lies on
a periodic orbit of period Q when its j-th image w = M^j(z) lies on a fixed set: on that of
R1 when Q = 2j, on that of R2 when Q = 2j - 1 (from R1 M^j R1 = M^-j). So only about half the
period is iterated, and the search is for a point on a line whose image lands on another
line: far better conditioned than Newton's method on M^Q(z) = z for long periods (Greene
1979, J. Math. Phys. 20, 1183).

Here the two conditions R1(z) = z and R_i(w) = w (each of rank n in 2n components, wrapped
angles compared modulo their period) are solved together by the Gauss-Newton method, with
the exact Jacobian of M^j from the compiled tangent loop and those of R1 and R2 from the
compiled reversor kernel.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from fractions import Fraction

import numpy as np
import sympy as sp

from phaselab.codegen import compile_kernel
from phaselab.compute import codes, inputs
from phaselab.compute.returns import MapReturn
from phaselab.errors import IntegrationError, ModelError, ParameterError


class _Reversor:
    """A map's reversor as a system the code generator compiles (its rules as a "map")."""

    kind = "map"

    def __init__(self, system):
        self.update = list(system.reversor)
        self.coords, self.momenta = system.coords, system.momenta
        self.parameters = system.parameters
        self.name = "reversor"
        parts = ["reversor", system.key, repr([sp.srepr(e) for e in self.update])]
        self.key = hashlib.sha256("|".join(parts).encode()).hexdigest()[:20]

    @property
    def state_symbols(self):
        return self.coords + self.momenta

    @property
    def param_symbols(self):
        return tuple(p.symbol for p in self.parameters)


def _reversor_kernel(system):
    if getattr(system, "kind", "flow") != "map" or getattr(system, "reversor", None) is None:
        raise ModelError("symmetric orbits need a map with a reversor: AreaPreservingMap(..., reversor=[...])")
    return compile_kernel(_Reversor(system))


def _wrapped(diff, period):
    out = np.array(diff, dtype=float)
    w = period > 0
    out[..., w] = (out[..., w] + 0.5 * period[w]) % period[w] - 0.5 * period[w]
    return out


def _conditions(ret_half, rev, step, z, prm, Q):
    """Residual (4n,) and Jacobian (4n, 2n) of the two symmetry conditions at ``z``."""
    m = z.size
    eye = np.eye(m)
    rz = rev.call("map_step", z, prm)
    drz = rev.call("map_jacobian", z, prm)
    img = ret_half.apply(z[None, :])
    if img.status[0] != codes.OK:
        return None, None, int(img.status[0])
    w, dw = img.state[0], img.jacobian[0]
    if Q % 2 == 0:                           # w on the fixed set of R1
        rw = rev.call("map_step", w, prm)
        drw = rev.call("map_jacobian", w, prm)
    else:                                    # w on the fixed set of R2 = M R1
        r1w = rev.call("map_step", w, prm)
        rw = step.call("map_step", r1w, prm)
        drw = step.call("map_jacobian", r1w, prm) @ rev.call("map_jacobian", w, prm)
    period = ret_half.period
    F = np.concatenate([_wrapped(rz - z, period), _wrapped(rw - w, period)])
    J = np.vstack([drz - eye, (drw - eye) @ dw])
    return F, J, codes.OK


def _half(Q: int) -> int:
    return Q // 2 if Q % 2 == 0 else (Q + 1) // 2


def symmetric_solve(system, guess, Q, prm, tol=1e-11, maxit=60, box=None):
    """The point on the fixed set of the reversor near ``guess`` that starts a symmetric
    orbit of period ``Q``: ``(z, iterations, residual)``.

    Raises
    ------
    IntegrationError
        When the Gauss-Newton iteration does not converge (with the reason).
    """
    lo, hi = inputs.box(system, box)
    j = _half(Q)
    ret_half = MapReturn(system, j, prm, lo, hi)
    rev = _reversor_kernel(system)
    step = ret_half.loops.kernel
    z = np.array(guess, dtype=float)
    F, J, st = _conditions(ret_half, rev, step, z, prm, Q)
    if F is None:
        raise IntegrationError(f"no symmetric period-{Q} orbit from this guess: {codes.STATUS[st]}")
    norm = np.max(np.abs(F))
    # a step is kept below a quarter of the spacing of neighbouring period-Q orbits on the
    # line (a twist of one period over Q iterates), so the search stays on its branch
    wrapped = ret_half.period[ret_half.period > 0]
    cap = 0.25 * (wrapped.max() if wrapped.size else 2 * np.pi) / Q
    for it in range(maxit):
        if norm <= tol * (1.0 + np.max(np.abs(z))):
            return z, it, norm
        delta = np.linalg.lstsq(J, -F, rcond=None)[0]
        size = np.max(np.abs(delta))
        if size > cap:
            delta *= cap / size
        lam = 1.0
        for _ in range(14):
            trial = z + lam * delta
            Ft, Jt, st = _conditions(ret_half, rev, step, trial, prm, Q)
            if Ft is not None and np.max(np.abs(Ft)) <= (1.0 - 0.25 * lam) * norm:
                z, F, J, norm = trial, Ft, Jt, np.max(np.abs(Ft))
                break
            lam *= 0.5
        else:
            raise IntegrationError(f"no symmetric period-{Q} orbit from this guess: the Gauss-Newton "
                                   f"line search found no decrease (residual {norm:.3g}); try a closer guess")
    if norm <= tol * (1.0 + np.max(np.abs(z))):
        return z, maxit, norm
    raise IntegrationError(f"no symmetric period-{Q} orbit from this guess: iteration budget used up "
                           f"(residual {norm:.3g})")


def symmetric_orbit(system, guess, period, params=None, tol=1e-11, maxit=60, box=None):
    """A symmetric periodic orbit of a reversible map, found on a symmetry line (Greene's
    method); the :class:`~phaselab.compute.periodic.PeriodicOrbit` it returns has the full
    monodromy of ``period`` iterates, its residue and stability."""
    from phaselab.compute.periodic import _assemble

    Q = inputs.count(period, "period")
    prm = system.param_values(params)
    z, iters, _ = symmetric_solve(system, np.asarray(guess, dtype=float).ravel(), Q, prm, tol, maxit, box)
    lo, hi = inputs.box(system, box)
    full = MapReturn(system, Q, prm, lo, hi)
    img = full.apply(z[None, :])
    if img.status[0] != codes.OK:
        raise IntegrationError(f"the symmetric orbit stopped before closing: {codes.STATUS[int(img.status[0])]}")
    shift = np.zeros(len(z))
    wraps = full.period > 0
    adv = img.u[0] - z
    shift[wraps] = np.round(adv[wraps] / full.period[wraps]) * full.period[wraps]
    gap = np.max(np.abs(adv - shift))
    if gap > 1e-6 * (1.0 + np.max(np.abs(z))):
        raise IntegrationError(f"the point found on the symmetry line does not close after {Q} iterates "
                               f"(gap {gap:.3g}): its least period may differ; try another guess")
    from phaselab.compute.periodic import _image

    return _assemble(full, z, _image(img, 0), shift, gap, iters)


# ----------------------------------------------------------------------------- torus breakup
def convergents(x: float, max_period: int) -> list[Fraction]:
    """The continued-fraction convergents m/Q of ``x`` with Q <= ``max_period`` (Q >= 1).

    (:func:`torus_breakup` follows those with Q >= 2.)"""
    x = inputs.number(x, "rotation_number")
    out = []
    h0, h1, k0, k1 = 0, 1, 1, 0
    rest = x
    for _ in range(64):
        a = int(np.floor(rest))
        h0, h1 = h1, a * h1 + h0
        k0, k1 = k1, a * k1 + k0
        if k1 > max_period:
            break
        if k1 >= 1:
            out.append(Fraction(h1, k1))
        frac = rest - a
        if frac < 1e-15:
            break
        rest = 1.0 / frac
    return out


@dataclass(repr=False)
class TorusBreakup:
    """Greene's residue criterion for one invariant torus.

    Attributes
    ----------
    rotation_number : float
    parameter : str
    values : ndarray, shape (n_values,)
        The parameter values of the table.
    convergents : list of Fraction
        The rotation numbers m/Q of the symmetric orbits followed.
    residues : ndarray, shape (n_convergents, n_values, 2)
        Residues of the two symmetric orbits of each convergent (started on the two lines of
        the reversor's fixed set, angle 0 and half a period) at each value; NaN where none
        was found.
    critical : ndarray, shape (n_convergents,)
        For each convergent, the parameter where the residues of its symmetric orbits reach
        ``threshold`` in size (bisection; the mean over the orbits followed that far); their
        trend estimates where the torus breaks.
    estimate : float
        The estimate from the longest convergent.
    threshold : float
    """

    rotation_number: float
    parameter: str
    values: np.ndarray
    convergents: list
    residues: np.ndarray
    critical: np.ndarray
    estimate: float
    threshold: float
    params: dict = field(default_factory=dict)

    def table(self) -> str:
        lines = [f"{'m/Q':>10s} {'critical ' + self.parameter:>18s}"]
        for c, k in zip(self.convergents, self.critical):
            lines.append(f"{str(c):>10s} {k:18.12g}")
        return "\n".join(lines)

    def __repr__(self) -> str:
        return (f"TorusBreakup(rotation number {self.rotation_number:.12g}: torus breaks near "
                f"{self.parameter} = {self.estimate:.10g})\n" + self.table())


def _start(system, frac: Fraction, line: int, angle: int, action: int, action_of) -> np.ndarray:
    z = np.zeros(len(system.state_symbols))
    period = system.modulus[angle] if system.modulus[angle] is not None else 2 * np.pi
    low = system.modulus_low[angle] or 0.0
    z[angle] = low + (0.5 * period if line else 0.0)
    nu = frac.numerator / frac.denominator
    z[action] = period * nu if action_of is None else float(action_of(nu))
    return z


def _follow(system, frac, line, name, values, params, angle, action, tol, action_of=None):
    """Residues of the symmetric orbit of rotation number ``frac`` started on ``line`` at
    each parameter value in turn, each solve starting from the previous orbit. Between two
    values the parameter is stepped in about Q / 30 sub-steps: a long orbit's neighbours on
    the line are close, and a large step could land on one of them."""
    out = np.full(len(values), np.nan)
    points = [None] * len(values)
    guess = _start(system, frac, line, angle, action, action_of)
    sub = 1 + frac.denominator // 30
    last = None
    for i, v in enumerate(values):
        steps = [v] if last is None else list(np.linspace(last, v, sub + 1)[1:])
        orbit = None
        for w in steps:
            try:
                orbit = symmetric_orbit(system, guess, frac.denominator, params=dict(params, **{name: float(w)}),
                                        tol=tol)
            except IntegrationError:
                orbit = None
                break
            turns = orbit.shift[angle] / (system.modulus[angle] or 2 * np.pi)
            if round(turns) != frac.numerator:
                orbit = None
                break
            guess = orbit.points[0]
        if orbit is None:
            continue
        last = v
        out[i] = orbit.residue
        points[i] = orbit.points[0]
    return out, points


def torus_breakup(system, rotation_number, parameter, bracket, params=None, *, max_period=200,
                  threshold=0.25, steps=12, angle=None, action_of=None, tol=1e-11,
                  xtol=1e-9) -> TorusBreakup:
    """Where the invariant torus of a given rotation number breaks, by Greene's criterion.

    The residues of the symmetric periodic orbits whose rotation numbers are the
    continued-fraction convergents of ``rotation_number`` tend to 0 while the torus exists
    and grow without bound once it is gone; at the breakup they tend to about +-1/4
    (Greene 1979). For each convergent the parameter where its symmetric orbits' residues
    reach ``threshold`` in size is found by bisection; these converge to the breakup.

    Parameters
    ----------
    system : AreaPreservingMap
        A reversible twist map (with a reversor).
    rotation_number : float
        In turns of the angle per iterate, e.g. the golden mean (sqrt(5) - 1) / 2.
    parameter : str
        The parameter that destroys the torus (``"K"``).
    bracket : (float, float)
        Parameter values with the torus present at the first and gone at the second.
    max_period : int
        Longest convergent period followed.
    threshold : float
        The residue that marks the breakup (1/4 in Greene's criterion).
    steps : int
        Values of the parameter in the table over the bracket; also the continuation steps
        that bring each orbit from the low end to the bracket.
    angle : str, optional
        The wrapped angle whose winding defines the rotation number (default: the first
        wrapped coordinate); its partner is the action. The search starts on the symmetry
        lines angle = 0 and half a period.
    action_of : callable, optional
        ``action_of(nu)``: the action where the unperturbed map turns the angle by ``nu``
        turns per iterate, to start the search for rotation number ``nu = m/Q`` (default
        ``period * nu``, right for twist maps in the standard form angle' = angle + action').

    Returns
    -------
    TorusBreakup
    """
    inputs.system(system, kind="map")
    inputs.number(rotation_number, "rotation_number"), inputs.word(parameter, "parameter")
    threshold, tol, xtol = (inputs.positive_number(v, w) for v, w in
                            ((threshold, "threshold"), (tol, "tol"), (xtol, "xtol")))
    max_period, steps = inputs.count(max_period, "max_period"), inputs.count(steps, "steps", minimum=2)
    inputs.check_budget(2 * steps, 61.0 * 2 * max_period, 0, "torus_breakup")
    if getattr(system, "reversor", None) is None:
        raise ModelError("torus_breakup needs a reversible map (AreaPreservingMap(..., reversor=...))")
    names = [s.name for s in system.state_symbols]
    if parameter not in system.params:
        raise ParameterError(f"unknown parameter {parameter!r}; this map has: {', '.join(system.params)}")
    lo, hi = inputs.pair(bracket, "bracket")
    if not lo < hi:
        raise ParameterError(f"bracket needs low < high, got ({lo}, {hi})")
    if angle is None:
        wrapped = [i for i, mod in enumerate(system.modulus) if mod is not None]
        if not wrapped:
            raise ModelError("the map has no wrapped angle; give angle=...")
        a = wrapped[0]
    else:
        a = inputs.state_index(system, angle, "angle")
    n = system.dof
    b = (a + n) % (2 * n)
    fracs = [f for f in convergents(rotation_number, max_period)
             if f.denominator >= 2]
    if not fracs:
        raise ParameterError(f"no convergent of {rotation_number} has a period up to {max_period}")
    base = dict(system.params, **(inputs.mapping(params, "params") or {}))
    values = np.linspace(lo, hi, steps)
    residues = np.full((len(fracs), len(values), 2), np.nan)
    critical = np.full(len(fracs), np.nan)
    for c, frac in enumerate(fracs):
        # from the integrable end in steps that move a long orbit little
        ramp = np.linspace(0.0, lo, 6 + frac.denominator // 8)[:-1] if lo > 0 else np.zeros(0)
        seeds = {}
        for line in (0, 1):
            res, pts = _follow(system, frac, line, parameter, np.concatenate([ramp, values]), base, a, b, tol,
                               action_of)
            residues[c, :, line] = res[len(ramp):]
            seeds[line] = (res[len(ramp):], pts[len(ramp):])
        critical[c] = _bisect(system, frac, parameter, values, seeds, base, threshold, tol, xtol)
    finite = critical[np.isfinite(critical)]
    estimate = float(finite[-1]) if finite.size else float("nan")
    return TorusBreakup(rotation_number=float(rotation_number), parameter=parameter, values=values,
                        convergents=fracs, residues=residues, critical=critical, estimate=estimate,
                        threshold=float(threshold), params=dict(params or {}))


def _bisect(system, frac, name, values, seeds, params, threshold, tol, xtol):
    """The parameter where the residues of the convergent's symmetric orbits reach
    ``threshold`` in size (the elliptic one rises to +1/4 and the hyperbolic one falls to
    about -1/4 at the breakup, Greene 1979): bisection on each orbit that was followed
    across the threshold, averaged."""
    found = []
    for line in (0, 1):
        res, pts = seeds[line]
        size = np.abs(res)
        # past the breakup an orbit may be lost altogether: that counts as beyond the threshold
        beyond = ~np.isfinite(size) | (size >= threshold)
        cross = [i for i in range(1, len(res)) if np.isfinite(size[i - 1]) and size[i - 1] < threshold
                 and beyond[i] and pts[i - 1] is not None]
        if not cross:
            continue
        i = cross[0]
        a, b, za = values[i - 1], values[i], pts[i - 1]
        while b - a > xtol * max(1.0, abs(b)):
            mid = 0.5 * (a + b)
            try:
                orbit = symmetric_orbit(system, za, frac.denominator, params=dict(params, **{name: mid}), tol=tol)
            except IntegrationError:
                b = mid
                continue
            if orbit.residue is not None and abs(orbit.residue) < threshold:
                a, za = mid, orbit.points[0]
            else:
                b = mid
        found.append(0.5 * (a + b))
    return float(np.mean(found)) if found else np.nan
