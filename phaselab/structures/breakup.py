"""The breakup of an invariant torus of a reversible map by Greene's residue criterion:
:func:`torus_breakup` follows the symmetric orbits of the continued-fraction convergents of a
rotation number and brackets the parameter where their residues leave the stable range
(Greene 1979, J. Math. Phys. 20, 1183).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from fractions import Fraction

import numpy as np

from phaselab.engine import inputs, limits
from phaselab.errors import IntegrationError, ModelError, ParameterError
from phaselab.structures.periodic.symmetric import symmetric_orbit


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
    params : dict
        Parameter values given (the system's defaults for the others).
    system_name : str
        The name of the map (for footers of figures).
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
    system_name: str = ""

    def to_xarray(self):
        """An ``xarray.Dataset`` with CF attributes: residues and critical values."""
        from phaselab.structures.labelled import breakup_dataset

        return breakup_dataset(self)

    def plot(self, **kwargs):
        """A matplotlib figure of |residue| against the parameter for each convergent."""
        from phaselab.export.result_figures import breakup_figure

        return breakup_figure(self, **kwargs)

    def save(self, path, **kwargs):
        """Write .nc, .zarr, .svg, .pdf or .png (:data:`phaselab.export.SAVERS`); returns the path."""
        from phaselab.export import save

        return save(self, path, **kwargs)

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


def torus_breakup(system, rotation_number, parameter, span, *, params=None, max_returns=200,
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
    span : (float, float)
        Parameter values with the torus present at the first and gone at the second.
    max_returns : int
        Longest convergent period followed, in iterates (the denominator Q).
    threshold : float
        The residue that marks the breakup (1/4 in Greene's criterion).
    steps : int
        Values of the parameter in the table over the span; also the continuation steps
        that bring each orbit from the low end to the span.
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
    max_returns, steps = inputs.count(max_returns, "max_returns"), inputs.count(steps, "steps", minimum=2)
    limits.check_budget(2 * steps, 61.0 * 2 * max_returns, 0, "torus_breakup")
    if getattr(system, "reversor", None) is None:
        raise ModelError("torus_breakup needs a reversible map (AreaPreservingMap(..., reversor=...))")
    names = [s.name for s in system.state_symbols]
    if parameter not in system.params:
        raise ParameterError(f"unknown parameter {parameter!r}; this map has: {', '.join(system.params)}")
    lo, hi = inputs.pair(span, "span")
    if not lo < hi:
        raise ParameterError(f"span needs low < high, got ({lo}, {hi})")
    if angle is None:
        wrapped = [i for i, mod in enumerate(system.modulus) if mod is not None]
        if not wrapped:
            raise ModelError("the map has no wrapped angle; give angle=...")
        a = wrapped[0]
    else:
        a = inputs.state_index(system, angle, "angle")
    n = system.dof
    b = (a + n) % (2 * n)
    fracs = [f for f in convergents(rotation_number, max_returns)
             if f.denominator >= 2]
    if not fracs:
        raise ParameterError(f"no convergent of {rotation_number} has a period up to {max_returns} iterates")
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
                        threshold=float(threshold), params=dict(params or {}),
                        system_name=str(getattr(system, "name", "") or ""))


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
