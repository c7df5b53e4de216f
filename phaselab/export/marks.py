"""How structures are marked in every static figure and in the explorer: a marker shape and
colour per stability, a colour and line style per manifold branch, and the words of the key.

The colours are chosen apart from every orbit colour (``ORBIT_COLORS`` in
:mod:`phaselab.export.figures`): a mark never reads as a point of an orbit, and a manifold
never reads as a mark.
"""

MARKERS = {
    "stable": ("o", "#000000"),
    "unstable": ("X", "#e0144c"),
    "inverse-unstable": ("^", "#c71fd1"),
    "parabolic": ("s", "#0099ff"),
}
"""Marker shape and colour per stability."""

BRANCH_STYLE = {"unstable": ("#00a000", "-"), "stable": ("#2c2cc9", "--")}
"""Colour and line style of manifold branches."""

KEY_WORDS = {
    "stable": "centre (stable)",
    "unstable": "saddle (unstable)",
    "inverse-unstable": "saddle with flip (unstable)",
    "parabolic": "parabolic (at the edge)",
}
"""What each mark means, in the key next to the marks."""

BRANCH_WORDS = {"unstable": "unstable manifold", "stable": "stable manifold"}
"""What each manifold line means, in the key."""
