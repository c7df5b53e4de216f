"""The explorer's look: colours, sizes and fonts in one place.

A quiet paper-like ground, ink-coloured text and the project's orbit palette (shared with
the static figures of :mod:`phaselab.export`, so a saved figure matches the screen).
"""

from phaselab.export.figures import MISSING_COLOR, ORBIT_COLORS, SCALAR_STOPS

__all__ = ["ORBIT_COLORS", "SCALAR_STOPS", "MISSING_COLOR", "GROUND", "PANEL", "INK", "MUTED",
           "RULE", "BOUNDARY", "FORBIDDEN", "REFUSED", "FONT", "orbit_color", "scalar_palette"]

GROUND = "#fbfaf6"      # figure background: warm off-white
PANEL = "#f3f1ea"       # behind the figures' outer frame
INK = "#2e3136"         # text and axis lines
MUTED = "#7b7f86"       # secondary text, ticks
RULE = "#e6e2d8"        # grid lines
BOUNDARY = "#3b4048"    # edge of the energetically allowed region
FORBIDDEN = "#ebe7dd"   # fill outside the allowed region
REFUSED = "#a3432f"     # status text for refused input
FONT = "'Source Sans 3', 'Segoe UI', 'Helvetica Neue', Arial, sans-serif"


def orbit_color(index: int) -> str:
    """The colour of the ``index``-th orbit (cycled)."""
    return ORBIT_COLORS[index % len(ORBIT_COLORS)]


def scalar_palette(n: int = 256) -> list[str]:
    """``n`` hex colours interpolated through :data:`SCALAR_STOPS` (for per-orbit scalars)."""
    import numpy as np

    stops = np.array([[int(c[k:k + 2], 16) for k in (1, 3, 5)] for c in SCALAR_STOPS], float)
    t = np.linspace(0.0, 1.0, n)
    s = np.linspace(0.0, 1.0, len(stops))
    rgb = np.stack([np.interp(t, s, stops[:, k]) for k in range(3)], axis=1)
    return ["#%02x%02x%02x" % tuple(int(round(v)) for v in row) for row in rgb]
