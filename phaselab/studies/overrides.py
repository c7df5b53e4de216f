"""``--set key=value``: changes to a study file's values given on the command line.

An override names a dotted key of the file (``section.crossings``, ``parameters.eps`` or its
short form ``params.eps``, ``output.figure.0.dpi`` for the first ``[[output.figure]]``) and a
value. The value is read as a TOML value (``100``, ``0.2``, ``true``, ``[0.1, 0.2]``,
``"text"``) where it is one, so a number is a number wherever the key is numeric; where the
file already holds text at that key, or the value is not a TOML value (``x = 0``, ``2*pi``),
it is kept as text, which the readers parse as they parse the file (expressions stay strings
for the safe parser). The changed data then goes through every check of the file: an unknown
key is refused as in the file, naming it.
"""

from __future__ import annotations

import sys

from phaselab.studies.fields import Fields

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - exercised on Python 3.10 only
    import tomli as tomllib

#: most overrides one command line may give
MAX_OVERRIDES = 100
#: short forms of table names accepted in a key (the API's names)
ALIASES = {"params": "parameters"}


def split_override(text) -> tuple[str, str]:
    """``"key=value"`` -> ``("key", "value")`` (split at the first ``=``, key stripped)."""
    if not isinstance(text, str) or "=" not in text:
        raise ValueError(f"--set needs key=value, got {text!r}")
    key, value = text.split("=", 1)
    key = key.strip()
    if not key:
        raise ValueError(f"--set needs a key before '=', got {text!r}")
    return key, value.strip()


def apply_overrides(f: Fields, data: dict, overrides) -> dict:
    """Apply ``overrides`` (``"key=value"`` strings or ``(key, value)`` pairs) to the parsed
    study ``data`` in place, and return it.

    Raises
    ------
    StudyFileError
        A malformed override, or a key whose path runs through something that is not a table
        or a list (``<file>: --set <key>: problem``).
    """
    items = list(overrides or ())
    if len(items) > MAX_OVERRIDES:
        raise f.error("--set", f"{len(items)} overrides; the limit is {MAX_OVERRIDES}")
    for item in items:
        try:
            key, text = split_override(item) if isinstance(item, str) else (str(item[0]), str(item[1]))
        except (ValueError, TypeError, IndexError) as exc:
            raise f.error("--set", str(exc)) from None
        _set(f, data, key, text)
    return data


def _set(f: Fields, data: dict, key: str, text: str) -> None:
    parts = key.split(".")
    if any(not p for p in parts):
        raise f.error(f"--set {key}", "empty part in the dotted key")
    parts[0] = ALIASES.get(parts[0], parts[0])
    node = data
    for depth, part in enumerate(parts[:-1]):
        here = ".".join(parts[:depth + 1])
        if isinstance(node, list):
            node = node[_index(f, key, node, part)]
            continue
        if part not in node:
            node[part] = {}
        node = node[part]
        if not isinstance(node, (dict, list)):
            raise f.error(f"--set {key}", f"{here} is a value, not a table")
    last = parts[-1]
    if isinstance(node, list):
        i = _index(f, key, node, last)
        node[i] = _value(text, node[i])
    else:
        node[last] = _value(text, node.get(last))


def _index(f: Fields, key: str, node: list, part: str) -> int:
    if not part.isdigit() or int(part) >= len(node):
        raise f.error(f"--set {key}", f"{part!r} is not an index of a list of {len(node)} entries")
    return int(part)


def _value(text: str, current):
    """The override's value: text where the file holds text, else a TOML value if it is one."""
    if isinstance(current, str):
        return _unquote(text)
    try:
        return tomllib.loads(f"v = {text}")["v"]
    except (tomllib.TOMLDecodeError, KeyError, RecursionError):
        return text


def _unquote(text: str) -> str:
    if len(text) >= 2 and text[0] == text[-1] and text[0] in "\"'":
        return text[1:-1]
    return text
