"""Study files: reading, checking, refusing hostile input, and confining output paths.

Nothing here compiles kernels; rendering (and its equality with the Python calls) is
tested in tests/test_cli.py.
"""

from __future__ import annotations

import builtins
import math
import os
import textwrap

import numpy as np
import pytest
import sympy as sp

from phaselab.errors import StudyFileError
from phaselab.studies import (MAX_ORBITS, example_names, example_path, parse_study,
                              read_study)
from phaselab.studies.reader import confined_path

# A small valid study of our own: a puck on a tilted, dimpled air table (made-up constants).
BASE = textwrap.dedent("""
    [study]
    title = "Puck on a dimpled table"

    [system]
    hamiltonian = "(px**2 + py**2)/2 + (x**2 + 2*y**2)/2 + a*x*y**2"
    coordinates = ["x", "y"]
    momenta = ["px", "py"]

    [parameters]
    a = { default = 0.3, range = [0.0, 1.0] }

    [section]
    plane = "x = 0"
    energy = 0.05
    crossings = 20
    method = "leapfrog"
    dt = 0.02

    [states]
    solve_for = "px"
    line = { y = [-0.1, 0.1], py = [0.0, 0.0], count = 5 }

    [output]
    [[output.figure]]
    file = "puck.png"
    size = [4.0, 3.0]
    dpi = 80

    [[output.data]]
    file = "puck.csv"
    """)


def with_changes(text=BASE, **replace):
    """BASE with whole lines replaced: ``with_changes(**{'plane = "x = 0"': 'plane = "q = 1"'})``."""
    for old, new in replace.items():
        assert old in text, old
        text = text.replace(old, new)
    return text


def refused(text, *fragments, source="bad.toml"):
    """Parse ``text``, expect a StudyFileError, and check its message holds every fragment."""
    with pytest.raises(StudyFileError) as info:
        parse_study(text, source=source)
    msg = str(info.value)
    assert msg.startswith(f"{source}: "), msg
    for frag in fragments:
        assert frag in msg, f"{frag!r} not in {msg!r}"
    return msg


# ------------------------------------------------------------------------------- valid files
def test_base_study_reads_into_checked_values():
    study = parse_study(BASE, source="puck.toml")
    assert study.system_form == "hamiltonian"
    assert [s.name for s in study.system.state_symbols] == ["x", "y", "px", "py"]
    assert study.params == {"a": 0.3}
    assert study.system.parameters[0].range == (0.0, 1.0)
    sec = study.section
    assert (sec.kind, sec.coordinate, sec.value, sec.direction) == ("plane", "x", 0.0, 1)
    assert (sec.energy, sec.crossings, sec.method, sec.dt) == (0.05, 20, "leapfrog", 0.02)
    assert study.states.columns == ("y", "py")
    assert study.states.solve_for == "px"
    # linear seed line: numpy.linspace is the reference
    np.testing.assert_array_equal(study.states.values[:, 0], np.linspace(-0.1, 0.1, 5))
    assert [(o.kind, o.file) for o in study.outputs] == [("figure", "puck.png"), ("data", "puck.csv")]
    assert study.outputs[0].options == {"size": (4.0, 3.0), "dpi": 80.0}


def test_expression_strings_for_numbers_are_constants():
    text = with_changes(**{'energy = 0.05': 'energy = "pi/100"',
                           'a = { default = 0.3, range = [0.0, 1.0] }': 'a = "sqrt(2)/5"'})
    study = parse_study(text)
    # reference: Python's math module
    assert study.section.energy == pytest.approx(math.pi / 100, rel=1e-15)
    assert study.params["a"] == pytest.approx(math.sqrt(2) / 5, rel=1e-15)


def test_hamiltonian_matches_sympy_built_directly():
    study = parse_study(BASE)
    x, y, px, py, a = sp.symbols("x y px py a", real=True)
    reference = (px**2 + py**2) / 2 + (x**2 + 2 * y**2) / 2 + a * x * y**2  # sympy, built by hand
    assert sp.simplify(study.system.expr - reference) == 0


def test_grid_seeds_cover_the_product_in_state_order():
    text = with_changes(**{'line = { y = [-0.1, 0.1], py = [0.0, 0.0], count = 5 }':
                           'grid = { py = [-0.02, 0.02, 3], y = [-0.1, 0.1, 4] }'})
    seeds = parse_study(text).states
    assert seeds.columns == ("y", "py")  # state order, whatever order the file used
    assert seeds.count == 12
    pairs = {(round(a, 12), round(b, 12)) for a, b in seeds.values}
    # reference: itertools-style product of the two numpy.linspace axes
    expected = {(round(a, 12), round(b, 12)) for a in np.linspace(-0.1, 0.1, 4)
                for b in np.linspace(-0.02, 0.02, 3)}
    assert pairs == expected


def test_points_and_fixed_columns():
    text = with_changes(**{'line = { y = [-0.1, 0.1], py = [0.0, 0.0], count = 5 }':
                           'points = { y = [0.01, 0.02, 0.03] }\nfixed = { py = 0.005 }'})
    seeds = parse_study(text).states
    np.testing.assert_array_equal(seeds.values, [[0.01, 0.005], [0.02, 0.005], [0.03, 0.005]])


def test_lagrangian_form_builds_the_legendre_transform():
    # a bead on a hoop spinning at rate w about its vertical diameter (our lab rig, R = 1)
    text = textwrap.dedent("""
        [system]
        lagrangian = "m*R**2*(thd**2 + w**2*sin(th)**2)/2 + m*g*R*cos(th)"
        coordinates = ["th"]
        velocities = ["thd"]
        momenta = ["pth"]
        [parameters]
        m = 1.0
        R = 1.0
        g = 9.81
        w = 2.0
        [section]
        plane = "th = 0"
        crossings = 3
        [states]
        points = { pth = [0.1] }
        """)
    study = parse_study(text)
    th, pth, m, R, g, w = sp.symbols("th pth m R g w", real=True)
    # reference: Legendre transform done by hand, H = p^2/(2 m R^2) - m R^2 w^2 sin^2/2 - m g R cos
    H = pth**2 / (2 * m * R**2) - m * R**2 * w**2 * sp.sin(th)**2 / 2 - m * g * R * sp.cos(th)
    assert sp.simplify(study.system.expr - H) == 0


def test_catalogue_model_with_overrides_and_options():
    text = textwrap.dedent("""
        [system]
        model = "fput_chain"
        options = { n = 4 }
        [parameters]
        alpha = 0.1
        [section]
        plane = "q1 = 0"
        energy = 0.2
        crossings = 10
        [states]
        solve_for = "p1"
        points = { q2 = [0.1], q3 = [0.0], q4 = [0.0], p2 = [0.0], p3 = [0.0], p4 = [0.0] }
        """)
    study = parse_study(text)
    assert study.system_form == "model"
    assert study.system.dof == 4
    assert study.params == {"alpha": 0.1}


def test_map_study_with_named_modulus():
    text = textwrap.dedent("""
        [system]
        map = [["p", "p + k*sin(q)"], ["q", "q + p"]]
        coordinates = ["q"]
        momenta = ["p"]
        modulus = { q = "2*pi", p = ["-pi", "pi"] }
        [parameters]
        k = 0.5
        [section]
        crossings = 10
        [states]
        points = { q = [1.0, 2.0], p = [0.0, 0.1] }
        """)
    study = parse_study(text)
    assert study.section.kind == "map"
    # reference: math.pi
    assert study.system.modulus == pytest.approx((2 * math.pi, 2 * math.pi))
    assert study.system.modulus_low == pytest.approx((0.0, -math.pi))


@pytest.mark.parametrize("name", example_names())
def test_examples_read_and_name_their_outputs(name):
    study = read_study(example_path(name))
    assert study.outputs, name
    assert any(o.file.endswith(".png") for o in study.outputs)
    assert any(o.file.endswith(".csv") for o in study.outputs)
    assert study.states.count <= 64  # examples stay quick


def test_there_are_three_examples_including_the_demo():
    assert {"molecule", "kicked_rotor", "shaken_cart"} <= set(example_names())


# ------------------------------------------------------------------------------- hostile input
@pytest.mark.parametrize("expr, piece", [
    ("__import__('os').system('true')", "system.hamiltonian"),
    ("x.__class__.__bases__", "system.hamiltonian"),
    ("(lambda: 1)()", "system.hamiltonian"),
    ("[c for c in ().__class__.__base__.__subclasses__()]", "system.hamiltonian"),
    ("open('/etc/passwd')", "system.hamiltonian"),
    ("px**2 + eval('1')", "system.hamiltonian"),
    ("px**2 + x if x else y", "system.hamiltonian"),
    ("px**2 + zeta", "zeta"),
])
def test_code_in_expressions_is_refused_and_never_run(monkeypatch, expr, piece):
    called = []

    def trap(*args, **kwargs):
        called.append(args)
        raise AssertionError("a study file reached eval/exec")

    monkeypatch.setattr(builtins, "eval", trap)
    monkeypatch.setattr(builtins, "exec", trap)
    monkeypatch.setattr(os, "system", trap)
    text = with_changes(**{'hamiltonian = "(px**2 + py**2)/2 + (x**2 + 2*y**2)/2 + a*x*y**2"':
                           "hamiltonian = '''" + expr + "'''"})
    refused(text, piece)
    assert called == []


def test_hostile_number_expressions_are_refused():
    refused(with_changes(**{'energy = 0.05': 'energy = "__import__(\'os\')"'}), "section.energy")
    refused(with_changes(**{'energy = 0.05': 'energy = "x + 1"'}), "section.energy", "unknown")
    refused(with_changes(**{'energy = 0.05': 'energy = "9**9**9**9"'}), "section.energy")


def test_hostile_catalogue_names_and_options():
    model = textwrap.dedent("""
        [system]
        model = "{name}"
        {options}
        [section]
        plane = "x = 0"
        crossings = 3
        [states]
        points = {{ y = [0.0], px = [0.1], py = [0.0] }}
        """)
    refused(model.format(name="__import__", options=""), "system.model", "unknown model")
    refused(model.format(name="os.system", options=""), "system.model", "unknown model")
    refused(model.format(name="fput_chain", options="options = { __class__ = 1 }"),
            "system.options.__class__", "no option")
    refused(model.format(name="fput_chain", options="options = { n = { deep = 1 } }"),
            "system.options.n", "number or a string")
    refused(model.format(name="fput_chain", options="options = { n = 100000 }"), "system.options.n")
    refused(model.format(name="henon_heiles", options="").replace("[section]", "[parameters]\nz = 1\n[section]"),
            "parameters.z", "no parameter")


@pytest.mark.parametrize("old, new, fragments", [
    ('crossings = 20', 'crossings = "many"', ("section.crossings", "whole number")),
    ('crossings = 20', 'crossings = 2.5', ("section.crossings", "whole number")),
    ('crossings = 20', 'crossings = 0', ("section.crossings", "at least 1")),
    ('crossings = 20', 'crossings = true', ("section.crossings", "whole number")),
    ('energy = 0.05', 'energy = true', ("section.energy", "boolean")),
    ('energy = 0.05', 'energy = [0.05]', ("section.energy", "number")),
    ('energy = 0.05', 'energy = inf', ("section.energy", "finite")),
    ('energy = 0.05', 'energy = nan', ("section.energy", "finite")),
    ('dt = 0.02', 'dt = -0.02', ("section.dt", "positive")),
    ('dt = 0.02', 'dt = 1e-12', ("section.dt", "too small")),
    ('method = "leapfrog"', 'method = "warp_drive"', ("section.method", "unknown method")),
    ('coordinates = ["x", "y"]', 'coordinates = 3', ("system.coordinates", "list of names")),
    ('coordinates = ["x", "y"]', 'coordinates = ["x", "y z"]', ("system.coordinates[1]", "plain name")),
    ('coordinates = ["x", "y"]', 'coordinates = ["x", "__y"]', ("system.coordinates[1]", "plain name")),
    ('plane = "x = 0"', 'plane = "q = 0"', ("section.plane", "unknown plane component 'q'")),
    ('plane = "x = 0"', 'plane = "x"', ("section.plane", "<component> = <value>")),
    ('plane = "x = 0"', 'plane = 0', ("section.plane", "must be text")),
    ('plane = "x = 0"', 'plane = "x = zz"', ("section.plane", "unknown")),
    ('solve_for = "px"', 'solve_for = "x"', ("states.solve_for", "is fixed by the plane")),
    ('[section]', '[section]\ndirection = "sideways"', ("section.direction",)),
    ('a = { default = 0.3, range = [0.0, 1.0] }', 'a = { default = 0.3, range = [1.0, 0.0] }',
     ("parameters.a.range", "low < high")),
    ('a = { default = 0.3, range = [0.0, 1.0] }', 'a = { default = 3.0, range = [0.0, 1.0] }',
     ("parameters.a.default", "outside")),
    ('a = { default = 0.3, range = [0.0, 1.0] }', 'a = { value = 0.3 }', ("parameters.a.value", "unknown key")),
    ('a = { default = 0.3, range = [0.0, 1.0] }', 'a = "hello"', ("parameters.a", "unknown")),
    ('size = [4.0, 3.0]', 'size = [400.0, 3.0]', ("output.figure[0].size",)),
    ('dpi = 80', 'dpi = 100000', ("output.figure[0].dpi", "at most")),
    ('size = [4.0, 3.0]\ndpi = 80', 'size = [30.0, 30.0]\ndpi = 600', ("output.figure[0].dpi", "pixels")),
    ('file = "puck.png"', 'file = "puck.exe"', ("output.figure[0].file", ".svg")),
    ('[[output.data]]', '[[output.figure]]\nfile = "puck.png"\n[[output.data]]', ("output", "named twice")),
])
def test_wrong_types_and_values_name_the_key(old, new, fragments):
    refused(with_changes(**{old: new}), *fragments)


def test_unknown_keys_are_refused_with_their_dotted_path():
    refused(with_changes(**{'plane = "x = 0"': 'plnae = "x = 0"'}), "section.plnae", "unknown key")
    refused(BASE + "\n[extras]\nrun = 'rm -rf /'\n", "extras", "unknown key")
    refused(with_changes(**{'file = "puck.csv"': 'file = "puck.csv"\nformat = "x"'}),
            "output.data[0].format", "unknown key")
    refused(with_changes(**{'[study]': '[study]\nscript = "import os"'}), "study.script", "unknown key")
    refused(with_changes(**{'momenta = ["px", "py"]': 'momenta = ["px", "py"]\nmodulus = 1.0'}),
            "system.modulus", "not used with system.hamiltonian")


def test_missing_pieces_are_named():
    refused(BASE.replace("[system]", "[systm]"), "systm", "unknown key")
    refused(with_changes(**{'solve_for = "px"\n': ''}), "section.energy", "solve_for")
    refused(with_changes(**{'energy = 0.05\n': ''}), "section.energy", "missing")
    refused(with_changes(**{'line = { y = [-0.1, 0.1], py = [0.0, 0.0], count = 5 }':
                            'line = { y = [-0.1, 0.1], count = 5 }'}), "states.line", "py")
    refused(with_changes(**{'line = { y = [-0.1, 0.1], py = [0.0, 0.0], count = 5 }':
                            'line = { x = [0, 1], y = [-0.1, 0.1], py = [0.0, 0.0], count = 5 }'}),
            "states.line.x", "the plane sets it")


def test_seed_counts_beyond_the_limit_are_refused_before_allocating():
    refused(with_changes(**{'count = 5': 'count = 1000000000'}), "states.line.count", "at most")
    grid = 'grid = { y = [-0.1, 0.1, 100000], py = [0.0, 0.1, 100000] }'
    refused(with_changes(**{'line = { y = [-0.1, 0.1], py = [0.0, 0.0], count = 5 }': grid}),
            "states.grid", "the limit is")
    big = ", ".join(["0.0"] * (MAX_ORBITS + 1))
    refused(with_changes(**{'line = { y = [-0.1, 0.1], py = [0.0, 0.0], count = 5 }':
                            f'points = {{ y = [{big}], py = [{big}] }}'}), "states.points")
    refused(with_changes(**{'crossings = 20': 'crossings = 10000000'}), "section.crossings", "at most")
    refused(with_changes(**{'crossings = 20': 'crossings = 100000', 'count = 5': 'count = 4000'}),
            "section.crossings", "points")


def test_huge_arrays_are_refused():
    long = ", ".join(["1"] * 20000)
    refused(BASE.replace("[study]", f"[study]\n").replace('title = "Puck on a dimpled table"',
                                                          f'title = "t"\nabout = "x"\n')
            + f"\n[extras]\nbig = [{long}]\n", "extras")


@pytest.mark.parametrize("path, fragment", [
    ("../../etc/x.png", "leaves the output folder"),
    ("../x.png", "leaves the output folder"),
    ("sub/../../x.png", "leaves the output folder"),
    ("/etc/x.png", "relative path"),
    ("C:/x.png", "relative path"),
    ("~/x.png", "relative path"),
    ("sub\\\\..\\\\x.png", "relative path"),
    ("a/b/c/d/e/x.png", "4 folders"),
    (".hidden.png", "start with a letter or digit"),
    ("x\\u0000.png", "may hold only"),
])
def test_output_paths_may_not_leave_the_folder(path, fragment):
    refused(with_changes(**{'file = "puck.png"': f'file = "{path}"'}), "output.figure[0].file", fragment)


def test_output_folder_is_confined_too():
    refused(with_changes(**{'[output]': '[output]\nfolder = "../elsewhere"'}), "output.folder", "leaves")
    refused(with_changes(**{'[output]': '[output]\nfolder = "/tmp"'}), "output.folder", "relative")


def test_symlink_out_of_the_output_folder_is_refused(tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    outside = tmp_path / "outside"
    outside.mkdir()
    (out / "link").symlink_to(outside, target_is_directory=True)
    inside = confined_path(out, "", "plots/a.png")
    assert inside == (out / "plots" / "a.png").resolve()
    with pytest.raises(StudyFileError, match="outside the output folder"):
        confined_path(out, "link", "a.png")


def test_deeply_nested_tables_and_arrays_are_refused():
    deep_array = "x = " + "[" * 5000 + "]" * 5000 + "\n"
    refused(deep_array, source="deep.toml")
    dotted = "a" + "".join(f".k{i}" for i in range(50)) + " = 1\n"
    refused(dotted, "nested more than", source="deep.toml")
    inline = "a = " + "{ b = " * 30 + "1" + " }" * 30 + "\n"
    refused(inline, "nested more than", source="deep.toml")


def test_deeply_nested_expression_is_refused():
    expr = "(" * 500 + "px" + ")" * 500
    refused(with_changes(**{'"(px**2 + py**2)/2 + (x**2 + 2*y**2)/2 + a*x*y**2"': f'"{expr}"'}),
            "system.hamiltonian", "nested")


def test_not_an_area_preserving_map_is_refused():
    text = textwrap.dedent("""
        [system]
        map = ["2*q", "p"]
        coordinates = ["q"]
        momenta = ["p"]
        [section]
        crossings = 10
        [states]
        points = { q = [1.0], p = [0.0] }
        """)
    refused(text, "system.map", "not area-preserving")


def test_map_rules_of_the_wrong_shape():
    text = textwrap.dedent("""
        [system]
        map = [["p", 3]]
        coordinates = ["q"]
        momenta = ["p"]
        [section]
        crossings = 10
        [states]
        points = { q = [1.0], p = [0.0] }
        """)
    refused(text, "system.map[0]", "pair of strings")


def test_bad_toml_and_bad_files(tmp_path):
    refused("[system\nx = 1", "not valid TOML", source="broken.toml")
    big = tmp_path / "big.toml"
    big.write_text("# " + "x" * 300_000 + "\n")
    with pytest.raises(StudyFileError, match="big.toml: the file is .* bytes"):
        read_study(big)
    binary = tmp_path / "bin.toml"
    binary.write_bytes(b"\xff\xfe\x00[system]")
    with pytest.raises(StudyFileError, match="bin.toml: the file is not UTF-8"):
        read_study(binary)
    with pytest.raises(StudyFileError, match="missing.toml: cannot read"):
        read_study(tmp_path / "missing.toml")


def test_two_system_forms_are_refused():
    refused(with_changes(**{'coordinates = ["x", "y"]': 'coordinates = ["x", "y"]\nmodel = "kepler"'}),
            "system", "exactly one")


def test_stroboscopic_plane_needs_a_driven_system():
    refused(with_changes(**{'plane = "x = 0"': 'plane = "stroboscopic"'}), "section.plane", "time-periodic")


def test_map_refuses_flow_keys():
    text = textwrap.dedent("""
        [system]
        map = [["p", "p + sin(q)"], ["q", "q + p"]]
        coordinates = ["q"]
        momenta = ["p"]
        [section]
        crossings = 10
        dt = 0.1
        [states]
        points = { q = [1.0], p = [0.0] }
        """)
    refused(text, "section.dt", "not used for a map")


# ------------------------------------------------------------------------------- hardening
TOWER = "E**E**E**E**E"
DRIVEN = textwrap.dedent("""
    [system]
    hamiltonian = "p**2/2 + x**2/2 - f*x*cos(w*t)"
    coordinates = ["x"]
    momenta = ["p"]
    time = "t"
    period = "2*pi/w"

    [parameters]
    f = 0.1
    w = 1.3

    [section]
    plane = "stroboscopic"
    crossings = 10

    [states]
    line = { x = [-1.0, 1.0], p = [0.0, 0.0], count = 4 }
    """)


@pytest.mark.parametrize("where, text", [
    ("section.energy", with_changes(**{"energy = 0.05": f'energy = "{TOWER}"'})),
    ("parameters.a", with_changes(**{"a = { default = 0.3, range = [0.0, 1.0] }": f'a = "{TOWER}"'})),
    ("system.period", DRIVEN.replace('period = "2*pi/w"', f'period = "{TOWER}"')),
    ("section.plane", with_changes(**{'plane = "x = 0"': f'plane = "x = {TOWER}"'})),
])
def test_power_tower_numbers_are_refused_within_bounds(where, text):
    """E**E**E**E**E is about exp(10**(1.65e6)): no number. Refused as a StudyFileError at
    its key within 2 s of CPU and a few hundred MiB, in a child process with hard limits."""
    from bounded import run_bounded

    out = run_bounded(f"""
        from phaselab.studies import parse_study
        bounded(lambda: parse_study({text!r}, source="tower.toml"))
    """)
    assert out.finished, out
    assert out.error == "StudyFileError", out
    assert out.message.startswith(f"tower.toml: {where}:") and "too large" in out.message, out
    assert out.cpu < 2.0 and out.rss_mib < 400, out


@pytest.mark.parametrize("key, old, new", [
    ("study.title", 'title = "Puck on a dimpled table"', 'title = "$\\\\frac{$"'),
    ("study.title", 'title = "Puck on a dimpled table"', 'title = "gain $\\\\gainfactor$"'),
    ("study.title", 'title = "Puck on a dimpled table"', 'title = "${{{{{{{{{{{{{{{{x}}}}}}}}}}}}}}}}$"'),
    ("study.note", '[system]', 'note = "$x^$"\n\n[system]'),
    ("output.figure[0].title", 'dpi = 80', 'dpi = 80\ntitle = "$\\\\left($"'),
])
def test_mathtext_that_cannot_be_typeset_is_refused_at_its_key(key, old, new):
    msg = refused(with_changes(**{old: new}), f"bad.toml: {key}:", "math")
    assert "$" in msg


def test_mathtext_that_typesets_and_lone_dollars_are_accepted():
    study = parse_study(with_changes(**{'title = "Puck on a dimpled table"':
                                        'title = "Puck, $\\\\theta$ and $p_\\\\theta$, cost $5"'}))
    assert "theta" in study.title


@pytest.mark.parametrize("key, text", [
    ("system.hamiltonian", with_changes(**{"a*x*y**2": "a*x*y**2 + x**2/10**400"})),
    ("system.hamiltonian", with_changes(**{"a*x*y**2": "a*x*y**2 + (10**10)**1000*x"})),
    ("system.lagrangian", textwrap.dedent("""
        [system]
        lagrangian = "qd**3 + sin(qd)"
        coordinates = ["q"]
        velocities = ["qd"]
        [section]
        plane = "q = 0"
        crossings = 5
        [states]
        points = { p_q = [0.1] }
        """)),
    ("system.lagrangian", textwrap.dedent("""
        [system]
        lagrangian = "qd**5/5 + q*qd**3 + qd**2"
        coordinates = ["q"]
        velocities = ["qd"]
        [section]
        plane = "q = 0"
        crossings = 5
        [states]
        points = { p_q = [0.1] }
        """)),
])
def test_model_failures_are_study_file_errors(key, text):
    """A tiny rational whose denominator is beyond a double, a 10,001-digit integer, sympy's
    NotImplementedError on a transcendental momentum equation, a quartic one: each a
    StudyFileError at its key, within 2 s of CPU (child process with hard limits)."""
    from bounded import run_bounded

    out = run_bounded(f"""
        from phaselab.studies import parse_study
        bounded(lambda: parse_study({text!r}, source="bad.toml"))
    """)
    assert out.finished and out.error == "StudyFileError", out
    assert out.message.startswith(f"bad.toml: {key}:"), out
    assert out.cpu < 2.0, out


def test_large_float_in_an_expression_stays_a_float():
    """1e-300*tan(2.9e60) is read as a float (not a 61-digit integer that numpy cannot take
    the tangent of): H evaluates, and agrees with mpmath's tangent of the same binary64
    number (reference library). 2.9e260 is beyond the number limit: an error at its key."""
    import mpmath

    study = parse_study(with_changes(**{"a*x*y**2": "a*x*y**2 + 1e-300*tan(2.9e60)*x"}))
    state = np.array([0.5, 0.2, 0.1, -0.3])
    with mpmath.workdps(60):
        extra = float(mpmath.mpf(1e-300) * mpmath.tan(mpmath.mpf(2.9e60))) * 0.5
    # H at the state by hand: (px^2 + py^2)/2 + (x^2 + 2 y^2)/2 + a x y^2 + extra
    by_hand = (0.1**2 + 0.3**2) / 2 + (0.5**2 + 2 * 0.2**2) / 2 + 0.3 * 0.5 * 0.2**2 + extra
    assert study.system.energy(state) == pytest.approx(by_hand, rel=1e-14)
    refused(with_changes(**{"a*x*y**2": "a*x*y**2 + 1e-300*tan(2.9e260)*x"}), "system.hamiltonian",
            "2.9e260", "too large")


@pytest.mark.parametrize("folder", ["sub\n", "sub\r", "a/b\n", "\nsub"])
def test_output_names_with_line_breaks_are_refused(folder):
    text = with_changes(**{'[output]': f'[output]\nfolder = {folder!r}'.replace("'", '"')})
    refused(text, "output.folder", "may hold only")


def test_hostile_values_everywhere_give_only_study_file_errors():
    """A sweep of odd values through every key that takes an expression or a number: the
    reader may accept or refuse, but never raises anything other than StudyFileError, and
    the whole sweep ends within bounds (a child process with hard limits, since a missing
    guard would hang)."""
    from bounded import run_bounded

    hostile = [TOWER, "(10**10)**1000", "1/(10**200+1)+1/(10**200+3)", "tan(pi/2)", "acosh(0)",
               "1e-300*tan(2.9e260)", "x**-1000", "zoo", "sin()", "(" * 70 + "1" + ")" * 70, "1/0",
               "$\\frac{$", "2**0.5", "-0.0", "atan2(0, acos(2))", "x**pi**10**10**px**1.5"]
    lines = {'energy = 0.05': 'energy = {}', 'dt = 0.02': 'dt = {}', 'plane = "x = 0"': 'plane = "x = {}"',
             '"(px**2 + py**2)/2 + (x**2 + 2*y**2)/2 + a*x*y**2"': '"(px**2 + py**2)/2 + {}*x**2"',
             'a = { default = 0.3, range = [0.0, 1.0] }': 'a = {}',
             'line = { y = [-0.1, 0.1], py = [0.0, 0.0], count = 5 }': 'line = {{ y = [-0.1, {}], py = [0.0, 0.0], count = 5 }}',
             'title = "Puck on a dimpled table"': 'title = {}'}
    texts = [with_changes(**{old: new.format('"' + value.replace("\\", "\\\\") + '"')})
             for value in hostile for old, new in lines.items()]
    out = run_bounded(f"""
        from phaselab.errors import StudyFileError
        from phaselab.studies import parse_study

        def sweep():
            for text in {texts!r}:
                try:
                    parse_study(text, source="sweep.toml")
                except StudyFileError as exc:
                    assert str(exc).startswith("sweep.toml: "), str(exc)
            return len({texts!r})

        bounded(sweep)
    """, cpu=60)
    assert out.finished and out.error is None, out
    assert out.value == str(len(texts))


def test_structure_table_finds_the_island_chain_and_writes_it(tmp_path):
    """The shipped field-line study: its [structure] table finds the O- and X-points of the
    2/5 island chain. Their residues, recomputed from the map's Jacobian written out by hand
    and multiplied along the five points with numpy, agree: for psi' = psi - eps sin(5 theta),
    theta' = theta + 2 pi (i0 + s psi'), in (theta, psi): dpsi'/dtheta = -5 eps cos(5 theta),
    dtheta'/dtheta = 1 + 2 pi s dpsi'/dtheta, dtheta'/dpsi = 2 pi s (derived here);
    R = (2 - tr M)/4 (Greene 1979)."""
    import json
    import math

    from phaselab.studies import example_path, read_study, render_study

    study = read_study(example_path("field_lines"))
    assert study.structure.returns == 5 and study.structure.manifolds
    done = render_study(study, tmp_path)
    data = json.loads((tmp_path / "island_chain.json").read_text())
    eps, s = study.params["eps"], study.params["s"]
    words = set()
    for orbit in data["orbits"]:
        M = np.eye(2)
        for th in orbit["points"]["theta"]:
            a = -5 * eps * math.cos(5 * th)
            M = np.array([[1 + 2 * math.pi * s * a, 2 * math.pi * s], [a, 1.0]]) @ M
        assert orbit["residue"] == pytest.approx((2 - np.trace(M)) / 4, abs=1e-9)
        words.add(orbit["stability"])
    assert words == {"stable", "unstable"}
    assert len(done.manifolds) == 4 and (tmp_path / "field_lines.png").stat().st_size > 10_000


def test_structure_table_errors_name_the_key():
    from phaselab.errors import StudyFileError
    from phaselab.studies import parse_study

    base = """
[system]
map = [["p", "p + k*sin(q)"], ["q", "q + p"]]
coordinates = ["q"]
momenta = ["p"]
[parameters]
k = 0.5
[section]
crossings = 10
[states]
points = { q = [0.1], p = [0.2] }
"""
    with pytest.raises(StudyFileError, match="structure.returns"):
        parse_study(base + "[structure]\nranges = { q = [0, 1], p = [0, 1] }\n", "s.toml")
    with pytest.raises(StudyFileError, match="structure.ranges"):
        parse_study(base + "[structure]\nreturns = 2\nranges = { q = [0, 1] }\n", "s.toml")
    with pytest.raises(StudyFileError, match="structure.ranges.z"):
        parse_study(base + "[structure]\nreturns = 2\nranges = { q = [0, 1], z = [0, 1] }\n", "s.toml")
    with pytest.raises(StudyFileError, match="structure.resolution"):
        parse_study(base + "[structure]\nreturns = 2\nranges = { q = [0, 1], p = [0, 1] }\nresolution = 50\n",
                    "s.toml")
    with pytest.raises(StudyFileError, match="output.orbits"):
        parse_study(base + '[output]\n[[output.orbits]]\nfile = "o.json"\n', "s.toml")
