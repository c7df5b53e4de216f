"""Click-to-points of the linked explorer in a real page: 100,000 section points shown in
seven projections, clicks in headless chromium (no graphics processor) driven by Playwright.

Our own system: three masses on springs (as in benchmarks/linked_explorer_benchmark.py),
E = 0.5, the section x3 = 0. The notebook adds 100 orbits of 1000 crossings (100,000 points
in four section coordinates), then the page is clicked ``--clicks`` times in the seeding
projection; each click starts one orbit of 300 crossings.

Timed per click (wall clocks of the page and of the kernel, on one machine):

* page -> kernel: pointerdown to the kernel's handler of the tap;
* kernel compute: the tap to the orbit's points ready (worker thread, shell solve, section);
* kernel patch: the points made into the patch for the page and sent;
* kernel -> page: patch sent to the page holding the new rows (wire, decoding, the sources'
  indices updated);
* page draw: the rows held to every one of the seven projections painted again, and the
  next animation frame (the browser's frame after the last paint: points on screen).

click-to-points is pointerdown to that frame. The load average is printed before and after.
Run (about 3 minutes on two cores, most of it the 100 orbits):

    python benchmarks/linked_browser_benchmark.py [--clicks 24] [--backend canvas|webgl]
        [--gpu-flags "..."] [--orbits 100] [--crossings 1000] [--gap 0.4] [--profile] [--setup CODE]

``--setup`` runs Python in the notebook after the explorer is made, for variants measured
side by side; e.g. one fresh slot of 10,000 rows (the design before the slots):

    --setup 'import phaselab.widgets.linked_figures as LF; LF.FRESH_SLOTS = 1; LF.SLOT_ROWS = 10000;
             explorer.close(); explorer = phaselab.explore(H, energy=0.5, plane={"x3": 0.0}, crossings=300)'
"""

from __future__ import annotations

import argparse
import json
import os
import shlex
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests" / "widgets"))
from lab_server import CHROMIUM, open_notebook, running_lab  # noqa: E402  (the tests' own lab helpers)
from linked_page_js import LINKED_JS  # noqa: E402

H_TEXT = "(p1**2 + p2**2 + p3**2)/2 + (x1**2 + 1.3*x2**2 + 1.7*x3**2)/2 + k*(x1*x2 + x2*x3)"
BASE_ARGS = ["--headless", "--no-sandbox", "--no-first-run", "--disable-background-networking",
             "--disable-component-update", "--disable-sync"]


GL = ("from phaselab.widgets.page import load_bokehjs; load_bokehjs()\n"
      "from IPython.display import Javascript, display; from bokeh.resources import Resources\n"
      "display(Javascript(Resources(mode='inline', components=['bokeh-gl']).js_raw[0]))\n")


def _cells(orbits, crossings, backend, fresh, gl=False, extra=""):
    setup = ("import json, time, numpy as np, phaselab\n" + (GL if gl else "")
             + (f"import phaselab.widgets.linked_figures as LF; LF.BACKEND = {backend!r}\n" if backend else "")
             + ("" if fresh else "import phaselab.widgets.explorer.linked_commands as LC; LC.FRESH_LAYER = False\n")
             + f"H = phaselab.Hamiltonian({H_TEXT!r}, ['x1', 'x2', 'x3'], ['p1', 'p2', 'p3'],"
             " params={'k': (0.1, (0.0, 0.3))}, name='three springs')\n"
             "explorer = phaselab.explore(H, energy=0.5, plane={'x3': 0.0}, crossings=300)\n"
             "explorer")
    load = ("rng = np.random.default_rng(7)\n"
            f"pts = rng.uniform(-0.45, 0.45, ({orbits}, 2))\n"
            f"held = [{{'x2': float(a), 'p2': float(b)}} for a, b in rng.uniform(-0.3, 0.3, ({orbits}, 2))]\n"
            "t0 = time.perf_counter()\n"
            f"explorer.add_seeds(pts, held=held, crossings={crossings})\n"
            "explorer.wait(900)\n"
            "LOG = []\n"
            "_append = explorer._append\n"
            "def _logged(records):\n"
            "    t = time.time()\n"
            "    _append(records)\n"
            "    LOG.append(dict(explorer.last_timing, ready_wall=t, sent_wall=time.time()))\n"
            "explorer._append = _logged\n"
            "print(f'KERNEL_LOADED={sum(len(o.points) for o in explorer.orbits)} in {time.perf_counter() - t0:.1f} s')")
    report = "print('KERNEL_LOG=' + json.dumps(LOG))"
    return [setup, load, report]





def _kernel_text(page):
    return page.evaluate("() => [...document.querySelectorAll('.jp-OutputArea-output')]"
                         ".map(e => e.innerText).join('\\n')")


def _run_cell(page, index):
    page.evaluate(f"""() => {{ const nb = window.jupyterapp.shell.currentWidget.content;
                             nb.activeCellIndex = {index}; }}""")
    page.evaluate("() => window.jupyterapp.commands.execute('notebook:run-cell')")


def _seeds(rng, count):
    """Clicked pairs (x1, p1) well inside the shell E = 0.5 at the held defaults."""
    out = []
    while len(out) < count:
        x, p = rng.uniform(-0.6, 0.6, 2)
        if x * x / 2 + p * p / 2 < 0.3:
            out.append((float(x), float(p)))
    return out


def _top_functions(profile, count=25):
    """Self time (ms) of the page's functions in a CDP CPU profile, the largest first."""
    nodes = {n["id"]: n for n in profile["nodes"]}
    spent = {}
    for node_id, dt in zip(profile["samples"], profile["timeDeltas"]):
        f = nodes[node_id]["callFrame"]
        key = f"{f['functionName'] or '(anonymous)'} {f['url'].rsplit('/', 1)[-1]}:{f['lineNumber'] + 1}"
        spent[key] = spent.get(key, 0.0) + dt / 1000.0
    return sorted(spent.items(), key=lambda kv: -kv[1])[:count]


def measure(clicks=24, orbits=100, crossings=1000, backend=None, gpu_flags="--disable-gpu", shots=None, fresh=True,
            profile=False, gl=False, gap=0.4, extra=""):
    """Run the page; returns a dict of arrays (ms) per leg and the context of the run."""
    from playwright.sync_api import sync_playwright

    work = Path(tempfile.mkdtemp(prefix="linked-bench-"))
    nb = {"cells": [{"cell_type": "code", "execution_count": None, "metadata": {}, "outputs": [], "source": c}
                    for c in _cells(orbits, crossings, backend, fresh, gl, extra)],
          "metadata": {"kernelspec": {"name": "python3", "display_name": "Python 3", "language": "python"}},
          "nbformat": 4, "nbformat_minor": 5}
    (work / "bench.ipynb").write_text(json.dumps(nb))
    out = {}
    with running_lab(work) as lab, sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, args=BASE_ARGS + shlex.split(gpu_flags))
        page = browser.new_page(viewport={"width": 1500, "height": 1300})
        errors = []
        page.on("pageerror", lambda e: errors.append(str(e)))
        open_notebook(page, lab, "bench.ipynb")
        _run_cell(page, 0)
        page.wait_for_selector(".phaselab-explorer", timeout=300_000)
        _run_cell(page, 1)
        page.wait_for_function("() => [...document.querySelectorAll('.jp-OutputArea-output')]"
                               ".some(e => e.innerText.includes('KERNEL_LOADED='))", timeout=900_000)
        page.evaluate(LINKED_JS)
        n_points = orbits * crossings
        page.wait_for_function(f"() => window.__pl.doc() && window.__pl.rows() >= {n_points}", timeout=300_000)
        page.locator(".phaselab-explorer").first.scroll_into_view_if_needed()
        page.wait_for_timeout(2000)
        out["webgl"] = page.evaluate("() => window.__pl.webgl()")
        n_plots = len(page.evaluate("() => window.__pl.plots().map(v => v.model.name)"))
        page.evaluate("() => window.__pl.hook()")
        rng = np.random.default_rng(5)
        rows = []
        load = [os.getloadavg()[0]]
        if profile:
            cdp = page.context.new_cdp_session(page)
            cdp.send("Profiler.enable")
            cdp.send("Profiler.setSamplingInterval", {"interval": 500})
            cdp.send("Profiler.start")
        for k, (x, y) in enumerate(_seeds(rng, clicks)):
            sx, sy = page.evaluate(f"() => window.__pl.screen('phaselab-seeding', {x}, {y})")
            page.evaluate(f"() => window.__pl.arm({n_plots})")
            page.mouse.click(sx, sy)
            try:
                page.wait_for_function("() => window.__pl.drawn !== null", timeout=60_000)
            except Exception:
                state = page.evaluate("() => [window.__pl.timing(), [...window.__pl.paints.keys()], window.__pl.rows()]")
                raise RuntimeError(f"click {k}: the points were not drawn; page state {state}, errors {errors}")
            rows.append(page.evaluate("() => window.__pl.timing()"))
            page.wait_for_timeout(gap * 1000)
        load.append(os.getloadavg()[0])
        if profile:
            out["profile"] = _top_functions(cdp.send("Profiler.stop")["profile"])
        if shots:
            page.wait_for_timeout(1500)
            page.locator(".phaselab-explorer").first.screenshot(path=str(shots))
        _run_cell(page, 2)
        page.wait_for_function("() => [...document.querySelectorAll('.jp-OutputArea-output')]"
                               ".some(e => e.innerText.includes('KERNEL_LOG='))", timeout=60_000)
        text = _kernel_text(page)
        log = json.loads(text.split("KERNEL_LOG=", 1)[1].splitlines()[0])[-clicks:]
        shown = page.evaluate("() => window.__pl.rows()")
        browser.close()
    r = np.array(rows, dtype=float)
    down_wall = r[:, 0] + r[:, 5]   # ms since the epoch
    tap = np.array([e.get("tap_wall", np.nan) * 1000 for e in log])
    ready = np.array([e["ready_wall"] * 1000 for e in log])
    sent = np.array([e["sent_wall"] * 1000 for e in log])
    data_wall = r[:, 3] + r[:, 5]
    out.update({
        "click-to-points": r[:, 4] - r[:, 0],
        "page -> kernel": tap - down_wall,
        "kernel compute": ready - tap,
        "kernel patch": sent - ready,
        "kernel -> page": data_wall - sent,
        "page draw": r[:, 4] - r[:, 3],
        "of which painting": r[:, 6],
    })
    out["load"] = load
    out["shown"] = shown
    out["errors"] = errors
    out["plots"] = n_plots
    return out


def report(out, label=""):
    lat = out["click-to-points"]
    print(f"{label}{len(lat)} clicks with {out['shown']} points in the page ({out['plots']} plots, webgl in use: "
          f"{sum(out['webgl'])} of {len(out['webgl'])}); load average {out['load'][0]:.2f} -> {out['load'][1]:.2f}")
    print(f"  {'leg':<20} {'median':>8} {'p95':>8} {'max':>8}   (ms)")
    for key in ("click-to-points", "page -> kernel", "kernel compute", "kernel patch", "kernel -> page",
                "page draw", "of which painting"):
        v = np.asarray(out[key], float)
        print(f"  {key:<20} {np.nanmedian(v):8.0f} {np.nanpercentile(v, 95):8.0f} {np.nanmax(v):8.0f}")
    for name, ms in out.get("profile", []):
        print(f"  profile: {ms:8.0f} ms  {name}")
    if out["errors"]:
        print("  page errors:", out["errors"][:3])


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--clicks", type=int, default=24)
    ap.add_argument("--orbits", type=int, default=100)
    ap.add_argument("--crossings", type=int, default=1000)
    ap.add_argument("--backend", choices=("canvas", "webgl"), default=None,
                    help="the points' drawing backend (default: the explorer's own)")
    ap.add_argument("--gpu-flags", default="--disable-gpu", help="chromium flags about graphics")
    ap.add_argument("--one-source", action="store_true",
                    help="new orbits streamed into the big source (the design before the fresh layer)")
    ap.add_argument("--with-gl", action="store_true",
                    help="load BokehJS's WebGL bundle on the page first (the explorer sends only the core)")
    ap.add_argument("--gap", type=float, default=0.4,
                    help="seconds between one click's points drawn and the next click")
    ap.add_argument("--profile", action="store_true", help="print the page's busiest functions over the clicks")
    ap.add_argument("--setup", default="", help="Python run in the notebook after the explorer is made "
                    "(variants measured side by side, e.g. a module constant changed)")
    ap.add_argument("--screenshot", default=None, help="write a picture of the explorer after the clicks")
    a = ap.parse_args(argv)
    t0 = time.monotonic()
    out = measure(a.clicks, a.orbits, a.crossings, a.backend, a.gpu_flags, a.screenshot, fresh=not a.one_source,
                  profile=a.profile, gl=a.with_gl, gap=a.gap, extra=a.setup)
    report(out, f"[{'one source' if a.one_source else 'fresh layer'}, gap {a.gap} s, backend {a.backend or 'default'}"
                f"{' + gl bundle' if a.with_gl else ''}, "
                f"{a.gpu_flags}] ")
    print(f"  (run took {time.monotonic() - t0:.0f} s)")


if __name__ == "__main__":
    main()
