"""Time the explorer's interactive paths without a browser.

1. click-to-points: a Tap event fed through jupyter_bokeh's message handler, until the
   points sources hold the new orbit's 300 crossings (Henon-Heiles, E = 1/8). Target < 150 ms.
2. drag: the drag position the page sends while the ringed seed moves, until the newest
   orbit's points are replaced. Target: 10 updates a second (< 100 ms each).
3. slider move with 30 orbits on the plot: energy slider set, until every orbit's points
   are replaced. Target < 1 s.

The browser adds its own part (websocket, drawing): tests/widgets/test_browser.py measures the
whole path in JupyterLab and writes test-artifacts/browser-timings.txt.

Printed side by side with the bare compute call each path wraps (phaselab.section on the
same seeds), so the widget's own overhead shows as a ratio. Run:

    python benchmarks/widget_benchmark.py
"""

from __future__ import annotations

import statistics
import time

import numpy as np

import phaselab


def tap(explorer, x, y):
    from bokeh.core.serialization import Serializer

    ref = Serializer(references=set(explorer.figures.main.document.models)).encode(explorer.figures.main)
    values = {"type": "map", "entries": [["model", ref], ["sx", 1.0], ["sy", 1.0], ["x", x], ["y", y]]}
    explorer.bokeh._sync_model(explorer.bokeh, {"event": "jsevent", "kind": "MessageSent",
                                                "msg_type": "bokeh_event",
                                                "msg_data": {"type": "event", "name": "tap", "values": values}}, [])


def drag_to(explorer, x, y):
    from bokeh.core.serialization import Serializer

    ser = Serializer(references=set(explorer.figures.main.document.models))
    src = explorer.figures.probe
    explorer.bokeh._sync_model(explorer.bokeh, {"event": "jsevent", "kind": "ModelChanged",
                                                "model": ser.encode(src), "attr": "data",
                                                "new": ser.encode({"x": [x], "y": [y]})}, [])


def main(repeats: int = 7) -> None:
    H = phaselab.models.henon_heiles()
    E = 0.125
    plane = {"x": 0.0}
    ex = phaselab.explore(H, energy=E, crossings=300, background=False)
    # in a notebook the companion panels are computed on a second thread after a 0.3 s pause,
    # not on the click's path: give them a real thread here too (its results are not shown)
    from phaselab.widgets.worker import JobRunner

    ex.idle_jobs = JobRunner(True)
    rng = np.random.default_rng(3)

    def allowed_points(n):
        out = []
        while len(out) < n:
            p = rng.uniform([-0.35, -0.3], [0.5, 0.3])
            if p[1] ** 2 / 2 + p[0] ** 2 / 2 - p[0] ** 3 / 3 < E * 0.95:
                out.append(tuple(p))
        return out

    # warm the compiled kernels (one orbit and a batch) before timing
    tap(ex, 0.1, 0.05)
    ex.add_seeds(allowed_points(29))
    ex.set_energy(0.12)
    ex.set_energy(E)
    ex.clear()

    click, bare_click = [], []
    for p in allowed_points(repeats):
        before = len(ex.figures.all_points()["x"])
        t0 = time.perf_counter()
        tap(ex, *p)
        dt = time.perf_counter() - t0
        assert len(ex.figures.all_points()["x"]) == before + 300, "the tap did not add 300 points"
        click.append(dt)
        seeds = phaselab.shell_seeds(H, [p], energy=E, plane=plane, solve_for="px")
        t0 = time.perf_counter()
        phaselab.section(H, seeds, plane=plane, crossings=300, energy=E, axes=("y", "py"))
        bare_click.append(time.perf_counter() - t0)

    log = list(ex.click_log)[-repeats:]  # the clicks' own timings, split in the kernel
    drag, bare_drag = [], []
    for p in allowed_points(repeats):
        t0 = time.perf_counter()
        drag_to(ex, *p)
        drag.append(time.perf_counter() - t0)
        assert ex.orbits[-1].seed == tuple(p), ex.status
        seeds = phaselab.shell_seeds(H, [p], energy=E, plane=plane, solve_for="px")
        t0 = time.perf_counter()
        phaselab.section(H, seeds, plane=plane, crossings=300, energy=E, axes=("y", "py"))
        bare_drag.append(time.perf_counter() - t0)

    ex.clear()
    ex.add_seeds(allowed_points(30))
    assert len(ex.orbits) == 30
    move, bare_move = [], []
    for k in range(repeats):
        e = 0.11 + 0.002 * k
        t0 = time.perf_counter()
        ex.sliders["energy"].value = e
        move.append(time.perf_counter() - t0)
        assert "Recomputed 30 orbits" in ex.status, ex.status
        seeds = phaselab.shell_seeds(H, [o.seed for o in ex.orbits], energy=e, plane=plane,
                                     solve_for="px")
        t0 = time.perf_counter()
        phaselab.section(H, seeds, plane=plane, crossings=300, energy=e, axes=("y", "py"))
        bare_move.append(time.perf_counter() - t0)

    def row(name, widget, bare, target):
        w, b = statistics.median(widget), statistics.median(bare)
        verdict = "ok" if w < target else "SLOW"
        print(f"{name:<38} {w * 1000:8.1f} ms  {b * 1000:8.1f} ms  {w / b:6.2f}x  "
              f"target < {target * 1000:.0f} ms: {verdict}")

    legs = {name: statistics.median(v) * 1000 for name, v in (
        ("computing", [c["orbit_compute"] for c in log]),
        ("tap to points drawn into the document", [c["shown_wall"] - c["tap_wall"] for c in log]),
        ("points drawn to the patch sent", [c["sent_wall"] - c["shown_wall"] for c in log]))}
    print(f"median of {repeats}; widget path vs bare phaselab.section on the same seeds")
    print(f"{'path':<38} {'widget':>11}  {'section':>11}  {'ratio':>7}")
    row("click -> 300 points (Henon-Heiles)", click, bare_click, 0.150)
    print("  click legs in the kernel: " + "; ".join(f"{k} {v:.1f} ms" for k, v in legs.items()))
    row("drag step -> orbit redrawn", drag, bare_drag, 0.100)
    row("energy slider -> 30 orbits redrawn", move, bare_move, 1.0)
    ex.close()


if __name__ == "__main__":
    main()
