"""Time the linked explorer (three degrees of freedom) with 100,000 section points.

Our own system: three masses on springs, nearest neighbours coupled, E = 0.5, the section
x3 = 0; 100 orbits of 1000 crossings make 100,000 points in four section coordinates,
drawn in the seeding projection and the six pairwise projections from one data source.

Paths timed (Python side, until the patch for the page is serialised; the browser then
draws):

1. build the sources: every orbit's points into the one source (columns, seeds, patch);
2. slab change: a new centre of the slab, the kept rows computed and sent (an index filter);
3. selection change: the page's selection of ~30 % of the rows (as jupyter_bokeh receives it),
   summarised by orbit in Python;
4. colour by a hidden coordinate: only the colour mapper changes;
5. click-to-points with 100,000 points shown: a tap, one orbit of 300 crossings, its rows
   streamed to the source (with the slab on, every point is sent again);
6. the picture kept for a notebook without kernel (drawn off the widgets' thread): its
   drawing time and the size of its PNG, for the slice and for the grid.

Each is printed beside the bare numpy operation it wraps, in one run. Target: interactive,
under ~0.5 s per update (under 0.2 s for click-to-points). Run:

    python benchmarks/linked_explorer_benchmark.py
"""

from __future__ import annotations

import statistics
import time

import numpy as np

import phaselab

H_TEXT = "(p1**2 + p2**2 + p3**2)/2 + (x1**2 + 1.3*x2**2 + 1.7*x3**2)/2 + k*(x1*x2 + x2*x3)"


def _ref(explorer, model):
    from bokeh.core.serialization import Serializer

    return Serializer(references=set(explorer.figures.main.document.models)).encode(model)


def tap(explorer, x, y):
    values = {"type": "map", "entries": [["model", _ref(explorer, explorer.figures.main)], ["sx", 1.0],
                                         ["sy", 1.0], ["x", x], ["y", y]]}
    explorer.bokeh._sync_model(explorer.bokeh, {"event": "jsevent", "kind": "MessageSent",
                                                "msg_type": "bokeh_event",
                                                "msg_data": {"type": "event", "name": "tap", "values": values}}, [])


def page_selects(explorer, rows):
    """What jupyter_bokeh receives when a box or lasso selects ``rows`` in the page."""
    sel = explorer.figures.points.selected
    explorer.bokeh._sync_model(explorer.bokeh, {"event": "jsevent", "kind": "ModelChanged",
                                                "model": _ref(explorer, sel), "attr": "indices",
                                                "new": [int(i) for i in rows]}, [])


def timed(fn, repeats):
    out = []
    for k in range(repeats):
        t0 = time.perf_counter()
        fn(k)
        out.append(time.perf_counter() - t0)
    return statistics.median(out)


def main(repeats: int = 7, orbits: int = 100, crossings: int = 1000) -> None:
    H = phaselab.Hamiltonian(H_TEXT, ["x1", "x2", "x3"], ["p1", "p2", "p3"], params={"k": (0.1, (0.0, 0.3))},
                             name="three springs")
    ex = phaselab.explore(H, energy=0.5, plane={"x3": 0.0}, crossings=crossings, background=False)
    rng = np.random.default_rng(7)
    t0 = time.perf_counter()
    pts = rng.uniform(-0.45, 0.45, (orbits, 2))
    held = [{"x2": float(a), "p2": float(b)} for a, b in rng.uniform(-0.3, 0.3, (orbits, 2))]
    ex.add_seeds(pts, held=held)
    t_orbits = time.perf_counter() - t0
    n = len(ex.figures.points.data["orbit"])
    print(f"{len(ex.orbits)} orbits, {n} section points in 4 coordinates, 7 projections of one source "
          f"(orbits computed in {t_orbits:.1f} s)")
    cols = dict(ex.figures.points.data)
    records = ex.session.shown()

    rows = []
    w = timed(lambda k: ex._redraw(), repeats)
    b = timed(lambda k: np.concatenate([r.points for r in records]), repeats)
    rows.append(("build the sources (100k points)", w, b))

    centres = np.linspace(-0.5, 0.5, repeats)
    w = timed(lambda k: ex.set_slab("p2", float(centres[k]), 0.05), repeats)
    b = timed(lambda k: np.flatnonzero(np.abs(cols["c3"] - centres[k]) < 0.05), repeats)
    kept = len(ex.figures.slab_filter.indices)
    rows.append((f"slab change ({kept} rows kept)", w, b))
    ex.clear_slab()

    picks = [np.flatnonzero(cols["c0"] > 0.1 * (k - 3)) for k in range(repeats)]
    w = timed(lambda k: page_selects(ex, picks[k]), repeats)
    b = timed(lambda k: np.unique(cols["orbit"][picks[k]]), repeats)
    rows.append((f"selection change ({len(picks[0])} rows)", w, b))
    summary = ex.last_timing["selection"]

    names = ["x2", "p2", None]
    w = timed(lambda k: ex.set_color(names[k % 3]), repeats)
    rows.append(("colour by a hidden coordinate", w, float("nan")))

    ex.crossings = 300
    seeds = rng.uniform(-0.3, 0.3, (repeats, 2))
    w = timed(lambda k: tap(ex, *seeds[k]), repeats)
    b = timed(lambda k: phaselab.section(H, ex.orbits[-1].state[None, :], 300, plane={"x3": 0.0},
                                         energy=0.5), repeats)
    rows.append((f"click-to-points ({len(ex.figures.points.data['orbit'])} shown)", w, b))
    ex.set_slab("p2", 0.0, 0.05)
    w = timed(lambda k: tap(ex, *seeds[k]), repeats)
    rows.append(("click-to-points, slab on (all resent)", w, b))

    print(f"median of {repeats}; explorer path vs the bare numpy (or phaselab.section) call it wraps")
    print(f"{'path':<40} {'explorer':>11}  {'bare':>11}  {'ratio':>7}")
    for name, w, b in rows:
        ratio = f"{w / b:6.1f}x" if np.isfinite(b) else "      -"
        bare = f"{b * 1000:8.1f} ms" if np.isfinite(b) else "          -"
        print(f"{name:<40} {w * 1000:8.1f} ms  {bare}  {ratio}")
    print(f"(of the selection change, the summary by orbit in Python: {summary * 1000:.1f} ms)")
    # the picture kept for a notebook without kernel, drawn in the idle worker after a quiet
    # spell (explorer/picture_keeping.py): the slice (slab on), then the grid of every projection
    for label in ("slice", "grid"):
        if label == "grid":
            ex.clear_slab()
        compute, state, _ = ex._picture_job()
        t0 = time.perf_counter()
        png = compute()
        print(f"kept picture, {label} ({state['points']} points): drawn in {time.perf_counter() - t0:.2f} s, "
              f"PNG {len(png) / 1024:.0f} KiB")
    ex.close()


if __name__ == "__main__":
    main()
