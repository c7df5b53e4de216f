"""How structures are marked in every static figure: a marker shape and colour per stability,
a colour and line style per manifold branch."""

MARKERS = {
    "stable": ("o", "#2b5d7d"),
    "unstable": ("X", "#b5452f"),
    "inverse-unstable": ("^", "#7a5c9e"),
    "parabolic": ("s", "#5b5b5b"),
}
"""Marker shape and colour per stability."""

BRANCH_STYLE = {"unstable": ("#c0562f", "-"), "stable": ("#2b5d7d", "--")}
"""Colour and line style of manifold branches."""
