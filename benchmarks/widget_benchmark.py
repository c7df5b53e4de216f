"""Time the explorer's interactive paths without a browser.

1. click-to-points: a Tap event fed through jupyter_bokeh's message handler, until the
   points source holds the new orbit's 300 crossings (Henon-Heiles, E = 1/8). Target < 150 ms.
2. slider move with 30 orbits on the plot: energy slider set, until every orbit's points
   are replaced. Target < 1 s.

Printed side by side with the bare compute call each path wraps (phaselab.section on the
same seeds), so the widget's own overhead shows as a ratio. Run:

    /work/venv/bin/python benchmarks/widget_benchmark.py
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


def main(repeats: int = 7) -> None:
    H = phaselab.models.henon_heiles()
    E = 0.125
    plane = {"x": 0.0}
    ex = phaselab.explore(H, energy=E, crossings=300, background=False)
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
        before = len(ex.figures.points.data["x"])
        t0 = time.perf_counter()
        tap(ex, *p)
        dt = time.perf_counter() - t0
        assert len(ex.figures.points.data["x"]) == before + 300, "the tap did not add 300 points"
        click.append(dt)
        seeds = phaselab.shell_seeds(H, E, plane, "px", [p])
        t0 = time.perf_counter()
        phaselab.section(H, seeds, plane, crossings=300, energy=E, axes=("y", "py"))
        bare_click.append(time.perf_counter() - t0)

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
        seeds = phaselab.shell_seeds(H, e, plane, "px", [o.seed for o in ex.orbits])
        t0 = time.perf_counter()
        phaselab.section(H, seeds, plane, crossings=300, energy=e, axes=("y", "py"))
        bare_move.append(time.perf_counter() - t0)

    def row(name, widget, bare, target):
        w, b = statistics.median(widget), statistics.median(bare)
        verdict = "ok" if w < target else "SLOW"
        print(f"{name:<38} {w * 1000:8.1f} ms  {b * 1000:8.1f} ms  {w / b:6.2f}x  "
              f"target < {target * 1000:.0f} ms: {verdict}")

    print(f"median of {repeats}; widget path vs bare phaselab.section on the same seeds")
    print(f"{'path':<38} {'widget':>11}  {'section':>11}  {'ratio':>7}")
    row("click -> 300 points (Henon-Heiles)", click, bare_click, 0.150)
    row("energy slider -> 30 orbits redrawn", move, bare_move, 1.0)


if __name__ == "__main__":
    main()
