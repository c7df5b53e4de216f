"""The footer of every figure: the system, the parameters used, the method and step (or a
map's iterates), the phaselab version, and the model-results reminder where a figure shows
stability or orbit families. One place for the text, its wrapping and its drawing.

Results are duck-typed: the system is found on the result, its orbit, its first orbit or
its members, else the ``meta`` dictionary a scan records.
"""

from __future__ import annotations

import math
import textwrap

import numpy as np

from phaselab.engine.provenance import MODEL_NOTE, plain
from phaselab.export.describe import FOOTER_SEPARATOR, plain_label, section_metadata

#: Font size of footer lines and of the note, in points.
FONT_SIZE = 6.5
#: Height of one footer line, of the note, and the gap above the footer, in inches.
LINE_HEIGHT, NOTE_HEIGHT, GAP = 0.14, 0.16, 0.08
#: Distance of the lowest line from the figure's lower edge, and of the text from the left edge (inches).
BASE, INDENT = 0.1, 0.1
FOOTER_COLOR, NOTE_COLOR = "#555555", "#6a6a6a"

#: Results whose figures show stability or orbit families: they carry the model-results reminder.
NOTED = frozenset({"PeriodicOrbit", "PeriodicOrbits", "Family", "Manifold", "Equilibrium", "EscapeMap",
                   "ChaosMap"})


def default_note(result) -> str | None:
    """The model-results reminder for results whose figures show stability regions or orbit
    families (:data:`NOTED`), else None."""
    return MODEL_NOTE if type(result).__name__ in NOTED else None


def _num(value) -> str:
    try:
        return f"{float(value):.6g}"
    except (TypeError, ValueError):
        return str(value)


def _meta(result) -> dict:
    meta = getattr(result, "meta", None)
    return meta if isinstance(meta, dict) else {}


def _source(result):
    """The object that holds the system, parameters and method: the result itself, its
    orbit (a manifold), its first member (a family) or its first orbit (a search)."""
    for candidate in (result, getattr(result, "orbit", None), getattr(result, "first", None)):
        if candidate is not None and getattr(candidate, "system", None) is not None:
            return candidate
    orbits = getattr(result, "orbits", None)
    if isinstance(orbits, list) and orbits and getattr(orbits[0], "system", None) is not None:
        return orbits[0]
    return result


def system_name(result) -> str:
    """The name of the result's system ("" when none is known)."""
    system = getattr(_source(result), "system", None)
    name = getattr(system, "name", None) or getattr(result, "system_name", None) or _meta(result).get("system")
    return str(name or "")


def varied(result) -> dict:
    """Parameters the result runs over, ``{name: (low, high)}`` (a family, a breakup, a scan)."""
    name, values = getattr(result, "parameter", None), getattr(result, "values", None)
    if isinstance(name, str) and values is not None and np.size(values):
        v = np.asarray(values, dtype=float)
        return {name: (float(np.nanmin(v)), float(np.nanmax(v)))}
    names, axes = getattr(result, "names", None), getattr(result, "axes", None)
    if "parameters" in _meta(result) and names and axes is not None:
        out = {}
        for n, a in zip(names, axes):
            try:
                a = np.asarray(a, dtype=float)
                out[str(n)] = (float(a.min()), float(a.max()))
            except (TypeError, ValueError):
                out[str(n)] = (a[0], a[-1])
        return out
    return {}


def units_of(result) -> dict:
    """The units the model declares, ``{name: unit}`` (from the system or a scan's record)."""
    units = getattr(getattr(_source(result), "system", None), "units", None) or _meta(result).get("units")
    return dict(units) if isinstance(units, dict) else {}


def used_params(result) -> dict:
    """Parameter values in force: the system's defaults overridden by the result's own."""
    source = _source(result)
    params = {}
    defaults = getattr(getattr(source, "system", None), "params", None)
    if isinstance(defaults, dict):
        params.update(defaults)
    own = getattr(source, "params", None)
    if not isinstance(own, dict):
        own = getattr(result, "params", None)
    params.update(own if isinstance(own, dict) else (_meta(result).get("params") or {}))
    return {str(k): plain(v) for k, v in params.items()}


def _with_method(result):
    """The first of the result, its orbit, its first member or first orbit that names a method."""
    orbits = getattr(result, "orbits", None)
    first_orbit = orbits[0] if isinstance(orbits, list) and orbits else None
    for candidate in (result, getattr(result, "orbit", None), getattr(result, "first", None), first_orbit):
        if isinstance(getattr(candidate, "method", None), str) and candidate.method:
            return candidate
    return result


def _method_text(result) -> str:
    """The integrator and its step, or a map's count of iterates where the result has them."""
    source, meta = _with_method(result), _meta(result)
    method = getattr(source, "method", None) or meta.get("method") or ""
    dt = getattr(source, "dt", None)
    dt = meta.get("dt", math.nan) if dt is None else dt
    run = meta.get("t")
    if method == "map":
        count = f"{_num(run)} iterates" if run is not None else _map_count(source)
        return f"map, {count}" if count else "map"
    if not isinstance(method, str) or not method:
        return ""
    unit = units_of(result).get("t")
    unit = f" {unit}" if unit else ""
    text = method
    try:
        if math.isfinite(float(dt)):
            text += f", dt = {_num(dt)}{unit}"
    except (TypeError, ValueError):
        pass
    if isinstance(run, (int, float)) and math.isfinite(run):
        text += f", t = {_num(run)}{unit}"
    return text


def _map_count(source) -> str:
    """Iterates of a map result in words: chaos indicators' longest run, a trajectory's
    records, a periodic orbit's iterates per period; "" when unknown."""
    t_end = getattr(source, "t_end", None)
    if t_end is not None and np.isfinite(np.asarray(t_end, dtype=float)).any():
        return f"{_num(np.nanmax(np.asarray(t_end, dtype=float)))} iterates"
    states = getattr(source, "states", None)
    if getattr(source, "t", None) is not None and states is not None and np.ndim(states) == 3:
        return f"{np.shape(states)[1] - 1} iterates"
    crossings = getattr(source, "crossings", None)
    if isinstance(crossings, (int, np.integer)) and getattr(source, "period", None) is not None:
        return f"{crossings} iterate{'s' if crossings != 1 else ''} per period"
    return ""


def _section_parts(section) -> list[str]:
    """The plane and the counts of a section."""
    meta = section_metadata(section)
    parts = []
    plane = meta["plane"]
    if plane.get("kind") == "plane" and "index" in plane:
        names = meta["state"]
        idx = int(plane["index"])
        label = names[idx] if 0 <= idx < len(names) else f"z{idx}"
        arrow = {1: "upward", -1: "downward"}.get(plane.get("direction"), "both ways")
        parts.append(f"section {plain_label(label)} = {_num(plane.get('value', 0.0))}, {arrow}")
    elif plane.get("kind") == "stroboscopic":
        parts.append(f"stroboscopic, T = {_num(plane.get('period'))}")
    n_pts = int(np.isfinite(np.asarray(section.points)[..., section.axes[0]]).sum())
    parts.append(f"{section.points.shape[0]} orbits, {n_pts} points")
    return parts


def _normal_form_kind(nf) -> str:
    resonances = getattr(nf, "resonances", None)
    kind = "Birkhoff" if not resonances else "resonant " + ", ".join(str(tuple(r)) for r in resonances)
    return f"{kind} normal form of order {nf.order}"


def _extra_parts(result) -> list[str]:
    """What a kind of result adds: a section's plane and counts, a frequency analysis's
    samples, a normal form and its check."""
    if all(hasattr(result, k) for k in ("points", "counts", "axes", "plane")):
        return _section_parts(result)
    if hasattr(result, "normal_form") and hasattr(result, "n_samples"):
        unit = units_of(result).get("t")
        record = (f"records of t = {result.t:g}{' ' + unit if unit else ''}, "
                  if getattr(result, "t", None) is not None else "")
        return [f"{record}{result.n_samples} samples",
                f"{_normal_form_kind(result.normal_form)}; Laskar's frequency analysis"]
    if hasattr(result, "convergents") and hasattr(result, "threshold"):
        return [f"Greene's residue criterion, |R| = {_num(result.threshold)}"]
    if hasattr(result, "description") and hasattr(result, "levels"):
        n = np.size(result.levels)
        return [t for t in (str(result.description or ""), f"{n} level{'s' if n != 1 else ''}") if t]
    if hasattr(result, "order") and hasattr(result, "omega"):
        return [_normal_form_kind(result)]
    samples = getattr(result, "n_samples", None) or _meta(result).get("n_samples")
    if samples and hasattr(result, "nu"):
        window = _meta(result).get("window", getattr(result, "window", None))
        parts = [f"{samples} samples per orbit"]
        if isinstance(window, int) and window >= 0:
            parts.append(f"window order {window}")
        return parts
    return []


def footer_text(result) -> str:
    """One line, items joined by :data:`FOOTER_SEPARATOR`: system, energy, parameters
    (those run over as ranges), method and step or iterates, what the result adds, and
    ``phaselab <version>``."""
    from phaselab import __version__

    parts = []
    name = system_name(result)
    if name:
        parts.append(name)
    energy = getattr(_source(result), "energy", None)
    energy = _meta(result).get("energy") if energy is None else energy
    if isinstance(energy, (int, float)) and math.isfinite(energy):
        parts.append(f"E = {_num(energy)}")
    ranges = varied(result)
    params = {k: v for k, v in used_params(result).items() if k not in ranges}
    units = units_of(result)
    if params:
        parts.append(", ".join(f"{k} = {_num(v)}" + (f" {units[k]}" if units.get(k) else "")
                               for k, v in params.items()))
    for k, (lo, hi) in ranges.items():
        parts.append(f"{k} from {_num(lo)} to {_num(hi)}")
    method = _method_text(result)
    if method:
        parts.append(method)
    parts.extend(_extra_parts(result))
    parts.append(f"phaselab {__version__}")
    return FOOTER_SEPARATOR.join(parts)


def footer_lines(text: str, width_in: float, fontsize: float = FONT_SIZE) -> list[str]:
    """``text`` split at its separators into lines that fit ``width_in`` inches (an average
    glyph taken as 0.55 em wide, common practice for estimates)."""
    most = max(20, int((width_in - 2 * INDENT) * 72 / (0.55 * fontsize)))
    lines, current = [], ""
    for part in text.split(FOOTER_SEPARATOR):
        candidate = part if not current else current + FOOTER_SEPARATOR + part
        if current and len(candidate) > most:
            lines.append(current)
            current = part
        else:
            current = candidate
    return lines + ([current] if current else [])


def note_lines(note, width_in: float, fontsize: float = FONT_SIZE) -> list[str]:
    """The note broken between words into lines that fit ``width_in`` inches (same glyph
    estimate as :func:`footer_lines`)."""
    if not note:
        return []
    most = max(20, int((width_in - 2 * INDENT) * 72 / (0.55 * fontsize)))
    return textwrap.wrap(str(note), most) or [str(note)]


def margin(lines, note=None, width_in=None) -> float:
    """Height in inches the footer ``lines`` and the ``note`` (wrapped to ``width_in``
    inches; one line when no width is given) take under the axes."""
    n_note = len(note_lines(note, width_in)) if width_in is not None else (1 if note else 0)
    return (GAP + LINE_HEIGHT * len(lines) if lines else 0.0) + NOTE_HEIGHT * n_note


def draw(fig, lines, note=None) -> None:
    """Draw the note (italic, lowest) and the footer lines above it, small and grey, at
    the lower left of ``fig``; names are shown as written, never typeset as math."""
    width, height = fig.get_size_inches()
    y = BASE
    for line in reversed(note_lines(note, width)):
        fig.text(INDENT / width, y / height, line, ha="left", va="bottom", fontsize=FONT_SIZE,
                 color=NOTE_COLOR, style="italic", parse_math=False)
        y += NOTE_HEIGHT
    for line in reversed(lines):
        fig.text(INDENT / width, y / height, line, ha="left", va="bottom", fontsize=FONT_SIZE,
                 color=FOOTER_COLOR, parse_math=False)
        y += LINE_HEIGHT


def add_footer(fig, result, *, note=None, footer=True):
    """Put the footer of ``result`` (and ``note``) under a figure built without one.

    A figure with constrained layout keeps its size and lays its axes out above the footer;
    a figure with axes placed by hand has every axes and figure text moved up and the axes
    shortened by the footer's height, so the figure keeps its size in pixels.

    Returns
    -------
    matplotlib.figure.Figure
        ``fig``, with the footer drawn.
    """
    width, height = fig.get_size_inches()
    lines = footer_lines(footer_text(result), width) if footer else []
    room = margin(lines, note, width)
    if not room:
        return fig
    share = min(room / height, 0.5)
    engine = fig.get_layout_engine()
    if engine is not None and hasattr(engine, "set") and "rect" in getattr(engine, "_params", {}):
        engine.set(rect=(0.0, share, 1.0, 1.0 - share))
    else:
        for ax in fig.axes:
            box = ax.get_position()
            ax.set_position((box.x0, share + box.y0 * (1 - share), box.width, box.height * (1 - share)))
        for text in fig.texts:
            x, y = text.get_position()
            text.set_position((x, share + y * (1 - share)))
    draw(fig, lines, note)
    return fig
