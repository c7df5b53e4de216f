"""Checked access to the values of a parsed study file.

Every getter takes the table it reads from, the dotted key path of that table (for error
messages) and the key, and either returns a plain Python value of the expected type or
raises :class:`~phaselab.errors.StudyFileError` naming the file, the dotted key and the
problem. Numbers may be written as TOML numbers or as short expression strings such as
``"2*pi"`` or ``"sqrt(2)/3"``; those strings go through the safe expression parser with no
symbols allowed, so they can only ever evaluate to a constant.
"""

from __future__ import annotations

import math

from phaselab.errors import ExpressionError, StudyFileError
from phaselab.model.parser import parse_expression

#: longest list any key may hold (seed columns, update rules, outputs, ...)
MAX_LIST = 10_000
#: deepest nesting of tables and lists a study file may have
MAX_NESTING = 6


class Fields:
    """The error-reporting context of one study file: its name, used in every message."""

    def __init__(self, source: str):
        self.source = source

    # ------------------------------------------------------------------ errors
    def error(self, key: str, problem: str) -> StudyFileError:
        """A :class:`StudyFileError` reading ``<file>: <key>: <problem>``."""
        where = f"{self.source}: {key}" if key else self.source
        return StudyFileError(f"{where}: {problem}")

    @staticmethod
    def join(path: str, key) -> str:
        return f"{path}.{key}" if path else str(key)

    # ------------------------------------------------------------------ structure
    def table(self, parent: dict, path: str, key: str, required: bool = False) -> dict:
        """A sub-table (empty dict when absent and not required)."""
        full = self.join(path, key)
        if key not in parent:
            if required:
                raise self.error(full, "missing table; this key is required")
            return {}
        value = parent[key]
        if not isinstance(value, dict):
            raise self.error(full, f"must be a table, got {_kind(value)}")
        return value

    def only_keys(self, table: dict, path: str, allowed) -> None:
        """Refuse keys outside ``allowed`` (listing the ones that are known)."""
        unknown = [k for k in table if k not in allowed]
        if unknown:
            names = ", ".join(self.join(path, k) for k in unknown)
            raise self.error(names, "unknown key" + ("s" if len(unknown) > 1 else "")
                             + f"; known keys here: {', '.join(sorted(allowed)) or 'none'}")

    def check_nesting(self, value, path: str = "", depth: int = 0) -> None:
        """Refuse tables and lists nested deeper than :data:`MAX_NESTING`."""
        if depth > MAX_NESTING:
            raise self.error(path or "(top level)",
                             f"nested more than {MAX_NESTING} levels deep; study files are flat")
        if isinstance(value, dict):
            for k, v in value.items():
                self.check_nesting(v, self.join(path, k), depth + 1)
        elif isinstance(value, list):
            if len(value) > MAX_LIST:
                raise self.error(path, f"has {len(value)} entries; the limit is {MAX_LIST}")
            for i, v in enumerate(value):
                self.check_nesting(v, f"{path}[{i}]", depth + 1)

    # ------------------------------------------------------------------ scalars
    def string(self, table: dict, path: str, key: str, default=None, required=False,
               max_length: int = 5000) -> str | None:
        full = self.join(path, key)
        if key not in table:
            if required:
                raise self.error(full, "missing; this key is required")
            return default
        value = table[key]
        if not isinstance(value, str):
            raise self.error(full, f"must be a string, got {_kind(value)}")
        if len(value) > max_length:
            raise self.error(full, f"is {len(value)} characters long; the limit is {max_length}")
        return value

    def drawn_text(self, table: dict, path: str, key: str, default=None, required=False,
                   max_length: int = 300) -> str | None:
        """A string drawn on figures (a title or a note): math between dollar signs must be
        something matplotlib can typeset (:func:`phaselab.export.describe.text_problem`)."""
        value = self.string(table, path, key, default=default, required=required, max_length=max_length)
        if value:
            from phaselab.export.describe import text_problem

            problem = text_problem(value)
            if problem:
                raise self.error(self.join(path, key), problem)
        return value

    def name(self, value, full: str) -> str:
        """A symbol name: a plain identifier not starting with an underscore."""
        if not isinstance(value, str):
            raise self.error(full, f"must be a name (a string), got {_kind(value)}")
        if not value.isidentifier() or value.startswith("_") or not value.isascii() or len(value) > 40:
            raise self.error(full, f"{value!r} is not a plain name (letters, digits and "
                                   "underscores, not starting with an underscore or a digit)")
        return value

    def names(self, table: dict, path: str, key: str, required=False) -> list[str] | None:
        full = self.join(path, key)
        if key not in table:
            if required:
                raise self.error(full, "missing; this key is required")
            return None
        value = table[key]
        if isinstance(value, str):
            value = [value]
        if not isinstance(value, list) or not value:
            raise self.error(full, f"must be a non-empty list of names, got {_kind(value)}")
        if len(value) > 256:
            raise self.error(full, f"has {len(value)} names; the limit is 256")
        return [self.name(v, f"{full}[{i}]") for i, v in enumerate(value)]

    def number(self, value, full: str) -> float:
        """A finite float from a TOML number or a constant expression string."""
        if isinstance(value, bool):
            raise self.error(full, f"must be a number, got a boolean ({value})")
        if isinstance(value, (int, float)):
            out = float(value)
        elif isinstance(value, str):
            try:
                expr = parse_expression(value, symbols={}, allowed=set())
                out = float(expr)
            except ExpressionError as exc:
                raise self.error(full, f"{value!r} is not a number or a constant expression: {exc}") from None
            except (TypeError, ValueError, OverflowError):
                raise self.error(full, f"{value!r} does not evaluate to a real number") from None
        else:
            raise self.error(full, f"must be a number, got {_kind(value)}")
        if not math.isfinite(out):
            raise self.error(full, f"must be finite, got {out}")
        return out

    def get_number(self, table: dict, path: str, key: str, default=None, required=False,
                   low=None, high=None, positive=False) -> float | None:
        full = self.join(path, key)
        if key not in table:
            if required:
                raise self.error(full, "missing; this key is required")
            return default
        out = self.number(table[key], full)
        if positive and not out > 0:
            raise self.error(full, f"must be positive, got {out:g}")
        if low is not None and out < low:
            raise self.error(full, f"must be at least {low:g}, got {out:g}")
        if high is not None and out > high:
            raise self.error(full, f"must be at most {high:g}, got {out:g}")
        return out

    def integer(self, table: dict, path: str, key: str, default=None, required=False,
                low: int = 1, high: int | None = None) -> int | None:
        full = self.join(path, key)
        if key not in table:
            if required:
                raise self.error(full, "missing; this key is required")
            return default
        value = table[key]
        if isinstance(value, bool) or not isinstance(value, int):
            raise self.error(full, f"must be a whole number, got {_kind(value)}")
        if value < low:
            raise self.error(full, f"must be at least {low}, got {value}")
        if high is not None and value > high:
            raise self.error(full, f"must be at most {high}, got {value}")
        return value

    def numbers(self, value, full: str, length: int | None = None) -> list[float]:
        if not isinstance(value, list):
            raise self.error(full, f"must be a list of numbers, got {_kind(value)}")
        if length is not None and len(value) != length:
            raise self.error(full, f"must have {length} entries, got {len(value)}")
        return [self.number(v, f"{full}[{i}]") for i, v in enumerate(value)]


def _kind(value) -> str:
    """A short description of a TOML value's type, for messages."""
    if isinstance(value, bool):
        return f"a boolean ({value})"
    if isinstance(value, (int, float)):
        return f"a number ({value!r})"
    if isinstance(value, str):
        text = value if len(value) <= 40 else value[:37] + "..."
        return f"a string ({text!r})"
    if isinstance(value, list):
        return f"a list of {len(value)} entries"
    if isinstance(value, dict):
        return "a table"
    return type(value).__name__  # dates and times
