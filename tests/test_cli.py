"""The ``phaselab`` console command: demo, render, check, equations, exit codes, and the
promise that a study file gives the same section points as the equivalent Python calls."""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import sympy as sp

import phaselab
from phaselab.cli import main
from phaselab.export import read_section_csv
from phaselab.studies import example_path, read_study


def console_command() -> list[str]:
    """The installed ``phaselab`` script beside this interpreter, else ``python -m``."""
    script = Path(sys.executable).parent / "phaselab"
    if script.exists():
        return [str(script)]
    found = shutil.which("phaselab")
    return [found] if found else [sys.executable, "-m", "phaselab.cli"]


def run(*args, cwd=None):
    env = dict(os.environ)
    return subprocess.run(console_command() + list(args), capture_output=True, text=True,
                          cwd=cwd, env=env, timeout=300)


def section_rows(sec):
    """The recorded crossings of a Section, in the CSV's row order: (n_points, 2n)."""
    keep = np.arange(sec.points.shape[1])[None, :] < sec.counts[:, None]
    return sec.points[keep]


# ------------------------------------------------------------------------------ check / errors
def test_check_prints_a_summary_and_exits_zero(capsys):
    assert main(["check", "molecule"]) == 0
    out = capsys.readouterr().out
    assert out.startswith("ok: molecule.toml: two-mode molecule (hamiltonian), 20 starting states, 250 crossings")
    assert "writes molecule.png" in out


def test_bad_study_file_exits_2_with_the_key_on_stderr_and_no_traceback(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text(example_path("molecule").read_text().replace('plane = "x = 0"', 'plane = "z = 0"'))
    proc = run("check", str(bad))
    assert proc.returncode == 2
    assert "bad.toml: section.plane: unknown plane component 'z'" in proc.stderr
    assert "Traceback" not in proc.stderr
    assert proc.stdout == ""

    hostile = tmp_path / "hostile.toml"
    hostile.write_text(example_path("molecule").read_text().replace(
        'hamiltonian = "', 'hamiltonian = "__import__(\'os\').system(\'touch PWNED\') + '))
    proc = run("render", str(hostile), "--out", str(tmp_path / "o"), cwd=tmp_path)
    assert proc.returncode == 2
    assert "hostile.toml: system.hamiltonian:" in proc.stderr
    assert "Traceback" not in proc.stderr
    assert not (tmp_path / "PWNED").exists()
    assert not (tmp_path / "o").exists()  # nothing written for a refused file

    escaping = tmp_path / "escape.toml"
    escaping.write_text(example_path("molecule").read_text().replace(
        'file = "molecule.png"', 'file = "../../escaped.png"'))
    proc = run("render", str(escaping), "--out", str(tmp_path / "o"))
    assert proc.returncode == 2
    assert "output.figure[0].file" in proc.stderr and "leaves the output folder" in proc.stderr


def test_missing_file_and_usage_errors_exit_2(tmp_path, capsys):
    assert main(["check", str(tmp_path / "nothing.toml")]) == 2
    assert "nothing.toml: cannot read" in capsys.readouterr().err
    assert main(["check", "no_such_example"]) == 2
    assert main(["render"]) == 2  # argparse: STUDY missing
    assert main([]) == 2
    assert main(["--version"]) == 0


# ------------------------------------------------------------------------------ equations
def test_equations_of_a_study_match_sympy_derivatives(capsys):
    assert main(["equations", "molecule"]) == 0
    out = capsys.readouterr().out
    # reference: sympy differentiating the molecule Hamiltonian written out here by hand
    x, y, px, py, wx, wy, k, t = sp.symbols("x y px py wx wy kappa t", real=True)
    H = (px**2 + py**2) / 2 + (wx**2 * x**2 + wy**2 * y**2) / 2 + k * (x**2 * y - y**3 / 3)
    uni = (sys.stdout.encoding or "").lower().replace("-", "") == "utf8"
    for q, p in ((x, px), (y, py)):
        for lhs, rhs in ((q, sp.diff(H, p)), (p, -sp.diff(H, q))):
            text = sp.pretty(sp.Eq(sp.Derivative(lhs, t), rhs, evaluate=False), use_unicode=uni)
            assert text in out, text
    assert "parameters: wx = 1, wy = 1.2, kappa = 0.9" in out


def test_equations_of_a_catalogue_model_and_a_map(capsys):
    assert main(["equations", "pendulum"]) == 0
    out = capsys.readouterr().out
    q, p, m, l, g, t = sp.symbols("q p m l g t", real=True)
    H = p**2 / (2 * m * l**2) - m * g * l * sp.cos(q)  # reference: the pendulum written by hand
    uni = (sys.stdout.encoding or "").lower().replace("-", "") == "utf8"
    assert sp.pretty(sp.Eq(sp.Derivative(p, t), -sp.diff(H, q), evaluate=False), use_unicode=uni) in out
    assert main(["equations", "kicked_rotor"]) == 0
    out = capsys.readouterr().out
    assert "update (new values in terms of the old)" in out


# ------------------------------------------------------------------------------ render / demo
def test_demo_writes_png_and_csv_and_a_summary(tmp_path):
    proc = run("demo", "--out", str(tmp_path / "demo"))
    assert proc.returncode == 0, proc.stderr
    png = tmp_path / "demo" / "molecule.png"
    csv = tmp_path / "demo" / "molecule.csv"
    assert f"wrote {png}" in proc.stdout and f"wrote {csv}" in proc.stdout
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG specification, sec. 5.2)
    summary = re.search(r"(\d+) orbits, (\d+) section points, worst relative energy error ([0-9.e+-]+)",
                        proc.stdout)
    assert summary, proc.stdout
    meta, table = read_section_csv(csv)
    assert int(summary.group(1)) == meta["n_orbits"] == 20
    assert int(summary.group(2)) == len(table["orbit"])
    # a 4th-order symplectic step at dt = 0.05 keeps |dE/E| far below 1e-4 (common practice)
    assert float(summary.group(3)) < 1e-4
    assert "orbit" in proc.stderr  # the progress bar


@pytest.fixture(scope="module")
def rendered(tmp_path_factory):
    """Each example study rendered once by the command line (in-process)."""
    out = tmp_path_factory.mktemp("render")
    for name in ("molecule", "kicked_rotor", "shaken_cart"):
        assert main(["render", str(example_path(name)), "--out", str(out), "--quiet"]) == 0
    return out


def _python_molecule():
    """The molecule study written as plain Python calls."""
    H = phaselab.Hamiltonian(
        "(px**2 + py**2)/2 + (wx**2*x**2 + wy**2*y**2)/2 + kappa*(x**2*y - y**3/3)",
        ["x", "y"], ["px", "py"], params={"wx": 1.0, "wy": 1.2, "kappa": 0.9})
    seeds = phaselab.shell_seeds(H, {"y": np.linspace(-0.5, 0.66, 20), "py": np.zeros(20)},
                                 energy=0.24, plane={"x": 0.0}, solve_for="px")
    return phaselab.section(H, seeds, plane={"x": 0.0}, direction=+1, crossings=250,
                            method="yoshida4", dt=0.05)


def _python_kicked_rotor():
    rotor = phaselab.AreaPreservingMap([("p", "p + kick*sin(q)"), ("q", "q + p")], ["q"], ["p"],
                                       params={"kick": 1.2}, modulus=2 * np.pi)
    qq, pp = np.meshgrid(np.linspace(0.3, 6.0, 6), np.linspace(0.2, 6.0, 6), indexing="ij")
    return phaselab.section(rotor, np.column_stack([qq.ravel(), pp.ravel()]), crossings=600)


def _python_shaken_cart():
    cart = phaselab.Hamiltonian("p**2/2 + w0**2*x**2/2 + beta*x**4/4 - f*x*cos(wd*t)", ["x"], ["p"],
                                params={"w0": 1.0, "beta": 0.5, "f": 0.05, "wd": 1.3}, time="t",
                                period="2*pi/wd")
    seeds = np.column_stack([np.linspace(-1.8, 1.8, 18), np.zeros(18)])
    return phaselab.section(cart, seeds, plane="stroboscopic", crossings=200, method="yoshida4",
                            dt=0.04)


@pytest.mark.parametrize("name, python", [("molecule", _python_molecule),
                                          ("kicked_rotor", _python_kicked_rotor),
                                          ("shaken_cart", _python_shaken_cart)])
def test_cli_reproduces_the_python_calls_bit_for_bit(rendered, name, python):
    meta, table = read_section_csv(rendered / f"{name}.csv")
    sec = python()
    cli_rows = table["states"]
    py_rows = section_rows(sec)
    assert cli_rows.shape == py_rows.shape
    # bit-identical: same method, same step, same seeds; CSV floats are shortest round-trip reprs
    assert np.array_equal(cli_rows, py_rows)
    np.testing.assert_array_equal(np.asarray(meta["counts"]), sec.counts)
    assert meta["method"] == sec.method
    assert meta["dt"] == sec.dt or (np.isnan(meta["dt"]) and np.isnan(sec.dt))


def test_rendered_figures_have_the_asked_pixel_size(rendered):
    from PIL import Image  # matplotlib depends on pillow

    with Image.open(rendered / "molecule.png") as img:
        assert img.size == (round(5.5 * 110), round(4.5 * 110))  # size (in) x dpi, as asked


def test_render_into_a_subfolder_and_a_symlink_trap(tmp_path):
    text = example_path("kicked_rotor").read_text().replace("[output]", '[output]\nfolder = "maps/rotor"')
    text = text.replace("crossings = 600", "crossings = 20")
    study = tmp_path / "rotor.toml"
    study.write_text(text)
    assert main(["render", str(study), "--out", str(tmp_path / "out"), "--quiet"]) == 0
    assert (tmp_path / "out" / "maps" / "rotor" / "kicked_rotor.png").exists()
    # a link inside the output folder pointing elsewhere is not followed out
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    (tmp_path / "out2").mkdir()
    (tmp_path / "out2" / "maps").symlink_to(elsewhere, target_is_directory=True)
    assert main(["render", str(study), "--out", str(tmp_path / "out2"), "--quiet"]) == 2
    assert list(elsewhere.iterdir()) == []


def test_seeds_off_the_shell_are_reported(tmp_path, capsys):
    text = example_path("molecule").read_text().replace("y = [-0.5, 0.66]", "y = [-0.5, 0.9]")
    text = text.replace("crossings = 250", "crossings = 5")
    study = tmp_path / "off.toml"
    study.write_text(text)
    assert main(["render", str(study), "--out", str(tmp_path), "--quiet"]) == 0
    captured = capsys.readouterr()
    assert "note: seed 19 left out: outside the energetically allowed region" in captured.err
    assert "seeds off the energy shell left out" in captured.out


# ------------------------------------------------------------------------------ every example
@pytest.mark.parametrize("name", ["molecule", "kicked_rotor", "shaken_cart"])
def test_check_and_equations_work_on_every_shipped_example(name, capsys):
    from phaselab.studies import example_names

    assert name in example_names()
    assert main(["check", name]) == 0
    out = capsys.readouterr().out
    study = read_study(example_path(name))
    kind = {"plane": "section plane", "stroboscopic": "once per driving period", "map": "every iterate"}
    assert out.startswith(f"ok: {name}.toml: ") and kind[study.section.kind] in out
    assert main(["equations", name]) == 0
    assert study.system.name in capsys.readouterr().out


def test_the_shipped_examples_are_the_ones_tested():
    from phaselab.studies import example_names

    assert example_names() == ["field_lines", "kicked_rotor", "molecule", "shaken_cart"]


def test_every_shipped_example_renders(rendered):
    for name in ("molecule", "kicked_rotor", "shaken_cart"):
        png, csv = rendered / f"{name}.png", rendered / f"{name}.csv"
        assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG specification, sec. 5.2)
        meta, table = read_section_csv(csv)
        assert len(table["orbit"]) == int(np.sum(meta["counts"])) > 0
    # nothing but the outputs: no temporary files left beside them
    assert sorted(p.name for p in rendered.iterdir()) == sorted(
        f"{n}.{s}" for n in ("molecule", "kicked_rotor", "shaken_cart") for s in ("png", "csv"))


# ------------------------------------------------------------------------------ hostile files
def test_mathtext_title_is_a_study_file_error_not_a_traceback(tmp_path):
    bad = tmp_path / "title.toml"
    bad.write_text(example_path("kicked_rotor").read_text().replace(
        'title = "Kicked rotor, kick strength 1.2"', 'title = "$\\\\frac{$"'))
    proc = run("render", str(bad), "--out", str(tmp_path / "o"), "--quiet")
    assert proc.returncode == 2, proc.stderr
    assert "title.toml: study.title:" in proc.stderr and "Traceback" not in proc.stderr
    assert not (tmp_path / "o").exists()


def test_a_folder_swapped_for_a_link_during_the_write_is_not_followed(tmp_path, monkeypatch):
    """The output path is checked, then (as if another process raced us) its folder is
    replaced by a link to a folder outside; the write must not land outside."""
    import phaselab.studies.render as render_module

    text = example_path("kicked_rotor").read_text().replace("[output]", '[output]\nfolder = "sub"')
    text = text.replace("crossings = 600", "crossings = 5")
    study = tmp_path / "race.toml"
    study.write_text(text)
    out, outside = tmp_path / "out", tmp_path / "outside"
    (out / "sub").mkdir(parents=True)
    outside.mkdir()
    checked = render_module.confined_path

    def check_then_swap(*args, **kwargs):
        path = checked(*args, **kwargs)
        if (out / "sub").is_dir() and not (out / "sub").is_symlink():
            (out / "sub").rmdir()
            (out / "sub").symlink_to(outside, target_is_directory=True)
        return path

    monkeypatch.setattr(render_module, "confined_path", check_then_swap)
    status = main(["render", str(study), "--out", str(out), "--quiet"])
    assert list(outside.iterdir()) == []
    assert status == 2


@pytest.mark.skipif(os.geteuid() == 0, reason="root writes into read-only folders")
def test_read_only_output_folder_is_a_clear_error(tmp_path, capsys):
    text = example_path("kicked_rotor").read_text().replace("crossings = 600", "crossings = 5")
    study = tmp_path / "ro.toml"
    study.write_text(text)
    out = tmp_path / "out"
    out.mkdir()
    out.chmod(0o500)
    try:
        assert main(["render", str(study), "--out", str(out), "--quiet"]) == 2
    finally:
        out.chmod(0o700)
    err = capsys.readouterr().err
    assert "ro.toml: output.figure" in err and "Permission denied" in err


def test_equations_as_latex_match_sympy(capsys):
    # reference: sympy's own LaTeX printer of the pendulum's H and of dp/dt = -dH/dq
    assert main(["equations", "pendulum", "--latex"]) == 0
    out = capsys.readouterr().out.splitlines()
    H = phaselab.models.pendulum()
    assert out[0] == f"H = {sp.latex(H.expr)}"
    assert sp.latex(H.equations()[1]) in out


def test_an_unknown_name_lists_examples_and_catalogue_models(capsys):
    assert main(["equations", "nosuch"]) == 2
    err = capsys.readouterr().err
    assert "molecule" in err and "henon_heiles" in err and "standard_map" in err


def test_the_study_key_reference_is_installed_and_printed(capsys):
    from importlib import resources

    assert main(["keys"]) == 0
    out = capsys.readouterr().out
    assert "[system]" in out and "hamiltonian" in out
    assert resources.files("phaselab.studies").joinpath("README.md").is_file()  # in the wheel: test_packaging.py


def test_help_imports_neither_sympy_nor_numba():
    """``phaselab --help`` answers without the numerical stack (Python's own import log, -X
    importtime, names every module a process imports)."""
    res = subprocess.run([sys.executable, "-X", "importtime", "-m", "phaselab.cli", "--help"],
                         capture_output=True, text=True, timeout=120)
    assert res.returncode == 0 and "warm" in res.stdout
    imported = {line.rsplit("|", 1)[-1].strip() for line in res.stderr.splitlines() if "|" in line}
    assert not {"sympy", "numba", "numpy"} & imported
