"""The explorer for three degrees of freedom (linked projections of a 4-D section), without
a browser: clicks are fed through jupyter_bokeh's own message handler as in
test_widgets.py, and every number is compared with an independent evaluation (sympy for
H, numpy for the slab, a direct phaselab.section for the points)."""

from __future__ import annotations

import numpy as np
import pytest
import sympy as sp

import phaselab

pytest.importorskip("ipywidgets")
pytest.importorskip("jupyter_bokeh")

H_TEXT = "(p1**2 + p2**2 + p3**2)/2 + (x1**2 + 1.3*x2**2 + 1.7*x3**2)/2 + k*(x1*x2 + x2*x3)"
PLANE = {"x3": 0.0}
E0 = 0.5
CROSSINGS = 60


@pytest.fixture(scope="module")
def springs():
    # our own system: three masses on springs, nearest neighbours coupled (k), bounded
    return phaselab.Hamiltonian(H_TEXT, ["x1", "x2", "x3"], ["p1", "p2", "p3"],
                                params={"k": (0.1, (0.0, 0.3))}, name="three springs")


@pytest.fixture(scope="module")
def h_sympy():
    """H evaluated by sympy from the same text, independently of phaselab's kernels."""
    syms = sp.symbols("x1 x2 x3 p1 p2 p3 k")
    expr = sp.sympify(H_TEXT, locals={s.name: s for s in syms})
    f = sp.lambdify(syms, expr, "numpy")
    return lambda states, k=0.1: f(*np.asarray(states, float).T, k)


@pytest.fixture(scope="module")
def ex(springs):
    e = phaselab.explore(springs, energy=E0, plane=PLANE, crossings=CROSSINGS, background=False)
    yield e
    e.close()


def send_tap(explorer, x, y, name="tap"):
    """What the page sends for a click at data coordinates (x, y) on the seeding projection
    (``name="doubletap"``: a click within 300 ms of the previous one)."""
    from bokeh.core.serialization import Serializer

    doc = explorer.figures.main.document
    ref = Serializer(references=set(doc.models)).encode(explorer.figures.main)
    values = {"type": "map", "entries": [["model", ref], ["sx", 200.0], ["sy", 150.0], ["x", x], ["y", y]]}
    content = {"event": "jsevent", "kind": "MessageSent", "msg_type": "bokeh_event",
               "msg_data": {"type": "event", "name": name, "values": values}}
    explorer.bokeh._sync_model(explorer.bokeh, content, [])


def test_three_dof_gets_the_linked_explorer_and_two_dof_keeps_the_plane_one(ex):
    from phaselab.widgets.explorer import Explorer, LinkedExplorer

    assert isinstance(ex, LinkedExplorer)
    assert ex.view.coordinates == ("x1", "x2", "p1", "p2")
    assert ex.view.axis_names == ("x1", "p1") and ex.view.held == ("x2", "p2")
    assert set(ex.controls.held) == {"x2", "p2"}
    hh = phaselab.models.henon_heiles()
    plane_ex = phaselab.explore(hh, energy=0.1, background=False)
    assert type(plane_ex) is Explorer
    plane_ex.close()


def test_windows_hold_the_allowed_region(ex):
    # along x1 with the others at 0: x1^2/2 <= E, |x1| <= 1 (the window must contain it)
    lo, hi = ex.view.windows["x1"]
    assert lo < -1.0 and hi > 1.0
    lo, hi = ex.view.windows["p2"]     # |p2| <= sqrt(2 E) = 1
    assert lo < -1.0 and hi > 1.0 and hi < 1.6


def test_linked_projections_share_one_source(ex):
    f = ex.figures
    assert len(f.grid) == 6                    # 4 coordinates: 4 * 3 / 2 pairwise projections
    assert len(f.point_renderers) == 7         # the grid and the seeding projection
    assert all(r.data_source is f.points for r in f.point_renderers)
    assert len({id(r.view) for r in f.point_renderers}) == 7   # each its own view, one filter


def test_click_seeds_an_orbit_on_the_energy_shell(ex, springs, h_sympy):
    ex.clear()
    ex.set_held(x2=0.1, p2=-0.2)
    send_tap(ex, 0.3, 0.25)
    assert len(ex.orbits) == 1, ex.status
    rec = ex.orbits[0]
    x1, x2, x3, p1, p2, p3 = rec.state
    assert (x1, p1, x2, p2, x3) == (0.3, 0.25, 0.1, -0.2, 0.0)
    assert p3 > 0                              # sign +1: the crossing direction of x3
    # H = E at the seed, H from sympy (independent of the compiled kernel)
    assert abs(h_sympy(rec.state[None, :])[0] - E0) < 1e-12
    # every crossing on the shell: energy error of the fixed-step symplectic integrator
    # (common practice: a relative error well below 1e-5 at the default step)
    states = rec.section.points[0, : rec.section.counts[0]]
    assert len(states) == CROSSINGS
    assert np.max(np.abs(h_sympy(states) - E0)) / E0 < 1e-5
    assert np.all(np.abs(states[:, 2]) < 1e-9)   # on the plane x3 = 0
    # the points shown are the direct section's, in the section coordinates
    direct = phaselab.section(springs, rec.state[None, :], CROSSINGS, plane=PLANE, energy=E0)
    d = ex.figures.points.data
    ref = direct.points[0, : direct.counts[0]]
    for j, name in enumerate(ex.view.coordinates):
        k = ["x1", "x2", "x3", "p1", "p2", "p3"].index(name)
        np.testing.assert_allclose(d[f"c{j}"], ref[:, k], rtol=0, atol=1e-12)
    assert list(ex.figures.seeds.data["x"]) == [0.3] and list(ex.figures.seeds.data["y"]) == [0.25]


def test_quick_second_click_elsewhere_is_a_click(ex):
    """BokehJS reports any click within 300 ms of the previous one as a double tap, wherever
    it lands (its doubletap_threshold): elsewhere it starts an orbit like a click; on the
    same spot (a double click) it adds nothing."""
    ex.clear()
    ex.set_held(x2=0.0, p2=0.0)
    send_tap(ex, 0.1, 0.05)
    send_tap(ex, -0.2, 0.1, name="doubletap")
    assert [tuple(o.seed) for o in ex.orbits] == [(0.1, 0.05), (-0.2, 0.1)]
    send_tap(ex, -0.2, 0.1, name="doubletap")
    assert len(ex.orbits) == 2


def test_click_outside_the_shell_is_refused_with_the_reason(ex):
    n = len(ex.orbits)
    ex.set_held(x2=0.0, p2=0.0)
    send_tap(ex, 0.9, 0.9)          # x1^2/2 + p1^2/2 = 0.81 > E: no p3 solves H = E
    assert len(ex.orbits) == n
    assert "refused" in ex.status and "outside the energetically allowed region" in ex.status
    assert ex.controls.status.value.count("refused") >= 1


def test_slab_filter_equals_numpy_selection(ex):
    ex.clear()
    ex.add_seeds([(0.3, 0.25), (-0.2, 0.4), (0.5, 0.0)], held={"x2": 0.1, "p2": 0.1})
    assert len(ex.orbits) == 3
    ex.set_slab("p2", 0.05, 0.08)
    # numpy on the orbits' own section points (state column 4 is p2)
    p2 = np.concatenate([o.section.points[0, : o.section.counts[0], 4] for o in ex.orbits])
    expected = np.flatnonzero(np.abs(p2 - 0.05) < 0.08)
    assert 0 < len(expected) < len(p2)
    np.testing.assert_array_equal(np.asarray(ex.figures.slab_filter.indices), expected)
    assert all(r.view.filter is ex.figures.slab_filter for r in ex.figures.point_renderers)
    # the same points as the library's slice of the same section
    assert ex.sliced().n_points == len(expected)
    # an orbit added while the slab is on: its rows are appended (streamed) and filtered too
    ex.add_seed(0.1, -0.3)
    p2 = np.concatenate([o.section.points[0, : o.section.counts[0], 4] for o in ex.orbits])
    assert len(ex.figures.points.data["c3"]) == len(p2) == 4 * CROSSINGS
    np.testing.assert_array_equal(ex.figures.points.data["c3"], p2)
    np.testing.assert_array_equal(np.asarray(ex.figures.slab_filter.indices), np.flatnonzero(np.abs(p2 - 0.05) < 0.08))
    ex.clear_slab()
    assert all(r.view.filter is ex.figures.all_rows for r in ex.figures.point_renderers)


def test_selection_in_one_projection_is_reported_by_orbit(ex):
    ex.clear()
    ex.add_seeds([(0.3, 0.25), (-0.2, 0.4)], held={"x2": 0.1, "p2": 0.1})
    rows = np.flatnonzero(ex.figures.points.data["orbit"] == ex.orbits[1].id)[:7]
    ex.select_points(rows)
    assert ex.selection == (7, [ex.orbits[1].id])
    assert "7 points selected" in ex.controls.selection.value


def test_new_orbits_go_to_the_fresh_layer_then_are_folded(springs, monkeypatch):
    """A new orbit's rows go to the small source drawn on the overlay layer (the big source
    is not sent again); the slab and a selection act on both, row numbers of the whole
    table; the fold moves the rows into the big source and the selection keeps its points."""
    from phaselab.widgets.explorer import linked_commands

    monkeypatch.setattr(linked_commands, "FOLD_DELAY", 600.0)   # no fold during the test
    e = phaselab.explore(springs, energy=E0, plane=PLANE, crossings=CROSSINGS, background=True)
    try:
        f = e.figures
        for slot, group in zip(f.slots, f.slot_renderers):   # each slot: one overlay renderer per projection
            assert len(group) == 7 and all(r.level == "overlay" and r.data_source is slot for r in group)
        e.add_seeds([(0.3, 0.25), (-0.2, 0.4)], held={"x2": 0.1, "p2": 0.1})
        _delivered(e, 2)
        e._fold()
        big = {k: np.array(v) for k, v in f.points.data.items()}
        e.set_slab("p2", 0.05, 0.08)
        e.add_seed(0.1, -0.3)
        _delivered(e, 3)
        assert len(f.points.data["orbit"]) == 2 * CROSSINGS and f.n_fresh == CROSSINGS
        for k, v in big.items():                 # the big source untouched
            np.testing.assert_array_equal(f.points.data[k], v)
        # the whole table is the orbits' own points (state column 4 is p2), in order
        p2 = np.concatenate([o.section.points[0, : o.section.counts[0], 4] for o in e.orbits])
        np.testing.assert_array_equal(f.table()["c3"], p2)
        kept = np.flatnonzero(np.abs(p2 - 0.05) < 0.08)     # numpy's slab on the same points
        n_big = 2 * CROSSINGS
        np.testing.assert_array_equal(f.slab_filter.indices, kept[kept < n_big])
        np.testing.assert_array_equal(f.slot_filters[0].indices, kept[kept >= n_big] - n_big)
        assert all(r.view.filter is f.slot_filters[0] for r in f.slot_renderers[0])
        for group in f.slot_renderers[1:]:   # empty slots: switched when rows arrive
            assert all(r.view.filter is f.all_rows for r in group)
        # a selection over both sources, reported by orbit
        rows = np.array([5, n_big + 3, n_big + 4])
        e.select_points(rows)
        assert e.selection == (3, [e.orbits[0].id, e.orbits[2].id])
        e._fold()
        assert f.n_fresh == 0 and len(f.points.data["orbit"]) == 3 * CROSSINGS
        np.testing.assert_array_equal(f.points.data["c3"], p2)
        np.testing.assert_array_equal(f.selected_rows(), rows)
        np.testing.assert_array_equal(f.slab_filter.indices, kept)
        assert e.selection == (3, [e.orbits[0].id, e.orbits[2].id])
    finally:
        e.close()


def test_new_orbits_fill_the_fresh_slots_in_turn_then_fold_when_full(springs, monkeypatch):
    """Each fresh slot takes rows until it holds SLOT_ROWS, then the next one does (the page
    indexes again only the slot that changed); the whole table stays in the orbits' order,
    a selection spans slots, and the slots full, the rows are folded at once."""
    import time

    from phaselab.widgets import linked_figures
    from phaselab.widgets.explorer import linked_commands

    monkeypatch.setattr(linked_commands, "FOLD_DELAY", 600.0)   # only a full set of slots folds
    monkeypatch.setattr(linked_figures, "FRESH_SLOTS", 3)
    monkeypatch.setattr(linked_figures, "SLOT_ROWS", 1)         # one orbit fills a slot
    e = phaselab.explore(springs, energy=E0, plane=PLANE, crossings=CROSSINGS, background=True)
    try:
        f = e.figures
        assert len(f.slots) == 3 and len(f.fresh_renderers) == 3 * 7
        for k, seed in enumerate([(0.3, 0.25), (-0.2, 0.4)]):
            e.add_seeds([seed], held={"x2": 0.1, "p2": 0.1})
            _delivered(e, k + 1)
        sizes = [len(o.points) for o in e.orbits]
        assert [len(s.data["orbit"]) for s in f.slots] == sizes + [0]
        assert not f.slots_full and len(f.points.data["orbit"]) == 0
        p2 = np.concatenate([o.section.points[0, : o.section.counts[0], 4] for o in e.orbits])
        np.testing.assert_array_equal(f.table()["c3"], p2)
        rows = np.array([1, sizes[0] + 2])                        # one row in each slot
        e.select_points(rows)
        assert list(f.slots[0].selected.indices) == [1] and list(f.slots[1].selected.indices) == [2]
        assert e.selection == (2, [e.orbits[0].id, e.orbits[1].id])
        e.add_seed(0.1, -0.3)
        end = time.monotonic() + 120
        while (len(e.orbits) < 3 or f.n_fresh) and time.monotonic() < end:
            e.jobs.flush()
            time.sleep(0.02)
        assert f.n_fresh == 0 and f.filling == 0, [len(s.data["orbit"]) for s in f.slots]
        p2 = np.concatenate([o.section.points[0, : o.section.counts[0], 4] for o in e.orbits])
        np.testing.assert_array_equal(f.points.data["c3"], p2)
        np.testing.assert_array_equal(f.selected_rows(), rows)
    finally:
        e.close()


def test_rows_the_page_sends_back_are_not_streamed_twice(ex):
    """The page sends the kernel's own streamed rows back (jupyter_bokeh): they must not be
    appended again on the kernel's side (the table would hold an orbit twice)."""
    from bokeh.core.serialization import Serializer

    ex.clear()
    ex.add_seeds([(0.3, 0.25)], held={"x2": 0.1, "p2": 0.1})
    n = ex.figures.n_rows
    doc = ex.figures.main.document
    ser = Serializer(references=set(doc.models))
    echo = {"event": "jsevent", "kind": "ColumnsStreamed", "model": ser.encode(ex.figures.points), "attr": "data",
            "data": ser.encode({k: list(np.asarray(v)[:5]) for k, v in ex.figures.points.data.items()}),
            "rollover": None}
    ex.bokeh._sync_model(ex.bokeh, echo, [])
    assert ex.figures.n_rows == n == sum(len(o.points) for o in ex.orbits)


def _delivered(explorer, n_orbits, seconds=120.0):
    """Deliver the worker's results (no event loop here) until ``n_orbits`` are in."""
    import time

    end = time.monotonic() + seconds
    while len(explorer.orbits) < n_orbits and time.monotonic() < end:
        explorer.jobs.flush()
        time.sleep(0.02)
    assert len(explorer.orbits) == n_orbits, explorer.status


def test_colour_by_hidden_coordinate_changes_only_the_mapper(ex):
    ex.set_color("p2")
    for r in ex.figures.point_renderers:     # the selected and faded points too
        assert {g.fill_color["field"] for g in (r.glyph, r.selection_glyph, r.nonselection_glyph)} == {"c3"}
    assert (ex.figures.scalar_mapper.low, ex.figures.scalar_mapper.high) == ex.view.windows["p2"]
    ex.set_color(None)
    with pytest.raises(phaselab.ParameterError, match="section coordinate"):
        ex.set_color("x3")


def test_session_round_trip_and_export(ex, springs, tmp_path):
    ex.clear()
    ex.add_seeds([(0.3, 0.25), (-0.2, 0.4)], held={"x2": 0.1, "p2": -0.1})
    ex.set_slab("x2", 0.0, 0.1)
    path = ex.save_session(tmp_path / "s.json")
    other = phaselab.explore(springs, energy=0.3, plane=PLANE, crossings=CROSSINGS, background=False)
    other.load_session(path)
    assert other.energy == E0 and other.slab == ex.slab
    assert len(other.orbits) == 2
    for a, b in zip(ex.orbits, other.orbits):
        np.testing.assert_array_equal(a.state, b.state)
        np.testing.assert_array_equal(a.points, b.points)
    ex.export_dir = tmp_path
    paths = ex.export("springs", formats=(".png", ".csv"))
    assert [p.suffix for p in paths] == [".png", ".csv"] and all(p.stat().st_size > 0 for p in paths)
    other.close()


def test_bad_options_are_refused(springs):
    with pytest.raises(phaselab.ParameterError, match="held"):
        phaselab.explore(springs, energy=E0, plane=PLANE, held={"x3": 0.0}, background=False)
    with pytest.raises(phaselab.ModelError, match="solve_for"):
        phaselab.explore(springs, energy=E0, plane=PLANE, solve_for="p1", background=False)
    with pytest.raises(phaselab.ParameterError, match="not an option"):
        phaselab.explore(springs, energy=E0, plane=PLANE, duration=3.0, background=False)
    with pytest.raises(phaselab.ParameterError, match="energy"):
        phaselab.explore(springs, plane=PLANE, background=False)


def test_section4_session_files_are_checked(ex, tmp_path):
    import json

    from phaselab.widgets.session_file import read_session

    good = {"format": "phaselab-explorer-session", "version": 1, "system": "three springs", "kind": "section4",
            "energy": 0.5, "params": {"k": 0.1},
            "view": {"plane": {"x3": 0.0}, "solve_for": "p3", "direction": 1, "axes": ["x1", "p1"],
                     "coordinates": ["x1", "x2", "p1", "p2"], "held": {"x2": 0.0, "p2": 0.1},
                     "slab": {"name": "p2", "center": 0.0, "half_width": 0.1}},
            "color": {"by": "x2"}, "orbits": [{"seed": [0.1, 0.0, 0.2, 0.1], "crossings": 20}], "selected": None}
    path = tmp_path / "good.json"
    path.write_text(json.dumps(good))
    assert read_session(path)["orbits"][0]["seed"] == [0.1, 0.0, 0.2, 0.1]
    bad = json.loads(json.dumps(good))
    bad["view"]["slab"]["half_width"] = -0.1
    path.write_text(json.dumps(bad))
    with pytest.raises(phaselab.ParameterError, match="view.slab.half_width"):
        read_session(path)
    bad = json.loads(json.dumps(good))
    bad["orbits"][0]["seed"] = [0.1, 0.0, 0.2]
    path.write_text(json.dumps(bad))
    with pytest.raises(phaselab.ParameterError, match=r"orbits\[0\].seed"):
        ex.load_session(path)          # three numbers for four section coordinates
    plane_kind = json.loads(json.dumps(good))
    plane_kind["kind"] = "section"
    path.write_text(json.dumps(plane_kind))
    with pytest.raises(phaselab.ParameterError, match=r"orbits\[0\].seed"):
        read_session(path)             # a plane explorer's seed is a pair


@pytest.mark.slow
def test_colour_by_megno(ex):
    ex.clear()
    ex.add_seeds([(0.3, 0.25), (-0.2, 0.4)], held={"x2": 0.1, "p2": 0.1})
    ex.set_color("megno")
    values = [o.scalar for o in ex.orbits]
    # a linear system (our springs) has isochronous motion: deviations grow at most
    # linearly with a constant rate, and MEGNO tends to 0 (Cincotta & Simo, Astron.
    # Astrophys. Suppl. 147, 205, 2000, the harmonic oscillator case)
    assert all(np.isfinite(v) and abs(v) < 0.05 for v in values), values
    d = ex.figures.points.data
    for o in ex.orbits:
        assert np.all(d["value"][d["orbit"] == o.id] == o.scalar)
    assert ex.figures.point_renderers[0].glyph.fill_color["field"] == "value"
    ex.set_color(None)


# ---------------------------------------------------------------------- the kept picture
class _Handle:
    """Stands for the display handle of the picture's output: keeps what it is sent."""

    def __init__(self):
        self.sent = []

    def update(self, obj, **kwargs):
        self.sent.append((obj, kwargs))


def _drawn(explorer):
    """Draw the kept picture now (as after the quiet spell); returns (png bytes, state)."""
    explorer.picture.handle = explorer.picture.handle or _Handle()
    explorer._draw_picture()
    assert explorer.wait(60)
    return explorer.picture.png, explorer.picture.state


def test_the_picture_is_shown_on_display_marked_and_hidden_beside_the_live_explorer(springs, monkeypatch):
    import IPython.display

    from phaselab.widgets import page

    shown = []

    def display(*objs, **kwargs):
        shown.append((objs, kwargs))
        return _Handle() if kwargs.get("display_id") else None

    monkeypatch.setattr(IPython.display, "display", display)
    e = phaselab.explore(springs, energy=E0, plane=PLANE, crossings=CROSSINGS, background=False)
    try:
        e._repr_mimebundle_()
        marked = [kw for _, kw in shown if kw.get("metadata") == {page.PICTURE_MARK: {"picture": e.picture.cls}}]
        assert len(marked) == 1 and marked[0]["display_id"] is True and e.picture.handle is not None
        # the explorer's style sheet hides the picture's output while the live explorer is on the page
        assert e.picture.hide_rule in e.controls.style.value and f".{e.picture.cls}" in e.picture.hide_rule
        # the page says when it built a view: the ready source is part of the document
        assert e.figures.sync.ready in e.figures.main.tags
        assert e.figures.sync.on_build in e.figures.main.js_property_callbacks["change:inner_width"]
    finally:
        e.close()


def test_the_picture_counts_a_new_orbit_and_the_slab(springs):
    e = phaselab.explore(springs, energy=E0, plane=PLANE, crossings=CROSSINGS, background=False)
    try:
        png, state = _drawn(e)
        assert png == b"" and state["orbits"] == 0 and "no orbits shown" in e.picture.handle.sent[-1][0].data
        e.add_seeds([(0.3, 0.25), (-0.2, 0.4)], held={"x2": 0.1, "p2": -0.1})
        png, state = _drawn(e)
        every = np.concatenate([r.points for r in e.orbits])
        assert state["orbits"] == 2 and state["points"] == len(every) == e.figures.n_rows
        assert state["colour"] == "own" and state["slab"] is None
        main = e.figures.main
        assert state["window"] == pytest.approx([main.x_range.start, main.x_range.end, main.y_range.start,
                                                 main.y_range.end], rel=1e-5)  # 6 digits kept
        e.set_slab("p2", -0.1, 0.05)
        e.set_color("x2")
        png, state = _drawn(e)
        # the slab's points counted directly with numpy from the orbits' points (column p2)
        inside = int(np.sum(np.abs(every[:, e.view.coordinates.index("p2")] + 0.1) < 0.05))
        assert state["slab"] == {"name": "p2", "center": -0.1, "half_width": 0.05} and state["points"] == inside
        assert state["colour"] == "x2"
        caption = e.picture.handle.sent[-1][0].data
        assert "coloured by orbit" in caption and "data-state=" in caption
    finally:
        e.close()


@pytest.fixture
def scheduled(springs):
    """A linked explorer whose picture redraws are counted (in the returned list)."""
    e = phaselab.explore(springs, energy=E0, plane=PLANE, crossings=CROSSINGS, background=False)
    calls = []
    e._schedule_picture = lambda: calls.append(1)
    yield e, calls
    e.close()


def test_the_picture_is_scheduled_after_each_kind_of_change(scheduled):
    e, calls = scheduled

    def changed(action):
        n = len(calls)
        action()
        assert len(calls) > n, action

    changed(lambda: e.add_seed(0.3, 0.25))                  # a new orbit
    changed(lambda: e.add_seeds([(-0.2, 0.4), (0.1, 0.1)]))
    changed(lambda: e.set_slab("x2", 0.0, 0.1))             # slab on, moved, off
    changed(lambda: e.set_slab(center=0.05))
    changed(e.clear_slab)
    changed(lambda: e.set_color("p1"))                      # colouring
    changed(lambda: e.set_color(None))
    changed(lambda: e.set_energy(0.45))                     # the energy slider
    changed(lambda: e.set_params(k=0.12))                   # a parameter slider
    changed(e.undo)
    changed(e.clear)
    changed(lambda: setattr(e.figures.main.x_range, "start", -0.3))   # a zoom from the page


def test_a_page_building_the_linked_explorer_again_gets_the_picture_again_or_is_told(scheduled):
    from phaselab.widgets import messages

    e, calls = scheduled
    e.picture.handle = object()        # as after a display in a notebook
    e._page_ready({"n": [1.0], "keeper": [1]})   # the first view: nothing more to do
    assert calls == []
    e.bokeh.get_state()                # what a reloaded page asks for
    e.figures.sync.ready.data = {"n": [2.0], "keeper": [1]}   # written by the page: the plugin is there
    assert calls == [1] and messages.PAGE_REBUILT not in e.status
    e._page_ready({"n": [3.0], "keeper": [0]})   # a page without it
    assert calls == [1] and messages.PAGE_REBUILT in e.status


def test_the_picture_decodes_at_the_size_export_draws(springs):
    import io

    import matplotlib.image

    from phaselab.widgets.explorer.picture_keeping import PICTURE_DPI

    e = phaselab.explore(springs, energy=E0, plane=PLANE, crossings=CROSSINGS, background=False)
    try:
        e.add_seeds([(0.3, 0.25), (-0.2, 0.4)], held={"x2": 0.1, "p2": -0.1})
        png, _ = _drawn(e)
        image = matplotlib.image.imread(io.BytesIO(png), format="png")
        # pixels = inches x dots per inch (matplotlib's figure size, common practice); the
        # grid of four coordinates is 1.6 in a panel: 6.4 x 6.8 inches (export/slice_figures.py)
        assert image.shape[:2] == (round(6.8 * PICTURE_DPI), round(6.4 * PICTURE_DPI))
        assert image[..., :3].min() < 0.5          # something dark is drawn (axes, points)
        e.set_slab("p2", -0.1, 0.05)
        png, _ = _drawn(e)
        image = matplotlib.image.imread(io.BytesIO(png), format="png")
        assert image.shape[:2] == (round(4.8 * PICTURE_DPI), round(6.0 * PICTURE_DPI))   # the slice: 6 x 4.8 in
    finally:
        e.close()


def test_the_slab_menu_names_coordinates_as_the_axes_do():
    """The slab's coordinate menu shows each coordinate as the axes and sliders write it
    (p_b for a momentum named pb, conjugate to b), and still gives the model's name."""
    H = phaselab.Hamiltonian("(pa**2 + pb**2 + pc**2)/2 + (a**2 + 1.3*b**2 + 0.8*c**2)/2 + 0.4*a*b*c",
                             ["a", "b", "c"], ["pa", "pb", "pc"])
    e = phaselab.explore(H, energy=0.3, plane={"c": 0.0}, crossings=20, background=False)
    try:
        options = e.controls.slab_name.options
        assert [name for _, name in options] == list(e.view.coordinates)
        assert all(label == e.view.label_of(name) for label, name in options)
        assert ("p_b", "pb") in options and e.controls.slab_name.value == "pb"
    finally:
        e.close()
