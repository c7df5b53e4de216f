"""Reading an explorer session file: the whole file is read and checked before the explorer
changes anything.

The format is described in :mod:`phaselab.widgets.session`. Reading is bounded: the path
must name a regular file of at most :data:`MAX_FILE_BYTES` (checked before a byte is read),
the JSON may nest at most :data:`MAX_DEPTH` levels (counted before it is parsed, so a deeply
nested file cannot exhaust the parser), and the file may hold at most :data:`MAX_ORBITS`
orbits and :data:`MAX_POINTS` crossings in all. Every value is checked for its type and
range; a problem is a :class:`~phaselab.errors.ParameterError` reading ``file: key: problem``.
"""

from __future__ import annotations

import itertools
import json
import math
import os
import re
import stat
from pathlib import Path

from phaselab.errors import ParameterError

FILE_FORMAT = "phaselab-explorer-session"
FILE_VERSION = 1
MAX_FILE_BYTES = 4 * 2**20
"""Largest session file read (a file of 2000 orbits takes about 100 kB)."""
MAX_DEPTH = 8
"""Deepest nesting of lists and mappings (the format needs 4)."""
MAX_ORBITS = 2000
"""Most orbits one file may restore."""
MAX_CROSSINGS = 100_000
"""Most crossings (iterates, samples) of one orbit, as in the explorer."""
MAX_POINTS = 2_000_000
"""Most crossings summed over the orbits of one file."""
KEYS = ("format", "version", "system", "kind", "energy", "params", "view", "color", "orbits", "selected")
VIEW_KEYS = ("plane", "solve_for", "direction", "axes", "ranges", "equal_aspect", "crossings", "coordinates",
             "held", "slab")
"""The last three only in files of the linked explorer (kind ``"section4"``)."""
LINKED_KIND = "section4"
"""The kind of the linked explorer's files, whose seeds hold every section coordinate."""
MAX_SEED = 64
"""Most numbers in one seed (a seed in every section coordinate of the linked explorer)."""
COLOR_KEYS = ("by", "low", "anchor", "high")
_STRING = re.compile(r'"(?:[^"\\]|\\.)*"', re.S)
_BRACKET = re.compile(r"[\[\]{}]")


class _Bad(Exception):
    """A problem at a key, turned into ``file: key: problem`` by :func:`read_session`."""

    def __init__(self, key, problem):
        super().__init__(problem)
        self.key = key


def read_session(path) -> dict:
    """Read and check a session file.

    Parameters
    ----------
    path : str or os.PathLike

    Returns
    -------
    dict
        The checked content: ``format``, ``version``, ``system`` (str), ``kind`` (str),
        ``energy`` (float or None), ``params`` (str -> float), ``view`` (its keys, each
        checked or None), ``color`` (``by`` str or None; ``low``, ``anchor``, ``high`` float
        or None), ``orbits`` (list of ``{"seed": (x, y), "crossings": int}``) and
        ``selected`` (int from 1, or None).

    Raises
    ------
    ParameterError
        ``file: key: problem`` for anything the explorer could not restore.
    """
    if not isinstance(path, (str, os.PathLike)):
        raise ParameterError(f"a session file is given by its path, got {type(path).__name__}")
    path = Path(path)
    text = _read_text(path)
    try:
        return _check(_parse(text))
    except _Bad as exc:
        raise ParameterError(f"{path}: {exc.key}: {exc}") from None


# ----------------------------------------------------------------------------- reading
def _read_text(path: Path) -> str:
    try:
        info = os.stat(path)
    except FileNotFoundError:
        raise ParameterError(f"{path}: no such session file") from None
    except (OSError, ValueError) as exc:
        raise ParameterError(f"{path}: cannot read this session file ({exc})") from None
    if not stat.S_ISREG(info.st_mode):
        raise ParameterError(f"{path}: not a regular file")
    if info.st_size > MAX_FILE_BYTES:
        raise ParameterError(f"{path}: {info.st_size} bytes is larger than a session file may be "
                             f"({MAX_FILE_BYTES} bytes)")
    try:
        with open(path, "rb") as fh:
            raw = fh.read(MAX_FILE_BYTES + 1)
    except OSError as exc:
        raise ParameterError(f"{path}: cannot read this session file ({exc})") from None
    if len(raw) > MAX_FILE_BYTES:
        raise ParameterError(f"{path}: larger than a session file may be ({MAX_FILE_BYTES} bytes)")
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError:
        raise ParameterError(f"{path}: not a JSON text file (not UTF-8)") from None


def _depth(text: str) -> int:
    """Deepest nesting of brackets outside strings (a linear scan, no recursion)."""
    steps = (1 if b in "[{" else -1 for b in _BRACKET.findall(_STRING.sub("", text)))
    return max(itertools.accumulate(steps, initial=0))


def _no_constant(name):
    raise ValueError(f"{name} is not a number a session file may hold")


def _unique(pairs):
    out = {}
    for key, value in pairs:
        if key in out:
            raise ValueError(f"the key {key!r} appears twice")
        out[key] = value
    return out


def _parse(text: str):
    if _depth(text) > MAX_DEPTH:
        raise _Bad("file", f"nested more than {MAX_DEPTH} levels deep; not a session file")
    try:
        return json.loads(text, parse_constant=_no_constant, object_pairs_hook=_unique)
    except (ValueError, RecursionError) as exc:
        raise _Bad("file", f"not a readable JSON file ({str(exc)[:200]})") from None


# ----------------------------------------------------------------------------- values
def _number(value, key) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise _Bad(key, f"must be a number, got {_show(value)}")
    try:
        v = float(value)
    except OverflowError:
        v = math.inf
    if not math.isfinite(v):
        raise _Bad(key, f"must be a finite number, got {_show(value)}")
    return v


def _optional_number(value, key):
    return None if value is None else _number(value, key)


def _integer(value, key, low, high) -> int:
    if isinstance(value, bool) or not isinstance(value, int):
        raise _Bad(key, f"must be a whole number, got {_show(value)}")
    if not low <= value <= high:
        raise _Bad(key, f"must lie in {low}..{high}, got {_show(value)}")
    return value


def _text(value, key, optional=True):
    if value is None and optional:
        return None
    if not isinstance(value, str) or len(value) > 200:
        raise _Bad(key, f"must be a short text, got {_show(value)}")
    return value


def _mapping(value, key, allowed=None) -> dict:
    if value is None:
        return {}
    if not isinstance(value, dict):
        raise _Bad(key, f"must be a mapping, got {_show(value)}")
    unknown = [k for k in value if allowed is not None and k not in allowed]
    if unknown:
        raise _Bad(f"{key}.{unknown[0]}", "is not a key of a session file")
    return value


def _pair(value, key) -> tuple[float, float]:
    if not isinstance(value, list) or len(value) != 2:
        raise _Bad(key, f"must be a list of two numbers, got {_show(value)}")
    return _number(value[0], key), _number(value[1], key)


def _show(value) -> str:
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


# ----------------------------------------------------------------------------- the file
def _check(data) -> dict:
    if not isinstance(data, dict) or data.get("format") != FILE_FORMAT:
        raise _Bad("format", f"this is not a {FILE_FORMAT} file")
    _mapping(data, "file", KEYS)
    if data.get("version") != FILE_VERSION or isinstance(data.get("version"), bool):
        raise _Bad("version", f"version {_show(data.get('version'))} is not supported (expected {FILE_VERSION})")
    params = _mapping(data.get("params"), "params")
    orbits = _orbits(data.get("orbits"), data.get("kind") == LINKED_KIND)
    selected = data.get("selected")
    if selected is not None:
        if not orbits:
            raise _Bad("selected", "must be null when the file holds no orbits")
        selected = _integer(selected, "selected", 1, len(orbits))
    return {
        "format": FILE_FORMAT, "version": FILE_VERSION,
        "system": _text(data.get("system"), "system"), "kind": _text(data.get("kind"), "kind"),
        "energy": _optional_number(data.get("energy"), "energy"),
        "params": {_text(k, "params", False): _number(v, f"params.{k}") for k, v in params.items()},
        "view": _view(data.get("view")), "color": _color(data.get("color")),
        "orbits": orbits, "selected": selected,
    }


def _view(value) -> dict:
    v = _mapping(value, "view", VIEW_KEYS)
    plane = v.get("plane")
    if plane is not None:
        plane = _mapping(plane, "view.plane")
        if len(plane) != 1:
            raise _Bad("view.plane", f"must fix exactly one component, e.g. {{\"x\": 0.0}}, got {_show(plane)}")
        plane = {_text(k, "view.plane", False): _number(x, f"view.plane.{k}") for k, x in plane.items()}
    direction = v.get("direction")
    if direction is not None and (isinstance(direction, bool) or direction not in (1, -1)):
        raise _Bad("view.direction", f"must be 1 or -1, got {_show(direction)}")
    axes = v.get("axes")
    if axes is not None:
        if not isinstance(axes, list) or len(axes) != 2:
            raise _Bad("view.axes", f"must be a list of two names, got {_show(axes)}")
        axes = [_text(a, "view.axes", False) for a in axes]
    ranges = v.get("ranges")
    if ranges is not None:
        if not isinstance(ranges, list) or len(ranges) != 2:
            raise _Bad("view.ranges", f"must be two [low, high] pairs, got {_show(ranges)}")
        ranges = [_pair(r, f"view.ranges[{i}]") for i, r in enumerate(ranges)]
        for i, (lo, hi) in enumerate(ranges):
            if not lo < hi:
                raise _Bad(f"view.ranges[{i}]", f"needs low < high, got [{lo:g}, {hi:g}]")
    equal = v.get("equal_aspect", False)
    if not isinstance(equal, bool):
        raise _Bad("view.equal_aspect", f"must be true or false, got {_show(equal)}")
    crossings = v.get("crossings")
    extra = _linked_view(v)
    return {**extra, "plane": plane, "solve_for": _text(v.get("solve_for"), "view.solve_for"),
            "direction": direction, "axes": axes, "ranges": ranges, "equal_aspect": equal,
            "crossings": None if crossings is None else _integer(crossings, "view.crossings", 1, MAX_CROSSINGS)}


def _linked_view(v) -> dict:
    """``coordinates``, ``held`` and ``slab`` of a linked explorer's view (absent: None)."""
    coords = v.get("coordinates")
    if coords is not None:
        if not isinstance(coords, list) or not 2 <= len(coords) <= MAX_SEED:
            raise _Bad("view.coordinates", f"must be a list of names, got {_show(coords)}")
        coords = [_text(c, "view.coordinates", False) for c in coords]
    held = v.get("held")
    if held is not None:
        held = {_text(k, "view.held", False): _number(x, f"view.held.{k}")
                for k, x in _mapping(held, "view.held").items()}
    slab = v.get("slab")
    if slab is not None:
        slab = _mapping(slab, "view.slab", ("name", "center", "half_width"))
        width = _number(slab.get("half_width"), "view.slab.half_width")
        if not width > 0:
            raise _Bad("view.slab.half_width", f"must be positive, got {width:g}")
        slab = {"name": _text(slab.get("name"), "view.slab.name", False),
                "center": _number(slab.get("center"), "view.slab.center"), "half_width": width}
    return {"coordinates": coords, "held": held, "slab": slab}


def _seed(value, key) -> list:
    """A seed: ``[x, y]`` in the shown plane, or one number per section coordinate."""
    if not isinstance(value, list) or not 2 <= len(value) <= MAX_SEED:
        raise _Bad(key, f"must be a list of 2 to {MAX_SEED} finite numbers, got {_show(value)}")
    return [_number(x, f"{key}[{i}]") for i, x in enumerate(value)]


def _color(value) -> dict:
    c = _mapping(value, "color", COLOR_KEYS)
    return {"by": _text(c.get("by"), "color.by"),
            **{k: _optional_number(c.get(k), f"color.{k}") for k in ("low", "anchor", "high")}}


def _orbits(value, linked=False) -> list:
    if value is None:
        return []
    if not isinstance(value, list):
        raise _Bad("orbits", f"must be a list, got {_show(value)}")
    if len(value) > MAX_ORBITS:
        raise _Bad("orbits", f"{len(value)} orbits are more than a session may restore ({MAX_ORBITS})")
    clean, total = [], 0
    for k, o in enumerate(value):
        key = f"orbits[{k}]"
        o = _mapping(o, key, ("seed", "crossings"))
        if "seed" not in o:
            raise _Bad(key, "needs a seed [x, y] of two finite numbers (one per section coordinate for "
                        f"kind {LINKED_KIND!r})")
        seed = _seed(o["seed"], f"{key}.seed") if linked else _pair(o["seed"], f"{key}.seed")
        n = _integer(o.get("crossings", 300), f"{key}.crossings", 1, MAX_CROSSINGS)
        total += n
        if total > MAX_POINTS:
            raise _Bad("orbits", f"more than {MAX_POINTS} crossings in all; restore fewer or shorter orbits")
        clean.append({"seed": seed, "crossings": n})
    return clean


__all__ = ["read_session", "FILE_FORMAT", "FILE_VERSION", "MAX_FILE_BYTES", "MAX_DEPTH", "MAX_ORBITS",
           "MAX_CROSSINGS", "MAX_POINTS"]
