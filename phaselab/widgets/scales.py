"""Colour scales for per-orbit values: chaos indicators, frequencies and diffusion.

A chaos indicator changes meaning at one value (MEGNO tends to 2 on quasi-periodic motion
and grows on chaotic orbits), so its scale is fixed, not stretched to each run's range, and
split at that value: below the anchor a cool ramp (regular), above it a warm ramp
(chaotic). MEGNO over a finite time does not sit exactly on 2 for an invariant torus, so its
split is a band (:func:`megno_band`) drawn in one colour, the band's width following from
the number of crossings. The user may move the low end, the anchor and the high end.
Frequencies have no such value: their scale spans the values found (:func:`fit_to_values`)
on one sequential ramp, and the colour bar title says the unit and what the sign means.

No bokeh or ipywidgets here: the scales are numbers and hex colours, shared by the
explorer's bokeh figures and its static pictures.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from phaselab.errors import ParameterError

#: cool ramp (regular side): deep blue to a mid blue that still shows on the off-white ground
COOL = ("#14294a", "#1f4e79", "#2f6fa3")
#: the colour of the band around the anchor (MEGNO near 2: an invariant torus), a green apart
#: from both ramps
BAND = "#23806a"
#: warm ramp (chaotic side): ochre to brick (no pale end: every colour shows on the ground)
WARM = ("#b97a10", "#c9662e", "#a8432a", "#74241b")
#: one ramp for values without an anchor (frequencies)
SEQUENTIAL = ("#1d3557", "#2b5d7d", "#3f9a96", "#9cc08a", "#e0b64a", "#c2603a")
MISSING = "#b9b9b9"

CHAOS_INDICATORS = ("megno", "lyapunov", "fli", "sali")
FREQUENCY_VALUES = ("frequency", "diffusion")
#: How the colour menu writes each value (method names as the literature writes them).
MENU_WORDS = {"megno": "MEGNO", "lyapunov": "Lyapunov exponent", "fli": "FLI", "sali": "SALI",
              "frequency": "frequency", "diffusion": "frequency diffusion"}


@dataclass(frozen=True)
class Scale:
    """A colour scale.

    Attributes
    ----------
    low, high : float
        Values at the two ends (values outside are drawn in the end colours).
    anchor : float or None
        Where the meaning changes (cool below, warm above); None for a plain ramp.
    label : str
        Title of the colour bar.
    log : bool
        The value shown is ``log10`` of the indicator (SALI).
    band : float
        Half-width of the band around ``anchor`` drawn in :data:`BAND` (values within it
        count as at the anchor); 0 for a plain split.
    span : str
        The integration time the band was set for, in words (e.g. "300 crossings").
    """

    low: float
    high: float
    anchor: float | None
    label: str
    log: bool = False
    band: float = 0.0
    span: str = ""

    def with_limits(self, low=None, anchor=None, high=None) -> "Scale":
        """The same scale with new ends or anchor (checked: low < anchor < high)."""
        lo = self.low if low is None else float(low)
        hi = self.high if high is None else float(high)
        an = self.anchor if anchor is None else float(anchor)
        if not (math.isfinite(lo) and math.isfinite(hi) and lo < hi):
            raise ParameterError(f"colour scale needs low < high, got {lo!r} and {hi!r}")
        if an is not None and not (lo < an < hi):
            raise ParameterError(f"the colour scale's anchor {an:g} must lie between low {lo:g} and high {hi:g}")
        return replace(self, low=lo, high=hi, anchor=an)

    @property
    def title(self) -> str:
        """The colour bar title: the label and, with a band, where the band lies."""
        if self.anchor is None or not self.band > 0:
            return self.label
        lo, hi = self.anchor - self.band, self.anchor + self.band
        return f"{self.label}; torus band {lo:.3g} to {hi:.3g}" + (f" for {self.span}" if self.span else "")

    def shown(self, value: float) -> float:
        """The number placed on the scale for an indicator value (log10 for SALI)."""
        v = float(value)
        if self.log:
            return math.log10(v) if v > 0 else float("nan")
        return v

    def palette(self, n: int = 256) -> list[str]:
        """``n`` hex colours from ``low`` to ``high``; with an anchor the cool ramp ends and
        the warm one starts at the anchor's place."""
        if self.anchor is None:
            return _ramp(SEQUENTIAL, n)
        span = self.high - self.low
        k0 = int(round(n * (self.anchor - self.band - self.low) / span))
        k1 = int(round(n * (self.anchor + self.band - self.low) / span))
        k0 = min(max(k0, 1), n - 1)
        k1 = min(max(k1, k0), n - 1)
        return _ramp(COOL, k0) + [BAND] * (k1 - k0) + _ramp(WARM, n - k1)

    def colors(self, values) -> list[str]:
        """The hex colour of each value (``MISSING`` for NaN)."""
        pal = self.palette()
        out = []
        for v in np.asarray(values, dtype=float).ravel():
            if not np.isfinite(v):
                out.append(MISSING)
                continue
            t = (v - self.low) / (self.high - self.low)
            out.append(pal[int(min(max(t, 0.0), 1.0 - 1e-12) * len(pal))])
        return out


def _ramp(stops, n):
    rgb = np.array([[int(c[k:k + 2], 16) for k in (1, 3, 5)] for c in stops], float)
    if n <= 0:
        return []
    t = np.linspace(0.0, 1.0, n)
    s = np.linspace(0.0, 1.0, len(stops))
    cols = np.stack([np.interp(t, s, rgb[:, k]) for k in range(3)], axis=1)
    return ["#%02x%02x%02x" % tuple(int(round(v)) for v in row) for row in cols]


#: Default scales. MEGNO: 2 on quasi-periodic orbits, 0 on stable isochronous motion,
#: growing like lambda t / 2 on chaotic ones (Cincotta & Simo 2000, A&AS 147, 205).
#: SALI: tends to a positive constant on regular orbits and to 0 exponentially on chaotic
#: ones; 1e-8 is the usual dividing value (Skokos 2001, J. Phys. A 34, 10029). The
#: Lyapunov, FLI and diffusion anchors depend on the integration time; the defaults below
#: are common-practice starting points for a few hundred crossings, to be adjusted.
DEFAULT_SCALES = {
    "megno": Scale(0.0, 8.0, 2.0, "MEGNO (2: quasi-periodic)", band=0.25),
    "lyapunov": Scale(0.0, 0.1, 0.01, "Lyapunov exponent (finite time)"),
    "fli": Scale(0.0, 12.0, 4.0, "FLI"),
    "sali": Scale(-16.0, 0.0, -8.0, "log10 SALI (below -8: chaotic)", log=True),
    "diffusion": Scale(-14.0, 0.0, -6.0, "log10 frequency diffusion"),
    "frequency": Scale(-0.5, 0.5, None, "frequency"),
}

#: Values whose scale spans the values found (until the user sets its ends).
FITTED = ("frequency",)

#: Crossings over which a deviation vector of a torus orbit settles into linear growth (a
#: choice of this project, see :func:`megno_band`).
SETTLE = 4.0


def megno_band(crossings) -> float:
    """Half-width of the MEGNO band around 2 counted as an invariant torus after
    ``crossings`` crossings (iterates, periods).

    On a torus the deviation vector grows linearly, |w| ~ a + b t, and the time-averaged
    MEGNO tends to 2 only like 2 - (2 tau / t) ln(t / tau) with tau = a / b (derived here
    from the definition of MEGNO, Cincotta & Simo 2000, A&AS 147, 205: finite-time values
    of regular orbits lie on either side of 2 once the oscillations of Y(t) are added).
    With tau = :data:`SETTLE` crossings the band is 2 tau ln(N / tau) / N for N crossings,
    at most 1 and at least 0.01: 0.115 for 300 crossings, 0.025 for 2000.
    """
    n = max(float(crossings), SETTLE * math.e)
    return float(min(1.0, max(0.01, 2.0 * SETTLE * math.log(n / SETTLE) / n)))


def megno_scale(crossings, label=None, noun="crossings") -> Scale:
    """The MEGNO scale with its band for ``crossings`` crossings (see :func:`megno_band`);
    ``noun`` names what is counted (crossings, iterates, periods, samples)."""
    s = DEFAULT_SCALES["megno"]
    return replace(s, band=megno_band(crossings), label=label or s.label, span=f"{int(crossings)} {noun}")


#: The unit of a frequency per kind of view (what one sample of the orbit is).
FREQUENCY_UNITS = {"section": "cycles per crossing", "map": "cycles per iterate",
                   "strobe": "cycles per drive period", "portrait": "cycles per unit time"}


def frequency_label(q, p, unit) -> str:
    """The frequency colour bar title: what is shown (the first degree of freedom, coordinate
    ``q`` and momentum ``p``), its unit, and what the sign means (the convention of
    :func:`phaselab.frequencies`: clockwise turning in the (q, p) plane is positive)."""
    return f"frequency of {q} ({unit}; + is clockwise in {q}, {p})"


def fit_to_values(scale: Scale, values) -> Scale:
    """``scale`` with its ends at the range of the finite ``values`` (widened by 5 % each side
    so the extreme orbits are not drawn in the end colours); unchanged without values."""
    v = np.asarray(values, float).ravel()
    v = v[np.isfinite(v)]
    if not v.size:
        return scale
    lo, hi = float(v.min()), float(v.max())
    pad = 0.05 * (hi - lo) if hi > lo else max(0.05 * abs(lo), 1e-3)
    return replace(scale, low=lo - pad, high=hi + pad)


def scale_for(color_by, label=None, values=None) -> Scale | None:
    """The starting scale for ``color_by`` (None when orbits keep their own colours).

    For a value without a default (a user function, a result field) the scale spans
    ``values`` once, then stays fixed until the user changes it.
    """
    if color_by is None:
        return None
    if isinstance(color_by, str) and color_by in DEFAULT_SCALES:
        s = DEFAULT_SCALES[color_by]
        if color_by in FITTED and values is not None:
            s = fit_to_values(s, values)
        return replace(s, label=label) if label else s
    v = np.asarray(values if values is not None else [], float)
    v = v[np.isfinite(v)]
    lo, hi = (float(v.min()), float(v.max())) if v.size else (0.0, 1.0)
    if not hi > lo:
        lo, hi = lo - 0.5, hi + 0.5
    name = label or (color_by if isinstance(color_by, str) else "value")
    return Scale(lo, hi, None, name)
