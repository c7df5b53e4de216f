"""Every study file that ``check`` accepts renders, or fails with ``file: key: problem``
(issue 24, item 6).

The shipped study files are mutated one way at a time (a parameter renamed after a function,
numbers that sympy keeps exact inside functions, a box that holds no seed, a structure search
beyond the limits, a shell no seed reaches, steps far too small or too large, ...). Each mutant
goes through ``check`` (:func:`phaselab.studies.parse_study`); the accepted ones are rendered into
a temporary folder. Only a :class:`StudyFileError` whose message starts with the file name
and a key is allowed; any other exception fails the test. The studies are first shrunk (a
few seeds, 20 crossings) so each render takes about a second.
"""

from __future__ import annotations

import re

import pytest

from phaselab.errors import StudyFileError
from phaselab.studies import example_names, example_path, parse_study, render_study

#: a parameter of each shipped study, and an expression key to extend with a term
TARGETS = {
    "molecule": ("kappa", "hamiltonian", "y"),
    "kicked_rotor": ("kick", "map", "q"),
    "field_lines": ("eps", "map", "theta"),
    "shaken_cart": ("beta", "hamiltonian", "x"),
}
KEY_MESSAGE = re.compile(r"^[\w.-]+\.toml: (study|system|parameters|section|states|structure|output)\b"
                         r"[\w.\[\]]*( \([^)]*\))?: \S")


def _shrunk(name: str) -> str:
    text = example_path(name).read_text()
    text = re.sub(r"(?m)^crossings = \d+", "crossings = 20", text)
    text = re.sub(r"count = \d+", "count = 3", text)
    text = re.sub(r"(?m)^resolution = \d+", "resolution = 3", text)
    text = text.replace("manifolds = true", "manifolds = false")
    return re.sub(r"(\[[-\d.]+, [-\d.]+), 6\]", r"\1, 2]", text)


def _rename(text: str, old: str, new: str) -> str:
    return re.sub(rf"\b{old}\b", new, text)


def _add_term(text: str, key: str, term: str) -> str:
    if key == "hamiltonian":
        return re.sub(r'(?m)^(hamiltonian = ".*)"$', rf'\1 + {term}"', text, count=1)
    return re.sub(r'(\["\w+", ".*?)"\]', rf'\1 + {term}"]', text, count=1)


def _in_section(text: str, line: str) -> str:
    return text.replace("[section]\n", f"[section]\n{line}\n", 1)


def _mutants():
    out = []
    for name in example_names():
        param, key, coord = TARGETS[name]
        base = _shrunk(name)
        cases = {
            "param-cos": _rename(base, param, "cos"),
            "param-sqrt": _rename(base, param, "sqrt"),
            "param-exp": _rename(base, param, "exp"),
            "sin-huge": _add_term(base, key, f"sin(10**30)*{coord}**2/1000"),
            "atan-huge": _add_term(base, key, "atan(10**30)/1000"),
            "cos-huge-int": _add_term(base, key, f"cos(2**200)*{coord}/1000"),
            "box-tiny": _in_section(base, "box = 1e-300"),
            "box-small": _in_section(base, "box = 1e-3"),
            "structure-huge": re.sub(r"(?ms)^\[structure\].*?(?=^\[)", "", base) + (
                "\n[structure]\nreturns = 1000\nresolution = 20\n"
                f"ranges = {{ {coord} = [0.1, 0.2], {_partner(base, coord)} = [0.1, 0.2] }}\n"),
        }
        if "energy = " in base:
            cases["energy-below-all"] = re.sub(r"(?m)^energy = .*$", "energy = -50.0", base)
        if "dt = " in base:
            cases["dt-below-floor"] = re.sub(r"(?m)^dt = .*$", "dt = 1e-9", base)
            cases["dt-huge"] = re.sub(r"(?m)^dt = .*$", "dt = 1e6", base)
        for case, text in cases.items():
            out.append(pytest.param(name, text, id=f"{name}-{case}"))
    return out


def _partner(text: str, coord: str) -> str:
    momenta = re.search(r'momenta = \["(\w+)"', text).group(1)
    coords = re.search(r'coordinates = \["(\w+)"', text).group(1)
    return momenta if coord == coords else coords


def _check_then_render(name, text, out_dir):
    source = f"{name}.toml"
    try:
        study = parse_study(text, source)
    except StudyFileError as exc:
        return "refused", str(exc)
    try:
        render_study(study, out_dir)
    except StudyFileError as exc:
        return "render refused", str(exc)
    return "rendered", ""


@pytest.mark.slow
@pytest.mark.parametrize("name, text", _mutants())
def test_checked_study_renders_or_names_its_key(name, text, tmp_path):
    try:
        outcome, message = _check_then_render(name, text, tmp_path)
    except BaseException as exc:  # noqa: BLE001 - the point of the test
        pytest.fail(f"{type(exc).__name__} escaped check or render: {exc}")
    if outcome != "rendered":
        assert KEY_MESSAGE.match(message), message


def test_what_render_would_fail_on_is_found_by_check():
    """The cases of the issue, each found by check at its own key (no compile, no integration)."""
    base = example_path("molecule").read_text()
    cases = {
        "section.box": base.replace("dt = 0.05", "dt = 0.05\nbox = 1e-300"),
        "states": re.sub(r"(?m)^energy = .*$", "energy = -50.0", base),
    }
    for key, text in cases.items():
        with pytest.raises(StudyFileError, match=rf"^molecule.toml: {re.escape(key)}: "):
            parse_study(text, "molecule.toml")
    field = example_path("field_lines").read_text().replace("returns = 5", "returns = 1000").replace(
        "resolution = 8", "resolution = 20")
    with pytest.raises(StudyFileError, match=r"^field_lines.toml: structure.returns: .*set_limits"):
        parse_study(field, "field_lines.toml")
    # sympy keeps sin(10**30) exact; whatever evaluates it must give a number or check says where
    odd = base.replace("kappa*(x**2*y - y**3/3)", "kappa*(x**2*y - y**3/3) + sin(10**30)*y**2")
    try:
        parse_study(odd, "molecule.toml")
    except StudyFileError as exc:
        assert str(exc).startswith("molecule.toml: system.hamiltonian: ")
