"""The key to the periodic-orbit marks and manifold lines: which entries the shown structures
need, and the small HTML block the explorer puts under its plot (no widgets here)."""

from __future__ import annotations

import html

from phaselab.export.marks import BRANCH_STYLE, BRANCH_WORDS, KEY_WORDS, MARKERS

#: matplotlib marker codes -> a character that looks like the mark
SYMBOLS = {"o": "\u25cf", "X": "\u2716", "^": "\u25b2", "s": "\u25a0", "D": "\u25c6"}
#: line styles -> characters that look like the line
STROKES = {"-": "\u2014\u2014", "--": "\u2013 \u2013"}


def key_entries(stabilities, branches=()) -> list[tuple[str, str, str]]:
    """(symbol, colour, words) for each kind of mark in ``stabilities`` (in the order of
    :data:`MARKERS`, each once) and each manifold branch in ``branches``."""
    present = set(stabilities)
    out = []
    for word, (marker, colour) in MARKERS.items():
        if word in present:
            out.append((SYMBOLS.get(marker, "\u25c6"), colour, KEY_WORDS[word]))
    for word in sorted(set(present) - set(MARKERS)):
        out.append((SYMBOLS["D"], "#333333", word))
    for branch in ("stable", "unstable"):
        if branch in set(branches):
            colour, style = BRANCH_STYLE[branch]
            out.append((STROKES.get(style, "\u2014"), colour, BRANCH_WORDS[branch]))
    return out


def key_html(entries) -> str:
    """The key as one line of HTML (empty without entries)."""
    if not entries:
        return ""
    parts = [f"<span style='color:{c};font-weight:bold'>{html.escape(sym)}</span>&nbsp;{html.escape(words)}"
             for sym, c, words in entries]
    return "<div class='pl-key'>" + " &nbsp;&middot;&nbsp; ".join(parts) + "</div>"
