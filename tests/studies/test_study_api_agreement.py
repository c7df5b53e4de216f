"""Study files agree with the API (issue 19, item 7): the same names, plane forms and limits,
unused parameters refused, ``--set key=value`` overrides, angles and units declared as in
``Hamiltonian(angles=..., units=...)``, and a quiet exit on a closed pipe for every command."""

import math
import subprocess
import sys

import pytest

import phaselab
from phaselab import StudyFileError
from phaselab.cli import main
from phaselab.studies import parse_study
from phaselab.studies.overrides import split_override

BASE = """
[system]
hamiltonian = "(px**2 + py**2)/2 + (x**2 + 2*y**2)/2 + a*x**2*y"
coordinates = ["x", "y"]
momenta = ["px", "py"]

[parameters]
a = { default = 0.3, range = [0.0, 1.0] }

[section]
plane = "x = 0"
energy = 0.05
crossings = 20
dt = 0.02

[states]
solve_for = "px"
line = { y = [-0.1, 0.1], py = [0.0, 0.0], count = 5 }

[output]
[[output.figure]]
file = "s.png"
size = [4.0, 3.0]
dpi = 80
"""


def refused(text, key, fragment, overrides=None):
    with pytest.raises(StudyFileError) as info:
        parse_study(text, source="s.toml", overrides=overrides)
    msg = str(info.value)
    assert msg.startswith(f"s.toml: {key}: "), msg
    assert fragment in msg, msg
    return msg


# ----------------------------------------------------------------------------- plane forms
def test_the_plane_takes_the_api_forms_a_momentum_and_a_table():
    text = BASE.replace('plane = "x = 0"', 'plane = "y = 0"').replace(
        'solve_for = "px"', 'solve_for = "py"').replace("line = { y = [-0.1, 0.1], py = [0.0, 0.0]",
                                                         "line = { x = [-0.1, 0.1], px = [0.0, 0.0]")
    table = BASE.replace('plane = "x = 0"', "plane = { x = 0.0 }")
    momentum = BASE.replace('plane = "x = 0"', 'plane = "px = 0.1"').replace(
        'solve_for = "px"', 'solve_for = "x"').replace("line = { y = [-0.1, 0.1], py = [0.0, 0.0]",
                                                        "line = { y = [-0.1, 0.1], py = [0.01, 0.01]")
    s1, s2, s3 = (parse_study(t) for t in (text, table, momentum))
    assert (s1.section.coordinate, s1.section.value) == ("y", 0.0)
    assert (s2.section.coordinate, s2.section.value) == ("x", 0.0)   # the API's {"x": 0.0}
    assert (s3.section.coordinate, s3.section.value) == ("px", 0.1)  # a momentum plane, as the API
    # the same plane parser as phaselab.section: the same refusal for a two-component plane
    refused(BASE.replace('plane = "x = 0"', "plane = { x = 0.0, y = 0.0 }"), "section.plane",
            "must fix exactly one state component")


def test_dpi_limits_are_the_apis():
    from phaselab.export.figures import DPI_RANGE

    assert DPI_RANGE == (10, 2400)
    small = BASE.replace("size = [4.0, 3.0]", "size = [2.0, 2.0]")
    assert parse_study(small.replace("dpi = 80", "dpi = 2400")).outputs[0].options["dpi"] == 2400
    assert parse_study(small.replace("dpi = 80", "dpi = 10")).outputs[0].options["dpi"] == 10
    refused(small.replace("dpi = 80", "dpi = 2401"), "output.figure[0].dpi", "at most 2400")
    refused(small.replace("dpi = 80", "dpi = 9"), "output.figure[0].dpi", "at least 10")


# ----------------------------------------------------------------------------- names
def test_keys_carry_the_api_names():
    refused(BASE.replace("[states]", "[seeds]"), "seeds", "unknown key")
    text = BASE.replace("[section]", '[section]\naxes = ["y", "py"]')
    assert parse_study(text).section.axes == ("y", "py")
    refused(BASE.replace("[section]", '[section]\nshow = ["y", "py"]'), "section.show", "unknown key")


# ----------------------------------------------------------------------------- unused parameters
def test_an_unused_parameter_is_refused_naming_it():
    text = BASE.replace("a = { default", "b = 2.0\na = { default")
    msg = refused(text, "parameters.b", "declared but not used by system.hamiltonian")
    assert msg == ("s.toml: parameters.b: declared but not used by system.hamiltonian; "
                   "remove it, or use it")


def test_a_parameter_used_only_by_the_driving_period_is_used():
    text = """
[system]
hamiltonian = "p**2/2 - cos(q)*(1 + e*cos(t))"
coordinates = ["q"]
momenta = ["p"]
time = "t"
period = "2*pi/w"

[parameters]
e = 0.1
w = 2.0

[section]
plane = "stroboscopic"
crossings = 10

[states]
line = { q = [0.1, 0.5], p = [0.0, 0.0], count = 3 }
"""
    study = parse_study(text)
    assert study.params == {"e": 0.1, "w": 2.0}
    refused(text.replace("w = 2.0", "w = 2.0\nz = 1.0"), "parameters.z",
            "declared but not used by system.hamiltonian or system.period")


# ----------------------------------------------------------------------------- --set
def test_set_overrides_numbers_text_and_parameters():
    study = parse_study(BASE, overrides=["section.crossings=100", "params.a=0.5", "section.plane=y = 0",
                                         "states.solve_for=py",
                                         "states.line={ x = [-0.1, 0.1], px = [0.0, 0.0], count = 5 }",
                                         "section.dt=1/64"])
    assert study.section.crossings == 100 and isinstance(study.section.crossings, int)
    assert study.params["a"] == 0.5
    assert (study.section.coordinate, study.section.value) == ("y", 0.0)
    assert study.section.dt == 1 / 64          # an expression string, parsed as the file's are


def test_set_refuses_unknown_keys_and_bad_forms():
    refused(BASE, "section.nosuch", "unknown key", overrides=["section.nosuch=1"])
    refused(BASE, "parameters.zz", "declared but not used", overrides=["params.zz=1"])
    refused(BASE, "section.crossings", "whole number", overrides=["section.crossings=many"])
    refused(BASE, "--set", "key=value", overrides=["section.crossings"])
    refused(BASE, "--set section.crossings.x", "is a value, not a table",
            overrides=["section.crossings.x=1"])
    assert split_override(" section.plane = x = 0 ") == ("section.plane", "x = 0")


def test_set_reaches_an_array_of_tables_and_the_console(tmp_path, capsys):
    study = parse_study(BASE.replace("dpi = 80", "dpi = 80\n"), overrides=["output.figure.0.dpi=120"])
    assert study.outputs[0].options["dpi"] == 120
    path = tmp_path / "s.toml"
    path.write_text(BASE)
    assert main(["check", str(path), "--set", "section.crossings=100", "--set", "params.a=0.4"]) == 0
    assert "100 crossings" in capsys.readouterr().out
    assert main(["check", str(path), "--set", "section.nosuch=1"]) == 2
    assert "s.toml: section.nosuch: unknown key" in capsys.readouterr().err


# ----------------------------------------------------------------------------- angles and units
def test_angles_and_units_as_the_api_declares_them():
    text = """
[system]
hamiltonian = "p**2/2 - w**2*cos(th)"
coordinates = ["th"]
momenta = ["p"]
angles = { th = "2*pi" }
units = { th = "rad", t = "s", w = "1/s" }

[parameters]
w = 1.0

[section]
crossings = 10
plane = "p = 0"

[states]
line = { th = [0.1, 0.5], count = 3 }
"""
    # a one-degree-of-freedom flow: the plane p = 0 leaves th to the states
    study = parse_study(text)
    api = phaselab.Hamiltonian("p**2/2 - w**2*cos(th)", ["th"], ["p"], params={"w": 1.0},
                               angles={"th": 2 * math.pi}, units={"th": "rad", "t": "s", "w": "1/s"})
    assert study.system.angle_intervals == api.angle_intervals == {"th": (-math.pi, math.pi)}
    assert study.system.units == api.units
    listed = parse_study(text.replace('angles = { th = "2*pi" }', 'angles = ["th"]'))
    assert listed.system.angle_intervals == api.angle_intervals
    refused(text.replace('angles = { th = "2*pi" }', 'angles = { p = "2*pi" }'), "system.angles", "momentum")
    refused(text.replace('units = { th = "rad"', 'units = { zz = "rad"'), "system.units", "zz")
    refused(text.replace('units = { th = "rad"', 'units = { th = "furlong^^"'), "system.units", "th")


def test_a_maps_angles_are_its_modulus():
    text = """
[system]
map = [["p", "p + K*sin(q)"], ["q", "q + p"]]
coordinates = ["q"]
momenta = ["p"]
angles = { q = "2*pi" }

[parameters]
K = 0.9

[section]
crossings = 10

[states]
line = { q = [0.1, 0.5], p = [0.0, 0.0], count = 3 }
"""
    study = parse_study(text)
    api = phaselab.AreaPreservingMap([("p", "p + K*sin(q)"), ("q", "q + p")], ["q"], ["p"],
                                     params={"K": 0.9}, angles={"q": 2 * math.pi})
    assert study.system.modulus == api.modulus
    refused(text.replace('angles = { q = "2*pi" }', 'angles = { z = "2*pi" }'), "system.angles.z",
            "not a coordinate or momentum")


# ----------------------------------------------------------------------------- closed pipe
@pytest.mark.slow
@pytest.mark.parametrize("argv", [["keys"], ["examples"], ["equations", "fput_chain"],
                                  ["check", "molecule"], ["--help"]])
def test_every_command_exits_quietly_into_a_closed_pipe(argv):
    """``phaselab ... | head``: the reader goes away before phaselab writes; the command ends
    without a traceback, with status 0 or the SIGPIPE status 141 (common practice)."""
    proc = subprocess.Popen([sys.executable, "-m", "phaselab.cli", *argv], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE)
    proc.stdout.close()            # closed before the child writes anything
    err = proc.stderr.read().decode()
    code = proc.wait(timeout=300)
    assert "Traceback" not in err and "BrokenPipeError" not in err, err
    assert code in (0, 141), (code, err)
