"""The ``[normal_form]`` table of study files, its outputs, and ``phaselab normal-form``.

Outside reference: the degree-3 resonant term of a x y^2 on modes of frequencies 1 and 2,
by first-order averaging (derived in the test's docstring); sympy's LaTeX printer through
the Python call the study stands for.
"""

from __future__ import annotations

import json
import math
import textwrap

import pytest

import phaselab
from phaselab.cli import main
from phaselab.errors import StudyFileError
from phaselab.studies import parse_study, read_study, render_study

# A puck on a dimpled air table whose two stiffnesses are in the ratio 1 : 4 (made-up constants)
STUDY = textwrap.dedent("""
    [study]
    title = "Puck near a 1:2 resonance"

    [system]
    hamiltonian = "(px**2 + py**2)/2 + (x**2 + 4*y**2)/2 + a*x*y**2"
    coordinates = ["x", "y"]
    momenta = ["px", "py"]
    name = "puck"

    [parameters]
    a = 0.3

    [section]
    plane = "x = 0"
    energy = 0.02
    crossings = 10
    method = "leapfrog"
    dt = 0.02

    [states]
    solve_for = "px"
    line = { y = [-0.05, 0.05], py = [0.0, 0.0], count = 3 }

    [normal_form]
    at = [0.0, 0.0, 0.0, 0.0]
    order = 4
    resonances = [[1, -2]]

    [output]
    [[output.normal_form]]
    file = "nf.tex"
    [[output.normal_form]]
    file = "nf.json"
    [[output.normal_form]]
    file = "nf.png"
    size = [4.0, 3.0]
    dpi = 60
    j_max = 0.05
    """)


def changed(old, new, text=STUDY):
    assert old in text, old
    return text.replace(old, new)


def refused(text, *fragments):
    with pytest.raises(StudyFileError) as info:
        parse_study(text, source="nf.toml")
    msg = str(info.value)
    assert msg.startswith("nf.toml: "), msg
    for frag in fragments:
        assert frag in msg, (frag, msg)


def test_table_reads_and_check_describes_it(tmp_path, capsys):
    study = parse_study(STUDY, source="nf.toml")
    spec = study.normal_form
    assert spec.at == (0.0, 0.0, 0.0, 0.0) and spec.order == 4 and spec.resonances == ((1, -2),)
    assert [o.kind for o in study.outputs] == ["normal_form"] * 3
    assert study.outputs[2].options == {"size": (4.0, 3.0), "dpi": 60.0, "j_max": 0.05}
    path = tmp_path / "nf.toml"
    path.write_text(STUDY)
    assert main(["check", str(path)]) == 0
    out = capsys.readouterr().out
    assert "resonant [1, -2] normal form of order 4 at (0, 0, 0, 0)" in out and "writes nf.tex" in out


@pytest.mark.parametrize("old, new, fragments", [
    ("at = [0.0, 0.0, 0.0, 0.0]", "at = [0.0, 0.0]", ("normal_form.at", "4 entries")),
    ("at = [0.0, 0.0, 0.0, 0.0]", "at = [0.1, 0.0, 0.0, 0.0]", ("normal_form.at", "not an equilibrium")),
    ("at = [0.0, 0.0, 0.0, 0.0]\n", "", ("normal_form.at", "missing")),
    ("order = 4", "order = 40", ("normal_form.order", "at most 16")),
    ("order = 4", "order = 16", ("normal_form.order", "budget")),
    ("resonances = [[1, -2]]", "resonances = [[1, -2, 0]]", ("normal_form.resonances", "2 whole numbers")),
    ("resonances = [[1, -2]]", "resonances = [[1.5, -2]]", ("normal_form.resonances[0]", "whole numbers")),
    ("resonances = [[1, -2]]", "resonances = [[1, -2]]\nshift = 1", ("normal_form.shift", "unknown key")),
    ("resonances = [[1, -2]]", 'arithmetic = "rational"', ("normal_form.arithmetic", "auto")),
    ('file = "nf.tex"', 'file = "nf.csv"', ("output.normal_form[0].file", ".tex")),
    ('file = "nf.json"', 'file = "nf.json"\ndpi = 80', ("output.normal_form[1].dpi", "only figures")),
])
def test_bad_tables_name_the_key(old, new, fragments):
    refused(changed(old, new), *fragments)


def test_an_output_without_the_table_is_refused():
    start = STUDY.index("[normal_form]")
    text = STUDY[:start] + STUDY[STUDY.index("[output]"):]
    refused(text, "output.normal_form", "no")


def test_render_writes_what_the_python_call_gives(tmp_path):
    """The study's normal form is phaselab.normal_form with the same arguments (its LaTeX
    and JSON are the same), and its degree-3 term is the first-order average of a x y^2:
    with x = sqrt(2 J1) cos(phi1), y = sqrt(J2) cos(phi2) (y = sqrt(2 J2 / omega2) cos,
    omega2 = 2), a x y^2 = a sqrt(2 J1) J2 cos(phi1) (1 + cos 2 phi2) / 2, whose slow part
    is (a sqrt(2) / 4) J1^(1/2) J2 cos(phi1 - 2 phi2)."""
    study = parse_study(STUDY, source="nf.toml")
    done = render_study(study, tmp_path)
    nf = phaselab.normal_form(study.system, [0, 0, 0, 0], 4, resonances=[(1, -2)], params={"a": 0.3})
    assert (tmp_path / "nf.tex").read_text().strip().splitlines()[1] == nf.latex()
    data = json.loads((tmp_path / "nf.json").read_text())
    assert data["hamiltonian"] == str(nf.hamiltonian) and data["arithmetic"] == "exact"
    assert (tmp_path / "nf.png").stat().st_size > 0
    third = [t for t in done.normal_form.terms if t.degree == 3]
    assert len(third) == 1 and third[0].harmonic == (1, -2)
    assert math.isclose(float(third[0].cos_coef), 0.3 * math.sqrt(2) / 4, rel_tol=1e-14)
    assert "NormalForm(resonant" in done.summary()


def test_console_prints_a_normal_form(tmp_path, capsys):
    path = tmp_path / "nf.toml"
    path.write_text(STUDY)
    assert main(["normal-form", str(path)]) == 0
    out = capsys.readouterr().out
    assert "puck: NormalForm(resonant [(1, -2)], order 4, exact arithmetic" in out
    assert "(1, -2)" in out.split("harmonic k")[1]
    assert main(["normal-form", "pendulum", "--order", "4", "--latex"]) == 0
    latex = capsys.readouterr().out.strip()
    pendulum = phaselab.models.pendulum()
    assert latex == phaselab.normal_form(pendulum, [0, 0], 4).latex()
    assert main(["normal-form", str(path), "--order", "3", "--resonance", "1,-2", "--latex"]) == 0
    assert "\\cos" in capsys.readouterr().out
    assert main(["normal-form", "pendulum", "--at", "1,0"]) == 1
    assert "not an equilibrium" in capsys.readouterr().err
    assert main(["normal-form", "pendulum", "--at", "1"]) == 2
    assert "--at" in capsys.readouterr().err
    assert main(["normal-form", "pendulum", "--resonance", "a,b"]) == 2
    assert main(["normal-form", "henon_heiles", "--order", "4"]) == 1
    assert "--resonance" in capsys.readouterr().err
