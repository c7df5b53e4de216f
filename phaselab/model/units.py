"""Units of a model's coordinates, momenta, time and parameters, as checked plain strings.

A unit string is a product of named units with integer (or simple fraction) powers, with at
most one division::

    "m"   "kg m/s"   "kg*m^2/s"   "m s^-1"   "kg m**2 s**-2"   "rad"   "1" (dimensionless)

Grammar (our own, small and validated; no units library is a dependency)::

    unit    := "1" | product [ "/" product ]
    product := factor { (" " | "*") factor }          ("1" may stand for an empty numerator)
    factor  := name [ ("^" | "**") power ]
    name    := letters (at most 16)
    power   := integer | "(" integer "/" integer ")"

Names are not looked up in a table (a model may count in its own units: "AU", "day",
"turn"); the grammar is what is checked. Each unit is kept in one canonical form, factors in
the order first written, equal names combined, negative powers for the denominator
(``"kg m/s"`` -> ``"kg m s^-1"``), which is also what the CF conventions' units parser reads.
"""

from __future__ import annotations

import re
from fractions import Fraction
from typing import Mapping

from phaselab.errors import ModelError

#: longest unit string accepted
MAX_UNIT_CHARS = 80
_FACTOR = re.compile(r"^([^\W\d_]{1,16})(?:\^(-?\d{1,3}|\(-?\d{1,3}/\d{1,3}\)))?$")


def _factors(text: str, what: str) -> list[tuple[str, Fraction]]:
    text = text.replace("**", "^")
    out = []
    for token in re.split(r"[\s*]+", text.strip()):
        if not token:
            continue
        if token == "1":
            continue
        m = _FACTOR.match(token)
        if m is None:
            raise ModelError(f"{what}: {token!r} is not a unit factor (a name such as m or kg, "
                             "optionally with a power such as ^2 or ^-1)")
        power = Fraction(1)
        if m.group(2):
            raw = m.group(2).strip("()")
            num, _, den = raw.partition("/")
            if den and int(den) == 0:
                raise ModelError(f"{what}: the power {m.group(2)} divides by zero")
            power = Fraction(int(num), int(den) if den else 1)
        out.append((m.group(1), power))
    return out


def parse_unit(text, what: str = "unit") -> str:
    """Check a unit string and return its canonical form.

    Parameters
    ----------
    text : str
        A unit such as ``"kg m/s"``.
    what : str
        What the unit belongs to, for messages (``"units of 'px'"``).

    Returns
    -------
    str
        The canonical form (``"kg m s^-1"``; ``"1"`` for a dimensionless quantity).

    Raises
    ------
    ModelError
        Not a string, too long, more than one ``/``, or a factor outside the grammar.
    """
    if not isinstance(text, str):
        raise ModelError(f"{what} must be a string such as 'm' or 'kg m/s', got {text!r}")
    if len(text) > MAX_UNIT_CHARS:
        raise ModelError(f"{what} is longer than {MAX_UNIT_CHARS} characters")
    if not text.strip():
        raise ModelError(f"{what} is empty; write '1' for a dimensionless quantity")
    parts = re.split(r"/(?![^()]*\))", text)   # a "/" inside a power's parentheses is not a division
    if len(parts) > 2:
        raise ModelError(f"{what}: {text!r} divides more than once; write kg/(m s) as 'kg m^-1 s^-1'")
    numer = _factors(parts[0], what)
    if len(parts) == 2:
        if not parts[1].strip():
            raise ModelError(f"{what}: {text!r} has nothing after '/'")
        denom = _factors(parts[1], what)
        numer += [(n, -p) for n, p in denom]
    powers: dict[str, Fraction] = {}
    for name, power in numer:
        powers[name] = powers.get(name, Fraction(0)) + power
    shown = [_show(n, p) for n, p in powers.items() if p != 0]
    return " ".join(shown) if shown else "1"


def _show(name: str, power: Fraction) -> str:
    if power == 1:
        return name
    if power.denominator == 1:
        return f"{name}^{power.numerator}"
    return f"{name}^({power.numerator}/{power.denominator})"


def declared_units(spec, allowed: Mapping[str, str]) -> dict[str, str]:
    """Read a model's ``units=`` declaration.

    Parameters
    ----------
    spec : None or mapping
        ``{"x": "m", "px": "kg m/s", "t": "s", "mu": "1"}``; keys are names (or sympy symbols)
        of coordinates, momenta, the time and parameters.
    allowed : mapping of str to str
        Each name that may carry a unit, with what it is (for messages).

    Returns
    -------
    dict of str to str
        Canonical units by name, in the order of ``allowed``.
    """
    if spec is None:
        return {}
    if not isinstance(spec, Mapping):
        raise ModelError(f"units must map names to unit strings, e.g. {{'x': 'm', 't': 's'}}, got {spec!r}")
    out = {}
    for key, text in spec.items():
        name = getattr(key, "name", key)
        if not isinstance(name, str) or name not in allowed:
            raise ModelError(f"units: {key!r} is not a coordinate, momentum, time or parameter of this "
                             f"system; it has {', '.join(allowed)}")
        out[name] = parse_unit(text, f"units of {name!r}")
    return {n: out[n] for n in allowed if n in out}


def with_unit(label: str, unit: str | None) -> str:
    """``"x [m]"`` from a label and a unit (the label alone when there is no unit)."""
    return f"{label} [{unit}]" if unit else label
