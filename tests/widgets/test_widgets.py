"""The explorer without a browser: bokeh events and slider moves simulated from Python.

Events are fed through jupyter_bokeh's own message handler (``BokehModel._sync_model``) in
the form the page sends them, so the path tested is the one a click in JupyterLab takes.
Every data-source check is compared with a direct ``phaselab.section`` call for the same
seed, energy and parameters.
"""

from __future__ import annotations

import subprocess
import time
import sys

import numpy as np
import pytest

import phaselab

pytest.importorskip("ipywidgets")
pytest.importorskip("jupyter_bokeh")

PLANE = {"x": 0.0}
E0 = 0.125  # below the escape energy 1/6 of the Henon-Heiles potential (Henon & Heiles 1964)


@pytest.fixture(scope="module")
def hh():
    return phaselab.models.henon_heiles()


@pytest.fixture(scope="module")
def coupled():
    # our own two-mode model with one parameter, bounded for small energies
    return phaselab.Hamiltonian("(px**2 + py**2)/2 + (x**2 + 2*y**2)/2 + a*x**2*y",
                                ["x", "y"], ["px", "py"], params={"a": (0.5, (0.1, 1.0))},
                                name="coupled")


def _serialize(explorer, event_or_value):
    from bokeh.core.serialization import Serializer

    doc = explorer.figures.main.document
    return Serializer(references=set(doc.models)).encode(event_or_value)


def send_tap(explorer, x, y, name="tap"):
    """What the page sends for a click at data coordinates (x, y) (``name="doubletap"`` for
    a click within 300 ms of the one before, which the page reports as a double tap)."""
    model_ref = _serialize(explorer, explorer.figures.main)  # {"id": ...}
    values = {"type": "map", "entries": [["model", model_ref], ["sx", 200.0], ["sy", 150.0],
                                         ["x", x], ["y", y]]}
    content = {"event": "jsevent", "kind": "MessageSent", "msg_type": "bokeh_event",
               "msg_data": {"type": "event", "name": name, "values": values}}
    explorer.bokeh._sync_model(explorer.bokeh, content, [])


def send_drag(explorer, x, y):
    """What the page sends while the ringed seed is dragged to (x, y) (the drag position)."""
    src = explorer.figures.probe
    content = {"event": "jsevent", "kind": "ModelChanged", "model": _serialize(explorer, src),
               "attr": "data", "new": _serialize(explorer, {"x": [x], "y": [y]})}
    explorer.bokeh._sync_model(explorer.bokeh, content, [])


def direct(system, seed, energy, params=None, crossings=300, solve_for="px"):
    """The section of one seed (or of a batch, given a list of seeds: the step is chosen per
    batch, so a batch recomputed together is compared with the same batch)."""
    batch = seed if isinstance(seed, list) else [seed]
    seeds = phaselab.shell_seeds(system, batch, energy=energy, plane=PLANE,
                                 solve_for=solve_for, params=params)
    return phaselab.section(system, seeds, plane=PLANE, crossings=crossings, params=params,
                            energy=energy, axes=("y", "py"))


def source_xy(explorer, orbit_id=None):
    d = explorer.figures.all_points()
    x, y, o = np.asarray(d["x"]), np.asarray(d["y"]), np.asarray(d["orbit"])
    if orbit_id is not None:
        keep = o == orbit_id
        x, y = x[keep], y[keep]
    return x, y


def test_tap_starts_an_orbit_matching_a_direct_section(hh):
    ex = phaselab.explore(hh, energy=E0, crossings=300, background=False)
    send_tap(ex, 0.1, 0.05)
    assert len(ex.orbits) == 1
    ref = direct(hh, (0.1, 0.05), E0)
    rx, ry = ref.xy()
    x, y = source_xy(ex)
    assert len(x) == 300
    np.testing.assert_allclose(x, rx, rtol=0, atol=1e-12)   # reference: direct phaselab.section
    np.testing.assert_allclose(y, ry, rtol=0, atol=1e-12)
    # the points lie on the shell: H = E at every crossing (energy conservation of a
    # symplectic integrator, common practice: relative error well below 1e-5 here)
    rec = ex.orbits[0]
    states = rec.section.points[0, :rec.section.counts[0]]
    assert np.max(np.abs(hh.energy(states) - E0)) < 1e-5
    # and inside the allowed region py^2/2 + V(0, y) <= E, V(0, y) = y^2/2 - y^3/3
    # (the Henon-Heiles potential on x = 0, Henon & Heiles 1964)
    assert np.all(ry ** 2 / 2 + rx ** 2 / 2 - rx ** 3 / 3 <= E0 + 1e-9)
    # seed markers: every orbit, the newest one draggable
    assert list(ex.figures.seeds.data["x"]) == [0.1]
    assert list(ex.figures.latest.data["x"]) == [0.1]
    assert "Orbit 1" in ex.status and "300 crossings" in ex.status
    # the companion views hold the orbit's configuration trace and energy error
    assert len(ex.figures.panel1_source.data["x"]) > 10
    assert np.max(np.abs(ex.figures.panel2_source.data["y"])) < 1e-4


def test_second_tap_appends_and_colours_differ(hh):
    ex = phaselab.explore(hh, energy=E0, background=False)
    send_tap(ex, 0.1, 0.05)
    send_tap(ex, -0.2, 0.1)
    assert [o.id for o in ex.orbits] == [1, 2]
    assert ex.orbits[0].color != ex.orbits[1].color
    x2, y2 = source_xy(ex, 2)
    rx, ry = direct(hh, (-0.2, 0.1), E0).xy()
    np.testing.assert_allclose(x2, rx, atol=1e-12)
    np.testing.assert_allclose(y2, ry, atol=1e-12)
    assert len(set(np.asarray(ex.figures.all_points()["shade"]).tolist())) == 2


def test_quick_second_click_elsewhere_is_a_click(hh):
    """BokehJS reports any click within 300 ms of the previous one as a double tap, wherever
    it lands (its doubletap_threshold): elsewhere it starts an orbit like a click; on the
    same spot (a double click) it adds nothing."""
    ex = phaselab.explore(hh, energy=E0, background=False)
    send_tap(ex, 0.1, 0.05)
    send_tap(ex, -0.2, 0.1, name="doubletap")
    assert [o.seed for o in ex.orbits] == [(0.1, 0.05), (-0.2, 0.1)]
    send_tap(ex, -0.2, 0.1, name="doubletap")
    assert len(ex.orbits) == 2


def test_energy_slider_recomputes_every_orbit(hh):
    ex = phaselab.explore(hh, energy=E0, background=False)
    seeds = [(0.1, 0.05), (-0.2, 0.1), (0.3, -0.1)]
    ex.add_seeds(seeds)
    ex.sliders["energy"].value = 0.1
    assert ex.energy == pytest.approx(0.1)
    ref = direct(hh, seeds, 0.1)
    for k, rec in enumerate(ex.orbits):
        rx, ry = ref.xy(k)
        x, y = source_xy(ex, rec.id)
        np.testing.assert_allclose(x, rx, atol=1e-12)
        np.testing.assert_allclose(y, ry, atol=1e-12)
    assert "Recomputed 3 orbits" in ex.status


def test_parameter_slider_recomputes_with_the_new_value(coupled):
    ex = phaselab.explore(coupled, energy=0.05, background=False)
    assert ex.sliders["a"].min == pytest.approx(0.1) and ex.sliders["a"].max == pytest.approx(1.0)
    ex.add_seed(0.05, 0.02)
    ex.sliders["a"].value = 0.8
    assert ex.params["a"] == pytest.approx(0.8)
    rx, ry = direct(coupled, (0.05, 0.02), 0.05, params={"a": 0.8}).xy()
    x, y = source_xy(ex)
    np.testing.assert_allclose(x, rx, atol=1e-12)
    np.testing.assert_allclose(y, ry, atol=1e-12)
    # and it differs from the orbit at the old value (the parameter reached the kernels)
    ox, _ = direct(coupled, (0.05, 0.02), 0.05, params={"a": 0.5}).xy()
    assert not np.allclose(x[:50], ox[:50])


def test_drag_moves_the_newest_orbit(hh):
    ex = phaselab.explore(hh, energy=E0, background=False)
    ex.add_seeds([(0.1, 0.05), (0.2, 0.0)])
    send_drag(ex, 0.25, 0.05)
    assert ex.orbits[-1].seed == (0.25, 0.05)
    rx, ry = direct(hh, (0.25, 0.05), E0).xy()
    x, y = source_xy(ex, ex.orbits[-1].id)
    np.testing.assert_allclose(x, rx, atol=1e-12)
    np.testing.assert_allclose(y, ry, atol=1e-12)
    x1, _ = source_xy(ex, ex.orbits[0].id)
    # the first orbit was computed together with the second one's first position
    np.testing.assert_allclose(x1, direct(hh, [(0.1, 0.05), (0.2, 0.0)], E0).xy(0)[0], atol=1e-12)
    # a drag into the forbidden region is refused, the orbit stays where it was
    send_drag(ex, 0.0, 0.9)
    assert ex.orbits[-1].seed == (0.25, 0.05)
    assert "outside the energetically allowed region" in ex.status


def test_undo_and_clear(hh):
    ex = phaselab.explore(hh, energy=E0, background=False)
    ex.add_seed(0.1, 0.05)
    ex.add_seeds([(-0.2, 0.1), (0.3, -0.1)])
    assert len(ex.orbits) == 3 and len(source_xy(ex)[0]) == 900
    ex.undo()  # takes back the two seeds added together
    assert [o.id for o in ex.orbits] == [1]
    assert len(source_xy(ex)[0]) == 300
    ex.clear()
    assert ex.orbits == [] and len(source_xy(ex)[0]) == 0
    assert len(ex.figures.seeds.data["x"]) == 0 and len(ex.figures.latest.data["x"]) == 0
    ex.undo()  # the clear
    assert [o.id for o in ex.orbits] == [1] and len(source_xy(ex)[0]) == 300
    ex.undo()
    ex.undo()
    assert ex.status == "Nothing to undo."


def test_forbidden_click_is_refused_with_a_message(hh):
    ex = phaselab.explore(hh, energy=E0, background=False)
    # py^2/2 + V(0, y) = 0.32 + 0.0 > E at (y, py) = (0, 0.8): no real px
    send_tap(ex, 0.0, 0.8)
    assert ex.orbits == []
    assert "outside the energetically allowed region" in ex.status
    assert "refused" in ex.controls.status.value
    send_tap(ex, 0.1, 0.05)  # and the widget keeps working
    assert len(ex.orbits) == 1


def test_bad_slider_values_and_empty_shell(hh, coupled):
    ex = phaselab.explore(hh, energy=E0, background=False)
    ex.add_seed(0.1, 0.05)
    ex.set_energy(float("nan"))
    assert ex.energy == E0 and "finite" in ex.status
    ex.energy = float("inf")
    assert ex.energy == E0
    # H >= 0 on x = 0 near the origin: at negative energy the shell is empty there
    ex.set_energy(-0.05)
    assert "no energetically allowed region" in ex.status
    assert len(source_xy(ex)[0]) == 0 and ex.orbits[0].state is None
    ex.set_energy(E0)  # the orbit comes back (one orbit: the same batch as a direct call)
    np.testing.assert_allclose(source_xy(ex)[0], direct(hh, (0.1, 0.05), E0).xy()[0], atol=1e-12)
    cx = phaselab.explore(coupled, energy=0.05, background=False)
    cx.set_params(a=float("nan"))
    assert cx.params["a"] == 0.5 and "finite" in cx.status
    cx.set_params(b=1.0)
    assert "unknown parameters" in cx.status


def test_constructor_errors_are_clear(hh):
    with pytest.raises(phaselab.ParameterError, match="needs an energy"):
        phaselab.explore(hh)
    with pytest.raises(phaselab.ModelError, match="not a state component"):
        phaselab.explore(hh, energy=E0, plane={"z": 0.0})
    with pytest.raises(phaselab.ParameterError, match="crossings"):
        phaselab.explore(hh, energy=E0, crossings=0)


def test_background_worker_delivers_the_same_points(hh):
    ex = phaselab.explore(hh, energy=E0)  # worker thread; no event loop here, wait() delivers
    try:
        ex.add_seed(0.1, 0.05)
        assert ex.wait(120)
        rx, _ = direct(hh, (0.1, 0.05), E0).xy()
        np.testing.assert_allclose(source_xy(ex)[0], rx, atol=1e-12)
        ex.sliders["energy"].value = 0.11
        ex.sliders["energy"].value = 0.1  # newest wins
        assert ex.wait(120)
        np.testing.assert_allclose(source_xy(ex)[0], direct(hh, (0.1, 0.05), 0.1).xy()[0], atol=1e-12)
    finally:
        ex.close()


def test_colour_by_scalar_and_export(hh, tmp_path):
    ex = phaselab.explore(hh, energy=E0, background=False, color_by="energy_error", export_dir=tmp_path)
    ex.add_seeds([(0.1, 0.05), (-0.2, 0.1)])
    vals = np.asarray(ex.figures.all_points()["value"])
    assert np.isfinite(vals).all()
    assert set(np.round(vals, 18)) == {round(float(o.section.energy_error[0]), 18) for o in ex.orbits}
    paths = ex.export("hh-test")
    assert {p.suffix for p in paths} == {".png", ".csv"}
    assert all(p.stat().st_size > 0 for p in paths)
    meta, data = phaselab.export.read_section_csv(tmp_path / "hh-test.csv")
    assert len(data["orbit"]) == 600 and meta["n_orbits"] == 2
    np.testing.assert_allclose(data["states"][data["orbit"] == 0][:, 1], source_xy(ex, 1)[0], atol=1e-12)
    ex.clear()
    ex._export_clicked()
    assert "no orbits to export" in ex.status
    ex.undo()
    # the button writes the formats chosen at construction; the PDF parses (pypdf, reference)
    from pypdf import PdfReader

    ey = phaselab.explore(hh, energy=E0, background=False, export_dir=tmp_path,
                          export_formats=(".svg", ".pdf"))
    ey.add_seed(0.1, 0.0)
    assert " " not in ey._stem.value  # default file names have no spaces
    ey._export_clicked()
    assert (tmp_path / f"{ey._stem.value}.svg").stat().st_size > 0
    assert len(PdfReader(tmp_path / f"{ey._stem.value}.pdf").pages) == 1
    with pytest.raises(phaselab.ParameterError, match="export_formats"):
        phaselab.explore(hh, energy=E0, background=False, export_formats=(".exe",))


def test_colour_by_chaos_indicator(hh):
    # MEGNO near 2 on an invariant torus and large in the chaotic sea (Cincotta & Simo 2000,
    # A&AS 147, 205); the widget's value must equal a direct chaos_indicators call over the
    # same span with the same step and method
    from phaselab.orbits.chaos import chaos_indicators

    ex = phaselab.explore(hh, energy=E0, crossings=200, background=False, color_by="megno")
    ex.add_seeds([(0.0, 0.0), (-0.2, 0.0)])
    vals = [o.scalar for o in ex.orbits]
    for o, v in zip(ex.orbits, vals):
        part = o.section
        span = float(part.times[0, int(part.counts[0]) - 1])
        ref = chaos_indicators(hh, part.seeds, span, dt=part.dt, method=part.method, vectors=1)
        assert v == pytest.approx(float(ref.megno[0]), rel=1e-12)
    assert abs(vals[0] - 2.0) < 0.5
    assert vals[1] > 5.0
    # the scale is fixed and split at MEGNO 2 (with a band for 200 crossings), not stretched
    # to this run's values: the quasi-periodic orbit's ring is not on the warm side, the
    # chaotic one's is
    m = ex.figures.scalar_mapper
    assert (m.low, m.high) == (0.0, 8.0)
    rings = ex.figures.seeds.data["color"]
    pal = ex.scale.palette()
    k1 = int(round(256 * (2.0 + ex.scale.band) / 8.0))
    assert rings[0] in pal[:k1] and rings[1] in pal[k1:]
    ex.set_scale(low=0.0, anchor=3.0, high=10.0)
    assert (m.low, m.high) == (0.0, 10.0) and len(m.palette) == 256
    assert np.isfinite(np.asarray(ex.figures.all_points()["value"])).all()


def test_map_and_portrait_views(hh):
    m = phaselab.models.standard_map()
    ex = phaselab.explore(m, crossings=200, background=False)
    assert "energy" not in ex.sliders and "K" in ex.sliders
    ex.add_seed(1.0, 2.0)
    ref = phaselab.section(m, [[1.0, 2.0]], crossings=200)
    np.testing.assert_allclose(source_xy(ex)[0], ref.xy()[0], atol=1e-12)
    pend = phaselab.models.pendulum()
    px = phaselab.explore(pend, energy=0.0, crossings=100, background=False)
    px.add_seed(0.5, 0.0)
    tr = phaselab.trajectory(pend, [0.5, 0.0], np.linspace(0.0, px.view.duration, 100))
    np.testing.assert_allclose(source_xy(px)[0], tr.states[0, :, 0], atol=1e-12)
    # one level curve through the clicked energy drawn strongly: the frame has curves
    assert len(px.figures.lines.data["xs"]) > 0
    # panels fit the kind: a map shows q and p by iterate, no energy panel
    assert ex.figures.panel1.title.text == "Coordinate by iterate"
    np.testing.assert_allclose(ex.figures.panel2_source.data["y"][:200], ref.points[0, :, 1], atol=1e-12)
    # a map's iterates are dots (nothing lies between two iterates), a flow's trace a curve,
    # both in the selected orbit's colour
    from bokeh.models import Line, Scatter

    assert isinstance(ex.figures.panel1_marks.glyph, Scatter) and isinstance(px.figures.panel1_marks.glyph, Line)
    colour = ex.session.current.color
    assert ex.figures.panel2_marks.glyph.fill_color == colour == ex.figures.panel2_marks.glyph.line_color


def test_importing_phaselab_does_not_import_the_widget_layer():
    code = ("import sys, phaselab; phaselab.section; phaselab.shell_seeds; "
            "bad = [m for m in ('bokeh', 'ipywidgets', 'jupyter_bokeh', 'phaselab.widgets') if m in sys.modules]; "
            "print(bad); assert not bad")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stdout + out.stderr


def test_explorer_without_the_notebook_extras_names_the_extra():
    # a core-only install (pip install -e .) has no ipywidgets: the error must say what to install
    code = ("import sys; sys.modules['ipywidgets'] = None\n"
            "import phaselab\n"
            "try:\n    phaselab.explore\nexcept phaselab.PhaselabError as exc:\n    print(exc)\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert "phaselab[lab]" in out.stdout, out.stderr


# ----------------------------------------------------------------------------- session
def test_session_says_what_changed_without_widgets():
    import sys

    from phaselab.widgets.session import Session

    s = Session(0.1, {"a": 1.0}, ["#111111", "#222222"])
    recs = [s.new_record((0.1 * k, 0.0), np.zeros(4), 300) for k in range(3)]
    ch = s.add(recs[:2])
    assert ch.added == [1, 2] and s.newest.id == 2
    s.add(recs[2:])
    ch = s.remove(2)
    assert ch.removed == [2] and s.ids() == [1, 3]
    ch = s.undo()  # the deletion: orbit 2 comes back in its place and is recomputed
    assert s.ids() == [1, 2, 3] and ch.recompute == [2]
    ch = s.set_energy(0.2)
    assert ch.setting and ch.recompute == [1, 2, 3]
    assert s.set_energy(0.2).anything is False
    with pytest.raises(phaselab.ParameterError, match="unknown parameters b"):
        s.set_params({"b": 1.0})
    assert s.more_crossings(1).recompute == [1] and s.get(1).crossings == 600
    assert "bokeh" not in sys.modules.get("phaselab.widgets.session").__dict__


def test_session_file_round_trip_and_errors(hh, tmp_path):
    ex = phaselab.explore(hh, energy=E0, background=False, color_by="megno", crossings=120)
    ex.add_seeds([(0.1, 0.05), (-0.2, 0.1)])
    ex.more_crossings(1)
    ex.select(2)
    path = ex.save_session(tmp_path / "s.json")
    import json

    data = json.loads(path.read_text())
    assert data["format"] == "phaselab-explorer-session" and data["energy"] == E0
    assert [o["crossings"] for o in data["orbits"]] == [240, 120] and data["selected"] == 2
    assert data["color"] == {"by": "megno", "low": 0.0, "anchor": 2.0, "high": 8.0}
    ey = phaselab.explore(hh, energy=0.1, background=False, session=path)
    assert ey.energy == E0 and [o.seed for o in ey.orbits] == [(0.1, 0.05), (-0.2, 0.1)]
    assert [o.crossings for o in ey.orbits] == [240, 120] and ey.color_by == "megno"
    x, _ = source_xy(ey, 1)
    np.testing.assert_allclose(x, source_xy(ex, 1)[0], atol=1e-12)
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps({**data, "orbits": [{"seed": [0.1]}]}))
    with pytest.raises(phaselab.ParameterError, match=r"bad.json: orbits\[0\]"):
        ey.load_session(bad)
    ey._load_clicked()  # the button: a message, not a traceback
    assert "Session not loaded" in ey.status


def test_delete_more_crossings_selection_and_stops(hh):
    ex = phaselab.explore(hh, energy=E0, background=False, crossings=100)
    ex.add_seeds([(0.1, 0.05), (-0.2, 0.1), (0.3, -0.1)])
    ex.select(2)
    assert len(ex.figures.selected.data["x"]) == 100
    ex.delete(2)
    assert [o.id for o in ex.orbits] == [1, 3] and len(ex.figures.selected.data["x"]) == 0
    ex.undo()
    assert [o.id for o in ex.orbits] == [1, 2, 3]
    ex.more_crossings(3)
    assert len(source_xy(ex, 3)[0]) == 200
    # the first 100 of 200 crossings are those of the 100-crossing orbit (same step: the
    # step is chosen from the system, not the crossing count)
    np.testing.assert_allclose(source_xy(ex, 3)[0][:100], direct(hh, (0.3, -0.1), E0, crossings=100).xy()[0],
                               atol=1e-9)
    # above the escape energy 1/6 (Henon & Heiles 1964) an orbit leaves: its stop is marked
    # with a cross and the status says why
    ex.set_energy(0.3)
    stops = ex.figures.stops.data
    assert len(stops["x"]) >= 1 and all(stops["why"])
    assert "Stopped early" in ex.status and "left the box" in ex.status or "non-finite" in ex.status


def test_view_controls_plane_axes_direction_and_aspect(hh):
    ex = phaselab.explore(hh, energy=E0, background=False)
    ex.add_seed(0.1, 0.05)
    state = ex.orbits[0].state.copy()
    ex.set_view(plane={"y": 0.0}, solve_for="py")  # shown (x, px)
    assert ex.view.axis_names == ("x", "px") and ex.figures.main.xaxis.axis_label == "x"
    # the orbit is the same trajectory, now cut by y = 0 (direct section from its state)
    ref = phaselab.section(hh, state[None, :], plane={"y": 0.0}, crossings=300, energy=E0,
                           axes=("x", "px"))
    np.testing.assert_allclose(source_xy(ex)[0], ref.xy()[0], atol=1e-10)
    ex.controls.direction.value = -1
    assert ex.view.sign == -1 and "decreasing" in ex.controls.title.value
    ex.set_equal_aspect(True)
    (x0, x1), (y0, y1) = ex.figures.view_ranges
    from phaselab.widgets.figures import FRAME_H, FRAME_W

    assert (x1 - x0) / FRAME_W == pytest.approx((y1 - y0) / FRAME_H)
    ex.set_view(plane={"y": 0.0}, solve_for="y")
    assert "both fixed" in ex.status


def test_periodic_orbit_on_the_standard_map():
    # the standard map's fixed point (pi, 0) has residue K/4 (Greene 1979, J. Math. Phys. 20,
    # 1183: R = (2 - tr M)/4 with tr M = 2 - K there); (0, 0) is hyperbolic
    m = phaselab.models.standard_map()
    K = m.params["K"]
    ex = phaselab.explore(m, background=False)
    ex.controls.manifolds.value = True
    ex.find_periodic_orbit(3.0, 0.1, returns=1)
    po = ex.structures[0].orbit
    assert po.stability == "stable" and po.residue == pytest.approx(K / 4, rel=1e-9)
    assert f"residue {K / 4:.4g}" in ex.status
    assert ex.figures.periodic.data["marker"] == ["circle"]
    ex.find_periodic_orbit(0.1, 0.05, returns=1)
    assert ex.structures[1].orbit.stability == "unstable"
    assert ex.figures.periodic.data["marker"][1] == "x"  # shape, not only colour
    assert len(ex.figures.unstable.data["xs"]) >= 2 and len(ex.figures.stable.data["xs"]) >= 2
    ex.find_periodic_orbit(1.0, 1.0, returns=0)
    assert "period" in ex.status and "refused" in ex.controls.status.value


def test_frequency_colouring_matches_a_direct_call(hh):
    ex = phaselab.explore(hh, energy=E0, background=False, color_by="frequency", crossings=256)
    ex.add_seeds([(0.1, 0.05), (0.3, 0.0)])
    seeds = np.array([o.state for o in ex.orbits])
    ref = phaselab.frequencies(hh, seeds, samples=256, plane=PLANE, direction=+1)
    np.testing.assert_allclose([o.scalar for o in ex.orbits], ref.nu[:, 0], rtol=1e-12)
    assert "frequencies" in ex.status


def test_first_display_holds_everything_and_busy_status(hh):
    ex = phaselab.explore(hh, energy=E0)
    try:
        ex.add_seeds([(0.1, 0.05), (-0.2, 0.1)])
        assert "orbits on the way" in ex.controls.count.value  # never "no orbits" meanwhile
        assert "data-busy='1'" in ex.controls.status.value and "computing 2 orbits" in ex.controls.status.value
        assert ex.wait(120)
        assert "data-busy='0'" in ex.controls.status.value
        # the bundle a new view is built from holds the boundary, both orbits and the ring
        import json

        assert ex.bokeh.stale
        ex.bokeh.refresh(send=True)
        text = json.dumps(ex.bokeh.render_bundle) if isinstance(ex.bokeh.render_bundle, dict) else ex.bokeh.render_bundle
        assert "phaselab-latest" in text and not ex.bokeh.stale
        ex.add_seed(0.3, -0.1)
        assert ex.wait(120) and ex.bokeh.stale
        state = ex.bokeh.get_state()  # what a page rebuilding its widgets asks for
        assert not ex.bokeh.stale and state["render_bundle"].count('"phaselab-newest"') == 1
    finally:
        ex.close()


def test_megno_band_follows_the_integration_time(hh):
    from phaselab.widgets import scales

    # the band half-width 2 tau ln(N / tau) / N with tau = 4 crossings: from the time
    # average of MEGNO for a deviation growing like a + b t (derived here from the definition
    # in Cincotta & Simo 2000, A&AS 147, 205); it narrows as the orbits get longer
    assert scales.megno_band(300) == pytest.approx(8.0 * np.log(75.0) / 300.0, rel=1e-12)
    widths = [scales.megno_band(n) for n in (100, 300, 1000, 3000)]
    assert all(a > b for a, b in zip(widths, widths[1:]))
    ex = phaselab.explore(hh, energy=E0, crossings=300, background=False, color_by="megno")
    s = ex.scale
    assert s.anchor == 2.0 and s.band == pytest.approx(scales.megno_band(300))
    assert "torus band 1.88 to 2.12 for 300 crossings" in s.title and ex.figures.bar_title.text == s.title
    # the regular orbit (MEGNO 2.094 after 300 crossings) is drawn in the torus
    # colour, a clearly chaotic value on the warm side, a value below the band on the cool side
    band, warm, cool = s.colors([2.094, 3.0, 1.0])
    k0, k1 = (int(round(256 * v / 8.0)) for v in (2.0 - s.band, 2.0 + s.band))
    pal = s.palette()
    assert band == scales.BAND and set(pal[k0:k1]) == {scales.BAND}
    assert warm in pal[k1:] and cool in pal[:k0] and scales.BAND not in pal[:k0] + pal[k1:]
    # every colour of the scale shows on the plot's ground (common practice: a contrast
    # ratio of at least 3:1 for graphics, WCAG 2.1 section 1.4.11)
    from phaselab.widgets import theme

    assert min(_contrast(c, theme.GROUND) for c in s.palette()) >= 3.0


def _luminance(hex_colour):
    # relative luminance of an sRGB colour (WCAG 2.1 definition)
    rgb = np.array([int(hex_colour[k:k + 2], 16) for k in (1, 3, 5)]) / 255.0
    lin = np.where(rgb <= 0.04045, rgb / 12.92, ((rgb + 0.055) / 1.055) ** 2.4)
    return float(lin @ [0.2126, 0.7152, 0.0722])


def _contrast(a, b):
    la, lb = sorted((_luminance(a), _luminance(b)), reverse=True)
    return (la + 0.05) / (lb + 0.05)


def test_frequency_colours_span_the_values_with_unit_and_sign(hh):
    ex = phaselab.explore(hh, energy=E0, crossings=128, background=False, color_by="frequency")
    ex.add_seeds([(0.0, 0.0), (-0.15, 0.1), (0.2, -0.1), (0.3, 0.0)])
    vals = np.array([o.scalar for o in ex.orbits])
    # the values are those of a direct phaselab.frequencies call on the same seeds
    ref = phaselab.frequencies(hh, np.array([o.section.seeds[0] for o in ex.orbits]), samples=128,
                               plane=PLANE)
    np.testing.assert_allclose(vals, ref.nu[:, 0], atol=1e-9)
    s = ex.scale
    assert s.low < vals.min() and vals.max() < s.high  # nothing clipped to an end colour
    rings = ex.figures.seeds.data["color"]
    assert len(set(rings)) == len(set(np.round(vals, 6)))
    assert "cycles per crossing" in s.title and "clockwise" in s.title
    assert (ex.figures.scalar_mapper.low, ex.figures.scalar_mapper.high) == (s.low, s.high)
    # low and high boxes stay visible on a scale without a split; the split box is hidden
    c = ex.controls
    assert c.scale_box.layout.display == "" and c.low.layout.display != "none"
    assert c.high.layout.display != "none" and c.anchor.layout.display == "none"
    assert c.low.value == pytest.approx(s.low) and c.high.value == pytest.approx(s.high)
    # a scale the user sets stays where it was put
    ex.set_scale(low=-0.5, high=0.5)
    ex.add_seed(0.1, 0.0)
    assert (ex.scale.low, ex.scale.high) == (-0.5, 0.5)
    ex.set_color("megno")
    assert c.anchor.layout.display != "none" and c.low.layout.display != "none"
    # the menu writes the methods' names as the literature does
    words = dict((v, k) for k, v in c.color.options)
    assert words["megno"] == "MEGNO" and words["fli"] == "FLI" and words["sali"] == "SALI"


def test_periodic_marks_apart_from_orbits_with_a_key(hh):
    from phaselab.export.figures import ORBIT_COLORS
    from phaselab.export.marks import BRANCH_STYLE, MARKERS
    from phaselab.widgets.marks_key import key_entries, key_html

    def rgb(c):
        return np.array([int(c[k:k + 2], 16) for k in (1, 3, 5)], float)

    # mark and manifold colours are far from every orbit colour and from each other (a
    # distance of 70 in 0-255 RGB units: a threshold of our own choosing)
    from phaselab.widgets import scales

    used = [c for _, c in MARKERS.values()] + [c for c, _ in BRANCH_STYLE.values()]
    # apart from the orbits' own colours and from the MEGNO scale's colours
    shown = list(ORBIT_COLORS) + scales.megno_scale(300).palette(32)
    for c in used:
        assert min(np.linalg.norm(rgb(c) - rgb(o)) for o in shown) > 70, c
    for i, a in enumerate(used):
        for b in used[i + 1:]:
            assert np.linalg.norm(rgb(a) - rgb(b)) > 70, (a, b)
    ex = phaselab.explore(hh, energy=E0, background=False)
    names = [r.data_source.name for r in ex.figures.main.renderers]
    assert names.index("phaselab-periodic") > names.index("phaselab-seeds")
    assert names.index("phaselab-periodic") > names.index("phaselab-latest")
    entries = key_entries(["unstable", "stable", "stable"], ["unstable"])
    assert [w for _, _, w in entries] == ["centre (stable)", "saddle (unstable)", "unstable manifold"]
    assert "saddle (unstable)" in key_html(entries) and key_html([]) == ""


def test_compile_news_goes_through_logging(hh, capsys, caplog, monkeypatch):
    import logging
    import time

    from phaselab.codegen import progress

    # a script without an explorer (a fresh process, logging not configured): the console
    # hears the start and always the end
    code = ("import time, numba; from phaselab.codegen import progress; progress.ANNOUNCE_AFTER = 0.01\n"
            "with progress.compiling('a test loop'):\n    numba.njit(lambda x: 2 * x)(3)\n    time.sleep(0.6)\n")
    env = {k: v for k, v in __import__("os").environ.items() if k != "PHASELAB_QUIET"}
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120, env=env)
    assert out.returncode == 0, out.stderr
    lines = out.stderr.strip().splitlines()
    assert lines[0] == "phaselab: compiling a test loop (first time only: kept in the cache) ..." and len(lines) == 2
    assert lines[1].startswith("phaselab: compiled a test loop in ")
    # the same with an explorer in the process: not a line on standard error (a notebook
    # would show it as error output under the explorer)
    code2 = ("import phaselab\nex = phaselab.explore(phaselab.models.henon_heiles(), energy=0.125, "
             "background=False)\n" + code)
    out = subprocess.run([sys.executable, "-c", code2], capture_output=True, text=True, timeout=300, env=env)
    assert out.returncode == 0 and "phaselab:" not in out.stderr, out.stderr
    # with an explorer: the records are logged, nothing reaches standard error, and the
    # status line shows the end
    monkeypatch.setattr(progress, "ANNOUNCE_AFTER", 0.01)
    monkeypatch.delenv("PHASELAB_QUIET", raising=False)
    ex = phaselab.explore(hh, energy=E0, background=False)
    with caplog.at_level(logging.INFO, logger="phaselab.compile"):
        with progress.compiling("another test loop"):
            import numba

            numba.njit(lambda x: x + 1)(3)   # a real compilation (a lambda is never cached)
            time.sleep(1.1)
        ex.jobs.flush()
    assert capsys.readouterr().err == ""
    words = [r.getMessage() for r in caplog.records]
    assert any(w.startswith("compiling another test loop") for w in words)
    assert any(w.startswith("compiled another test loop in") for w in words)
    assert "compiled another test loop in" in ex.controls.status.value
    ex.close()


def test_saved_picture_follows_every_change(hh):
    from phaselab.widgets.page import StaticPicture

    ex = phaselab.explore(hh, energy=E0, background=False)
    calls = []
    ex._schedule_picture = lambda: calls.append(1)
    ex.add_seed(0.1, 0.0)
    n = len(calls)
    assert n >= 1
    ex.set_color("megno")
    ex.set_color(None)  # back to own colours: no recomputation, still a new picture
    assert len(calls) > n + 1
    n = len(calls)
    ex.figures.main.x_range.start = -0.2  # a zoom from the page
    assert len(calls) > n
    state = ex._picture_state(ex.snapshot())
    assert state["colour"] == "own" and state["orbits"] == 1 and state["ranges"][0] == -0.2
    pic = StaticPicture("t")
    pic.png = b"png"
    text = pic._html("caption", state)
    assert "data-state=" in text and "&quot;colour&quot;: &quot;own&quot;" in text


def test_forbidden_shade_ends_on_the_boundary():
    # our own isotropic oscillator: on x = 0 with px solved, the allowed region is the disk
    # y^2 + py^2 <= 2E (H = (px^2 + py^2 + x^2 + y^2)/2), so the shade is the window minus
    # a disk of radius sqrt(2E) (area of a circle, exact)
    osc = phaselab.Hamiltonian("(px**2 + py**2 + x**2 + y**2)/2", ["x", "y"], ["px", "py"], name="oscillator")
    E = 0.18
    ex = phaselab.explore(osc, energy=E, plane=PLANE, ranges=((-1.0, 1.0), (-1.0, 1.0)), background=False)
    polys = ex._frame.shade
    assert len(polys) == 1 and len(polys[0]) == 2  # the window with one hole

    def area(ring):
        return 0.5 * float(np.sum(ring[:-1, 0] * ring[1:, 1] - ring[1:, 0] * ring[:-1, 1]))

    covered = sum(area(r) for r in polys[0])
    gx, gy = ex._frame.grid_x, ex._frame.grid_y
    window = (gx[-1] - gx[0]) * (gy[-1] - gy[0])
    assert covered == pytest.approx(window - np.pi * 2 * E, rel=2e-4)
    hole = polys[0][1]
    assert np.abs(np.hypot(hole[:, 0], hole[:, 1]) - np.sqrt(2 * E)).max() < 1e-4
    # the page gets the same polygons, the static picture too
    src = ex.figures.forbidden.data
    assert len(src["xs"][0]) == 1 and len(src["xs"][0][0]) == 2
    assert ex.snapshot().forbidden is polys
    # menus write names as the axes do
    assert ex.figures.main.yaxis.axis_label == "p_y"
    assert [k for k, _ in ex.controls.plane.options] == ["x =", "y =", "p_x =", "p_y ="]
    assert "p_x from H = E" in ex.view.describe()


def test_a_click_shows_a_placeholder_at_once(hh):
    ex = phaselab.explore(hh, energy=E0, crossings=50)
    try:
        ex.add_seed(0.1, 0.05)
        # before any result: a placeholder where the click was, and the status says what runs
        assert list(ex.figures.pending.data["x"]) == [0.1] and list(ex.figures.pending.data["y"]) == [0.05]
        assert any("computing the orbit from (0.1, 0.05)" in b for b in ex.busy)
        assert ex.wait(120)
        assert list(ex.figures.pending.data["x"]) == [] and len(ex.orbits) == 1
    finally:
        ex.close()
    m = phaselab.models.standard_map()
    em = phaselab.explore(m, background=False)
    assert em._stem.value == "standard_map-iterates"
    # a periodic search: its mark replaces the placeholder; the key names what the mark means
    # (the fixed point (pi, 0) of the standard map is a centre for 0 < K < 4, Chirikov 1979)
    em.find_periodic_orbit(3.1, 0.1, returns=1)
    assert list(em.figures.pending.data["x"]) == [] and len(em.structures) == 1
    assert em.structures[0].orbit.stability == "stable" and "centre (stable)" in em.controls.key.value
    # its residue is K/4 (Greene 1979, J. Math. Phys. 20, 1183)
    assert em.structures[0].orbit.residue == pytest.approx(em.params["K"] / 4, rel=1e-8)


def test_compile_events_show_in_the_status(hh):
    from phaselab.codegen import progress

    ex = phaselab.explore(hh, energy=E0, background=False)
    with progress.compiling("kernels of this system (test)"):
        # nothing compiled yet: loading from the cache, not "first time only"
        assert "loading kernels of this system (test) from the cache" in ex.controls.status.value
        import numba

        numba.njit(lambda x: x + 1)(1)  # a real compilation inside the block
        for _ in range(50):   # the watcher thread's news reaches the widgets' thread at a flush
            ex.jobs.flush()
            if "compiling kernels of this system (test)" in ex.controls.status.value:
                break
            time.sleep(0.1)
        assert "compiling kernels of this system (test)" in ex.controls.status.value
    assert "compiling" not in ex.controls.status.value and "loading" not in ex.controls.status.value
    ex.close()
    with progress.compiling("after close"):
        pass  # a closed explorer no longer listens


def test_status_numbers_and_labels(hh):
    from phaselab.widgets.explorer import number

    assert number(2.069e-16, 0.5) == "0" and number(0.12345, 0.5) == "0.1235"
    ex = phaselab.explore(hh, energy=E0, background=False)
    ex.add_seed(2.069e-16, 0.05)
    assert "(0, 0.05)" in ex.status
    # the same labels as the HTML export (phaselab.export.describe.plain_label)
    assert (ex.figures.main.xaxis.axis_label, ex.figures.main.yaxis.axis_label) == ("y", "p_y")


def test_export_is_the_current_view(hh, tmp_path):
    from PIL import Image

    ex = phaselab.explore(hh, energy=E0, background=False, export_dir=tmp_path)
    ex.add_seeds([(0.1, 0.05), (-0.2, 0.1)])
    ex.figures.set_ranges(((0.0, 0.2), (-0.1, 0.1)))  # what a zoom sends back from the page
    snap = ex.snapshot()
    assert snap.ranges == ((0.0, 0.2), (-0.1, 0.1)) and snap.accents and snap.seeds and snap.forbidden
    png, = ex.export("zoomed", formats=(".png",))
    fig = __import__("phaselab.widgets.snapshot", fromlist=["view_figure"]).view_figure(snap)
    assert fig.axes[0].get_xlim() == (0.0, 0.2)
    with Image.open(png) as img:
        assert img.size[0] > 500
    assert ex.export("two words", formats=(".csv",))[0].name == "two-words.csv"


def test_phaselab_export_reachable_after_import():
    code = "import phaselab; print(phaselab.export.save.__name__)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert out.stdout.strip() == "save", out.stderr


def test_driven_system_view_and_panels_fit_the_system():
    drv = phaselab.models.driven_pendulum()
    ex = phaselab.explore(drv, crossings=60, background=False)
    # the window comes from bounded orbits of this system, not a fixed box
    assert ex.view.ranges != ((-np.pi, np.pi), (-3.0, 3.0))
    assert [f.title.text for f in (ex.figures.panel1, ex.figures.panel2)] == [
        "Orbit in phase space, first periods", "Energy over time (driven: not conserved)"]
    ex.add_seed(0.5, 0.0)
    # the energy panel holds H(q, p, t) along the traced orbit (the model's own energy)
    x, y = ex.figures.panel1_source.data["x"], ex.figures.panel1_source.data["y"]
    t, h = np.asarray(ex.figures.panel2_source.data["x"]), np.asarray(ex.figures.panel2_source.data["y"])
    states = np.column_stack([x, y])
    np.testing.assert_allclose(h, drv.energy(states, t=t), rtol=1e-12, atol=1e-12)


def test_quick_click_sends_its_points_first(hh):
    """In a running event loop (as in a notebook), a click answered within the placeholder
    delay sends the page its points as the first patch: no placeholder and no busy status
    before it; the status line, orbit list and count follow the points (common practice:
    the answer first, the bookkeeping after)."""
    import asyncio

    from phaselab.widgets.explorer.orbit_commands import PLACEHOLDER_DELAY

    async def run():
        ex = phaselab.explore(hh, energy=E0, crossings=100)
        sent = []
        real_send = ex.bokeh._send_patch
        ex.bokeh._send_patch = lambda events: (sent.append(("patch", {getattr(e, "model", None) and e.model.name
                                                                      for e in events})), real_send(events))
        for name in ("status", "count"):  # what each widget sends the page, in order
            w = getattr(ex.controls, name)
            w.send_state = (lambda w, name, real: lambda key=None: (sent.append((name, w.value)), real(key)))(
                w, name, w.send_state)
        try:
            for point in [(0.1, 0.05), (-0.1, 0.02)]:  # the first warms the loops
                sent.clear()
                n = len(ex.orbits)
                send_tap(ex, *point)
                for _ in range(2000):
                    await asyncio.sleep(0.005)
                    if len(ex.orbits) > n and not ex.busy:
                        break
                # the first click's follow-ups (count, orbit list) settle before the second
                for _ in range(400):
                    if f"data-orbits='{len(ex.orbits)}'" in ex.controls.count.value:
                        break
                    await asyncio.sleep(0.005)
                await asyncio.sleep(0.3)
            return sent, dict(ex.click_log[-1]), len(ex.orbits)
        finally:
            ex.close()

    sent, timing, n = asyncio.run(run())
    assert n == 2
    first = next(k for k, (kind, what) in enumerate(sent) if kind == "patch" and "phaselab-newest" in what)
    if timing["shown_wall"] - timing["tap_wall"] < 0.5 * PLACEHOLDER_DELAY:
        assert first == 0, sent[:first + 1]  # nothing reached the page before the points
    assert any(kind == "status" and "300" not in what and "crossings" in what for kind, what in sent[first:]), sent
    assert timing["sent_wall"] >= timing["shown_wall"] >= timing["tap_wall"]


def test_a_page_building_the_explorer_again_gets_the_picture_again_or_is_told(hh):
    """A view rebuilt by a page (a reload, another tab) makes the explorer send its picture
    again, for phaselab's JupyterLab plugin to write into that page's saved copy; a page
    without the plugin is told that its copy stays as it was."""
    from phaselab.widgets import messages

    ex = phaselab.explore(hh, energy=E0, background=False)
    calls = []
    ex._schedule_picture = lambda: calls.append(1)
    ex.picture.handle = object()  # as after a display in a notebook
    ex._page_ready({"n": [1.0], "keeper": [1]})  # the first view: nothing more to do
    assert ex.bokeh.page_builds == 0 and calls == []  # the state sent when the widget opened is not a page's request
    ex.bokeh.get_state()  # what a reloaded page (or another tab) asks for
    assert ex.bokeh.page_builds == 1
    ex._page_ready({"n": [2.0], "keeper": [1]})  # its view is built, the plugin is there
    assert calls == [1] and messages.PAGE_REBUILT not in ex.status
    ex._page_ready({"n": [3.0], "keeper": [0]})  # a page without it
    assert calls == [1] and messages.PAGE_REBUILT in ex.status


def test_the_saved_picture_carries_the_mark_the_page_plugin_looks_for():
    """The picture's output is marked in its metadata, on display and on every update, with
    the key the JupyterLab plugin reads (the plugin's source is checked for the same key)."""
    from pathlib import Path

    from phaselab.widgets import page

    sent = []

    class Handle:
        def update(self, obj, **kwargs):
            sent.append(kwargs)

    pic = page.StaticPicture("abc")
    pic.handle = Handle()
    pic.update(b"png", "caption", {"orbits": 1})
    assert sent == [{"metadata": {"phaselab": {"picture": "pl-still-abc"}}}]
    plugin = (Path(page.__file__).parent / "labextension" / "static" / "remoteEntry.js").read_text()
    assert f'const MARK = "{page.PICTURE_MARK}";' in plugin and "mark.picture" in plugin
