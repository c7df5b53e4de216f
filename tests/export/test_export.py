"""Export of sections: static figures, data files and standalone HTML pages.

The sections are built here from computations done with numpy: iterates of the standard
map p' = p + K sin q, q' = q + p' (mod 2 pi), and the exact motion of two uncoupled bond
vibrations of a model molecule (made-up stiffnesses) sectioned at x = 0, px > 0.
"""

from __future__ import annotations

import os
import re
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest
import sympy as sp

import phaselab
from phaselab.orbits.section_result import Section
from phaselab.errors import PhaselabError
from phaselab.export import (bokeh_figure, load_section, read_section_csv, read_section_netcdf,
                             save, section_figure)

THETA, P_THETA = sp.symbols("theta p_theta", real=True)


class RotorMap:
    """A plain object standing in for a map system (duck-typed name/expr/params)."""

    name = "kicked rotor bench"
    kind = "map"
    expr = (sp.Symbol("theta") + sp.Symbol("p_theta") + sp.Symbol("K") * sp.sin(sp.Symbol("theta")),
            sp.Symbol("p_theta") + sp.Symbol("K") * sp.sin(sp.Symbol("theta")))
    params = {"K": 0.97}


def standard_map_section(K=0.97, n_orbits=7, n_iter=120, ragged=True):
    """Iterate the standard map with numpy; with ``ragged`` later orbits stop early."""
    q = np.linspace(0.3, 5.9, n_orbits)
    p = np.linspace(0.1, 6.0, n_orbits)
    pts = np.full((n_orbits, n_iter, 2), np.nan)
    times = np.full((n_orbits, n_iter), np.nan)
    counts = np.full(n_orbits, n_iter) if not ragged else n_iter - 9 * np.arange(n_orbits)
    for k in range(n_iter):
        p = np.mod(p + K * np.sin(q), 2 * np.pi)
        q = np.mod(q + p, 2 * np.pi)
        live = k < counts
        pts[live, k, 0] = q[live]
        pts[live, k, 1] = p[live]
        times[live, k] = k + 1
    seeds = np.column_stack([np.linspace(0.3, 5.9, n_orbits), np.linspace(0.1, 6.0, n_orbits)])
    return Section(points=pts, counts=counts.astype(int), times=times, axes=(0, 1),
                   axis_symbols=(THETA, P_THETA), energy_error=np.zeros(n_orbits),
                   status=np.zeros(n_orbits, int), seeds=seeds, plane={"kind": "map"},
                   energy=None, method="map", dt=float("nan"), system=RotorMap(),
                   params={"K": K})


WY = 1.7  # made-up stiffness ratio of the second bond (frequency of y relative to x)


def molecule_section(energy=1.0, n_orbits=5, n_cross=40):
    """Exact section of H = (p_x^2 + p_y^2)/2 + (x^2 + WY^2 y^2)/2 at x = 0, px > 0.

    x(t) = a sin t crosses x = 0 upward at t = 2 pi k; y(t) = b cos(WY t + phi)
    (closed-form harmonic motion, common practice). Each orbit puts a share of the energy
    into the y bond, so its section points lie on WY^2 y^2 + py^2 = 2 E_y.
    """
    H = phaselab.Hamiltonian("(p_x**2 + p_y**2)/2 + (x**2 + wy**2*y**2)/2", ["x", "y"], ["p_x", "p_y"],
                             params={"wy": WY}, name="model molecule, two bonds")
    share = np.linspace(0.1, 0.8, n_orbits)
    e_y = share * energy
    b = np.sqrt(2 * e_y) / WY
    a = np.sqrt(2 * (energy - e_y))
    phi = np.linspace(0.0, 1.0, n_orbits)
    t = 2 * np.pi * np.arange(n_cross)
    y = b[:, None] * np.cos(WY * t[None, :] + phi[:, None])
    py = -b[:, None] * WY * np.sin(WY * t[None, :] + phi[:, None])
    px = np.broadcast_to(a[:, None], y.shape)
    pts = np.stack([np.zeros_like(y), y, px, py], axis=-1)
    sec = Section(points=pts, counts=np.full(n_orbits, n_cross), times=np.broadcast_to(t, y.shape).copy(),
                  axes=(1, 3), axis_symbols=(H.coords[1], H.momenta[1]),
                  energy_error=np.zeros(n_orbits), status=np.zeros(n_orbits, int),
                  seeds=pts[:, 0].copy(), plane={"kind": "plane", "index": 0, "value": 0.0, "direction": 1},
                  energy=energy, method="exact", dt=0.01, system=H, params={"wy": WY})
    return sec, H


def allowed_boundary(energy=1.0, n=200):
    """Boundary of the allowed region on the section plane: WY^2 y^2 + py^2 = 2E (px >= 0)."""
    s = np.linspace(0, 2 * np.pi, n)
    return [(np.sqrt(2 * energy) / WY * np.cos(s), np.sqrt(2 * energy) * np.sin(s))]


@pytest.fixture
def rotor():
    return standard_map_section()


@pytest.fixture
def molecule():
    return molecule_section()


# ------------------------------------------------------------------------------ figures
def test_svg_parses_and_keeps_text(tmp_path, rotor):
    out = save(rotor, tmp_path / "rotor.svg", title="Rotor bench section")
    root = ET.parse(out).getroot()
    assert root.tag.endswith("svg")
    texts = "".join(root.itertext())  # <text> and <tspan> contents (comments are dropped)
    assert "Rotor bench section" in texts
    assert "θ" in texts  # the typeset axis symbol, kept as text
    assert "kicked rotor bench" in texts  # the footer names the system


def test_pdf_has_title_labels_and_footer(tmp_path, molecule):
    import pypdf

    sec, _ = molecule
    out = save(sec, tmp_path / "molecule.pdf", title="Bond exchange section", overlays=allowed_boundary())
    reader = pypdf.PdfReader(out)
    assert len(reader.pages) == 1
    text = reader.pages[0].extract_text()
    assert "Bond exchange section" in text
    assert "model molecule, two bonds" in text
    assert "E = 1" in text and "wy = 1.7" in text and "exact, dt = 0.01" in text
    assert "py" in text.replace("\n", "")  # the p_y label: 'p' with subscript 'y'


@pytest.mark.parametrize("size, dpi", [((4.0, 3.0), 50), ((5.5, 4.0), 72)])
def test_png_pixel_size(tmp_path, rotor, size, dpi):
    from PIL import Image

    out = save(rotor, tmp_path / "rotor.png", size=size, dpi=dpi)
    with Image.open(out) as img:
        # common practice: a matplotlib figure saved without cropping is inches * dpi pixels
        assert img.size == (round(size[0] * dpi), round(size[1] * dpi))


def test_axis_labels_are_typeset_from_symbols(molecule):
    sec, H = molecule
    fig = section_figure(sec)
    ax = fig.axes[0]
    # reference: sympy.latex of the state symbols, wrapped as mathtext
    assert ax.get_xlabel() == f"${sp.latex(H.coords[1])}$" == "$y$"
    assert ax.get_ylabel() == f"${sp.latex(H.momenta[1])}$" == "$p_{y}$"
    fig_rotor = section_figure(standard_map_section())
    assert fig_rotor.axes[0].get_ylabel() == f"${sp.latex(P_THETA)}$" == r"$p_{\theta}$"


def test_points_plotted_are_the_section_points(rotor):
    fig = section_figure(rotor, overlays=allowed_boundary())
    ax = fig.axes[0]
    offsets = np.asarray(ax.collections[0].get_offsets())
    x, y = rotor.xy()
    assert np.array_equal(offsets[:, 0], x) and np.array_equal(offsets[:, 1], y)
    assert offsets.shape[0] == int(rotor.counts.sum())  # one marker per recorded crossing
    assert len(ax.lines) == 1  # the overlay curve


def test_colour_by_orbit_scalar_adds_colour_bar(tmp_path, rotor):
    spread = np.nanstd(np.diff(rotor.points[..., 1], axis=1), axis=1)
    spread[2] = np.nan  # an indicator that could not be computed shows grey
    fig = section_figure(rotor, color=spread, color_label="p spread")
    assert len(fig.axes) == 2
    assert fig.axes[1].get_ylabel() == "p spread"
    with pytest.raises(PhaselabError, match="one value per orbit"):
        section_figure(rotor, color=spread[:3])


def test_bad_figure_options_are_refused(rotor):
    with pytest.raises(PhaselabError, match="inches"):
        section_figure(rotor, size=(0.5, 3))
    with pytest.raises(PhaselabError, match="point_size"):
        section_figure(rotor, point_size=-1)
    with pytest.raises(PhaselabError, match="overlay 0"):
        section_figure(rotor, overlays=[(np.zeros(3), np.zeros(4))])


def test_exporting_leaves_no_pyplot_figures(tmp_path, rotor):
    import matplotlib.pyplot as plt

    before = plt.get_fignums()
    for suffix in (".svg", ".pdf", ".png"):
        save(rotor, tmp_path / f"f{suffix}", size=(3, 2.5), dpi=40)
    section_figure(rotor)
    assert plt.get_fignums() == before == []


# ------------------------------------------------------------------------------ data files
def test_csv_round_trip_is_exact(tmp_path, molecule):
    sec, H = molecule
    out = save(sec, tmp_path / "molecule.csv")
    meta, data = read_section_csv(out)
    keep = np.arange(sec.points.shape[1])[None, :] < sec.counts[:, None]
    # Python's float repr reads back to the same binary64 (Python docs, "Floating point")
    assert np.array_equal(data["states"], sec.points[keep])
    assert np.array_equal(data["time"], sec.times[keep])
    assert np.array_equal(data["orbit"], np.nonzero(keep)[0])
    assert meta["system"] == "model molecule, two bonds"
    assert meta["expression"] == str(H.expr)
    assert meta["state"] == ["x", "y", "p_x", "p_y"]
    assert meta["params"] == {"wy": WY}
    assert meta["energy"] == 1.0 and meta["method"] == "exact" and meta["dt"] == 0.01
    assert meta["plane"] == {"kind": "plane", "index": 0, "value": 0.0, "direction": 1}
    assert meta["phaselab_version"] == phaselab.__version__
    header = [line for line in out.read_text().splitlines() if not line.startswith("#")][0]
    assert header == "orbit,crossing,time,x,y,p_x,p_y"


def test_csv_ragged_section_rebuilds(tmp_path, rotor):
    out = save(rotor, tmp_path / "rotor.csv")
    meta, data = read_section_csv(out)
    assert np.isnan(meta["dt"]) and meta["energy"] is None
    assert data["states"].shape == (int(rotor.counts.sum()), 2)
    back = load_section(out)
    assert np.array_equal(back.points, rotor.points, equal_nan=True)
    assert np.array_equal(back.times, rotor.times, equal_nan=True)
    assert np.array_equal(back.counts, rotor.counts)
    assert np.array_equal(back.seeds, rotor.seeds)
    assert back.axis_symbols[1].name == "p_theta"


def test_netcdf_round_trip(tmp_path, molecule):
    pytest.importorskip("xarray")
    sec, H = molecule
    sec.status[3] = 1  # left the box
    sec.energy_error[:] = np.linspace(1e-12, 3e-10, sec.n_orbits)
    out = save(sec, tmp_path / "molecule.nc")
    meta, data = read_section_netcdf(out)
    assert np.array_equal(data["points"], sec.points, equal_nan=True)
    assert np.array_equal(data["times"], sec.times, equal_nan=True)
    assert np.array_equal(meta["escaped"], sec.escaped)
    assert np.array_equal(meta["energy_error"], sec.energy_error)
    assert meta["system"] == H.name and meta["expression"] == str(H.expr)
    assert meta["params"] == {"wy": WY} and meta["energy"] == 1.0
    assert meta["state"] == ["x", "y", "p_x", "p_y"] and meta["axes"] == [1, 3]
    back = load_section(out)
    assert np.array_equal(back.points, sec.points) and back.plane == sec.plane


def test_netcdf_without_xarray_says_what_to_install(tmp_path, rotor, monkeypatch):
    monkeypatch.setitem(sys.modules, "xarray", None)  # makes `import xarray` fail
    with pytest.raises(PhaselabError, match=r"phaselab\[lab\]"):
        save(rotor, tmp_path / "rotor.nc")


def test_reader_names_the_bad_line(tmp_path, rotor):
    out = save(rotor, tmp_path / "rotor.csv")
    lines = out.read_text().splitlines()
    lines[-1] = lines[-1] + ",7"
    out.write_text("\n".join(lines) + "\n")
    with pytest.raises(PhaselabError, match=f"line {len(lines)}"):
        read_section_csv(out)
    (tmp_path / "other.csv").write_text("a,b\n1,2\n")
    with pytest.raises(PhaselabError, match="not a phaselab section"):
        read_section_csv(tmp_path / "other.csv")


# ------------------------------------------------------------------------------ HTML
def test_html_is_standalone(tmp_path, rotor):
    out = save(rotor, tmp_path / "rotor.html", title="Rotor bench section")
    page = out.read_text(encoding="utf-8")
    assert "<html" in page.lower() and "Rotor bench section" in page
    assert not re.search(r"<script[^>]*\bsrc\s*=\s*[\"']?(https?:)?//", page, re.I)
    assert not re.search(r"<link[^>]*\bhref\s*=\s*[\"']?(https?:)?//", page, re.I)
    assert "Bokeh" in page  # the library itself is inlined
    assert "kicked rotor bench" in page  # the footer line


def test_bokeh_figure_hover_shows_orbit(rotor):
    from bokeh.models import HoverTool

    fig = rotor.bokeh(title="rotor")
    hover = [t for t in fig.tools if isinstance(t, HoverTool)]
    assert hover and ("orbit", "@orbit") in hover[0].tooltips
    source = fig.renderers[0].data_source
    assert np.array_equal(np.asarray(source.data["orbit"]), rotor.orbit_index())
    assert np.array_equal(np.asarray(source.data["x"]), rotor.xy()[0])
    fig2 = bokeh_figure(rotor, color=np.arange(rotor.n_orbits, dtype=float), color_label="index")
    assert any(type(r).__name__ == "ColorBar" for r in fig2.right)


# ------------------------------------------------------------------------------ dispatch
def test_unknown_suffix_and_empty_section_raise(tmp_path, rotor):
    with pytest.raises(PhaselabError, match=r"\.xlsx"):
        save(rotor, tmp_path / "rotor.xlsx")
    with pytest.raises(PhaselabError, match="no suffix|without suffix"):
        save(rotor, tmp_path / "rotor")
    with pytest.raises(PhaselabError, match="take no options"):
        save(rotor, tmp_path / "rotor.csv", dpi=300)
    empty = standard_map_section(n_orbits=2, n_iter=3, ragged=False)
    empty.points[:] = np.nan
    empty.counts[:] = 0
    for suffix in (".png", ".csv", ".html"):
        with pytest.raises(PhaselabError, match="no points"):
            save(empty, tmp_path / f"empty{suffix}")
    assert not list(tmp_path.iterdir())


def test_section_save_method_delegates(tmp_path, molecule):
    sec, _ = molecule
    out = sec.save(tmp_path / "m.csv")
    assert out.exists() and read_section_csv(out)[0]["system"] == "model molecule, two bonds"


def test_catalogue_map_metadata(tmp_path):
    system = phaselab.models.standard_map()
    sec = standard_map_section(K=system.params["K"])
    sec.system = system
    sec.axis_symbols = system.state_symbols
    meta, _ = read_section_csv(save(sec, tmp_path / "catalogue.csv"))
    assert meta["system"] == system.name and meta["kind"] == "map"
    assert meta["state"] == [s.name for s in system.state_symbols]
    assert meta["expression"] == "; ".join(f"{s.name}' = {e}" for s, e in zip(system.state_symbols, system.update))
    assert meta["params"] == {"K": system.params["K"]}


def test_importing_export_does_not_import_bokeh():
    code = ("import sys, phaselab.export, phaselab.orbits.section_result; "
            "print('bokeh' in sys.modules, 'matplotlib' in sys.modules)")
    res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60)
    assert res.returncode == 0, res.stderr
    assert res.stdout.split() == ["False", "False"]


def test_run_together_momentum_names_typeset_as_subscripts():
    # conjugate momenta written px, ptheta read as p_x, p_theta (common practice in
    # mechanics texts); Greek names such as phi and psi must stay whole
    import sympy as sp

    from phaselab.export.describe import mathtext_label, plain_label

    assert mathtext_label(sp.Symbol("px")) == "$p_{x}$"
    assert mathtext_label(sp.Symbol("ptheta")) == "$p_{\\theta}$"
    assert mathtext_label(sp.Symbol("phi")) == "$\\phi$"
    assert plain_label(sp.Symbol("psi")) == "ψ"
    assert plain_label(sp.Symbol("py")) == "p_y"


def test_level_set_figures_phase_portrait_and_allowed_region(tmp_path):
    # the drawn separatrix of the pendulum H = p^2/2 - g cos q (m = l = 1) is
    # p = +-2 sqrt(g) cos(q/2) (common practice), to the grid's resolution
    import matplotlib.colors as mcolors
    from pypdf import PdfReader

    from phaselab.export import level_set_figure
    from phaselab.export.portraits import SEPARATRIX_COLOR

    pend = phaselab.models.pendulum()
    g = pend.params["g"]
    ls = phaselab.level_set(pend, {"q": (-np.pi, np.pi), "p": (-9, 9)}, np.linspace(-9, 25, 6),
                            separatrices=True, resolution=300)
    fig = level_set_figure(ls)
    ax = fig.axes[0]
    sep = [ln for ln in ax.lines if mcolors.to_hex(ln.get_color()) == SEPARATRIX_COLOR
           and ln.get_linewidth() > 1.0]
    assert sep
    for ln in sep:
        q, p = ln.get_xdata(), ln.get_ydata()
        assert np.max(np.abs(np.abs(p) - 2 * np.sqrt(g) * np.cos(q / 2))) < 2 * 18 / 300
    svg = ls.save(tmp_path / "portrait.svg", title="pendulum")
    ET.parse(svg)
    pdf = phaselab.export.save(ls, tmp_path / "portrait.pdf", title="pendulum portrait")
    assert "pendulum portrait" in PdfReader(pdf).pages[0].extract_text()
    zv = phaselab.level_set(phaselab.models.henon_heiles(), {"y": (-0.8, 1.2), "py": (-0.7, 0.7)},
                            [1 / 8], plane={"x": 0.0}, resolution=120)
    png = zv.save(tmp_path / "allowed.png", size=(4.0, 3.0), dpi=100)
    from PIL import Image

    assert Image.open(png).size == (400, 300)
    with pytest.raises(phaselab.PhaselabError, match=r"\.svg, \.pdf, \.png"):
        zv.save(tmp_path / "allowed.csv")


# ------------------------------------------------------------------------------ atomic writes
def _half_then_fail(exc):
    """A stand-in writer: writes half of a file to the path it is given, then fails."""
    def write(path):
        with open(path, "wb") as fh:
            fh.write(b"half a fi")
        raise exc
    return write


@pytest.mark.parametrize("suffix", [".png", ".svg", ".pdf", ".csv", ".html", ".nc"])
@pytest.mark.parametrize("exc", [OSError(28, "No space left on device"), KeyboardInterrupt()])
def test_a_save_that_fails_midway_keeps_the_previous_file(tmp_path, rotor, monkeypatch, suffix, exc):
    """The previous good file survives a writer that dies after writing half (a full disk,
    an interrupt), and no temporary file is left in the folder."""
    import matplotlib.figure
    import pathlib

    if suffix == ".nc":
        xr = pytest.importorskip("xarray")
    target = tmp_path / f"rotor{suffix}"
    options = {"size": (3, 2.5), "dpi": 40} if suffix in (".png", ".svg", ".pdf") else {}
    save(rotor, target, **options)
    good = target.read_bytes()
    if suffix in (".png", ".svg", ".pdf"):
        monkeypatch.setattr(matplotlib.figure.Figure, "savefig", lambda self, path, **kw: _half_then_fail(exc)(path))
    elif suffix == ".nc":
        monkeypatch.setattr(xr.Dataset, "to_netcdf", lambda self, path, **kw: _half_then_fail(exc)(path))
    else:
        monkeypatch.setattr(pathlib.Path, "write_text", lambda self, *a, **kw: _half_then_fail(exc)(self))
    expected = PhaselabError if isinstance(exc, OSError) else KeyboardInterrupt
    with pytest.raises(expected):
        save(rotor, target, **options)
    assert target.read_bytes() == good
    assert [p.name for p in tmp_path.iterdir()] == [target.name]


def test_save_into_a_folder_that_cannot_be_written_is_a_phaselab_error(tmp_path, rotor):
    if os.geteuid() == 0:
        folder = Path("/sys")  # not writable even by root: sysfs makes no new files
    else:
        folder = tmp_path / "locked"
        folder.mkdir()
        folder.chmod(0o500)
    try:
        with pytest.raises(PhaselabError, match="Permission denied"):
            save(rotor, folder / "rotor.csv")
    finally:
        if folder != Path("/sys"):
            folder.chmod(0o700)


def test_truncated_csv_does_not_load(tmp_path, molecule):
    sec, _ = molecule
    out = save(sec, tmp_path / "m.csv")
    text = out.read_text()
    lines = text.splitlines(keepends=True)
    cut_rows = tmp_path / "rows.csv"
    cut_rows.write_text("".join(lines[:-7]))  # cut at a line boundary: seven rows missing
    with pytest.raises(PhaselabError, match="declares 200 section points but the file has 193 rows"):
        load_section(cut_rows)
    cut_mid = tmp_path / "mid.csv"
    cut_mid.write_text(text[:-5])  # cut inside the last number
    with pytest.raises(PhaselabError, match="truncated"):
        load_section(cut_mid)
    assert load_section(out).points.shape == sec.points.shape


def test_crafted_header_is_refused_before_allocating(tmp_path, rotor):
    """A header declaring 10**6 orbits x 10**6 crossings x 2 components asks for 2e12 floats
    (16 TB). It is refused, naming the limit, within a few hundred MiB (child process with a
    2 GiB address-space limit, so a missing check cannot exhaust the machine)."""
    from bounded import run_bounded

    out = save(rotor, tmp_path / "rotor.csv")
    lines = out.read_text().splitlines()
    n = 10**6
    header = {"n_orbits": n, "max_crossings": n, "counts": [0] * 5}
    crafted = []
    for line in lines:
        key = line[2:].partition(":")[0] if line.startswith("# ") else None
        if key in ("n_orbits", "max_crossings"):
            line = f"# {key}: {header[key]}"
        crafted.append(line)
    bad = tmp_path / "crafted.csv"
    bad.write_text("\n".join(crafted) + "\n")
    result = run_bounded(f"""
        from phaselab.export import load_section
        bounded(lambda: load_section({str(bad)!r}))
    """)
    assert result.finished, result
    assert "PhaselabError" in result.kinds, result
    assert "sections are loaded up to" in result.message and "2000000000000 values" in result.message, result
    assert result.rss_mib < 400, result
