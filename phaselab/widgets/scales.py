"""Colour scales for per-orbit values: chaos indicators, frequencies and diffusion.

A chaos indicator changes meaning at one value (MEGNO tends to 2 on quasi-periodic motion
and grows on chaotic orbits), so its scale is fixed, not stretched to each run's range, and
split at that value: below the anchor a cool ramp (regular), above it a warm ramp
(chaotic). The user may move the low end, the anchor and the high end. Frequencies have no
such value and use one sequential ramp over a range the user may also set.

No bokeh or ipywidgets here: the scales are numbers and hex colours, shared by the
explorer's bokeh figures and its static pictures.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from phaselab.errors import ParameterError

#: cool ramp (regular side): deep blue to pale blue
COOL = ("#1d3557", "#2b5d7d", "#5f8fb0", "#a9c6da")
#: warm ramp (chaotic side): sand to brick
WARM = ("#e9c46a", "#dc9a4e", "#c2603a", "#8e2f22")
#: one ramp for values without an anchor (frequencies)
SEQUENTIAL = ("#1d3557", "#2b5d7d", "#3f9a96", "#9cc08a", "#e0b64a", "#c2603a")
MISSING = "#b9b9b9"

CHAOS_INDICATORS = ("megno", "lyapunov", "fli", "sali")
FREQUENCY_VALUES = ("frequency", "diffusion")


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
    """

    low: float
    high: float
    anchor: float | None
    label: str
    log: bool = False

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
        k = int(round(n * (self.anchor - self.low) / (self.high - self.low)))
        k = min(max(k, 1), n - 1)
        return _ramp(COOL, k) + _ramp(WARM, n - k)

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
    "megno": Scale(0.0, 8.0, 2.0, "MEGNO (2: quasi-periodic)"),
    "lyapunov": Scale(0.0, 0.1, 0.01, "Lyapunov exponent (finite time)"),
    "fli": Scale(0.0, 12.0, 4.0, "FLI"),
    "sali": Scale(-16.0, 0.0, -8.0, "log10 SALI (below -8: chaotic)", log=True),
    "diffusion": Scale(-14.0, 0.0, -6.0, "log10 frequency diffusion"),
    "frequency": Scale(0.0, 0.5, None, "frequency"),
}


def scale_for(color_by, label=None, values=None) -> Scale | None:
    """The starting scale for ``color_by`` (None when orbits keep their own colours).

    For a value without a default (a user function, a result field) the scale spans
    ``values`` once, then stays fixed until the user changes it.
    """
    if color_by is None:
        return None
    if isinstance(color_by, str) and color_by in DEFAULT_SCALES:
        s = DEFAULT_SCALES[color_by]
        return replace(s, label=label) if label else s
    v = np.asarray(values if values is not None else [], float)
    v = v[np.isfinite(v)]
    lo, hi = (float(v.min()), float(v.max())) if v.size else (0.0, 1.0)
    if not hi > lo:
        lo, hi = lo - 0.5, hi + 0.5
    name = label or (color_by if isinstance(color_by, str) else "value")
    return Scale(lo, hi, None, name)
