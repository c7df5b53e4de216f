"""The explorer in a real JupyterLab, driven by headless chromium through Playwright.

Starts JupyterLab on 127.0.0.1 (free port, random token) in a temporary folder holding a
copy of gallery/explorer_demo.ipynb, runs every cell, clicks the section plot, checks that a
new orbit's points arrive (on the page and in the kernel), moves the energy slider, and
saves screenshots into test-artifacts/. Skips when /usr/bin/chromium is absent.
"""

from __future__ import annotations

import json
import os
import re
import secrets
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

import pytest

pytestmark = [pytest.mark.browser, pytest.mark.slow]

CHROMIUM = "/usr/bin/chromium"
ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "gallery" / "explorer_demo.ipynb"
ARTIFACTS = ROOT / "test-artifacts"
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update", "--disable-sync"]


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _wait_http(url: str, seconds: float, proc, log_path) -> None:
    end = time.monotonic() + seconds
    while time.monotonic() < end:
        if proc.poll() is not None:
            raise RuntimeError(f"JupyterLab exited with code {proc.returncode}; log: "
                               + Path(log_path).read_text()[-2000:])
        try:
            with urllib.request.urlopen(url, timeout=2) as r:
                if r.status == 200:
                    return
        except OSError:
            time.sleep(0.25)
    raise RuntimeError(f"JupyterLab did not answer at {url} within {seconds} s")


@pytest.fixture(scope="module")
def lab(tmp_path_factory):
    if not os.path.exists(CHROMIUM):
        pytest.skip(f"{CHROMIUM} is absent (install Debian's chromium: apt-get install -y chromium)")
    pytest.importorskip("playwright.sync_api", reason="the playwright package is not installed")
    pytest.importorskip("jupyterlab", reason="jupyterlab is not installed")
    work = tmp_path_factory.mktemp("lab")
    nb = json.loads(DEMO.read_text())
    # one more cell that reports what the kernel holds, read back after the click
    nb["cells"].append({"cell_type": "code", "execution_count": None, "metadata": {}, "outputs": [],
                        "source": "print(f'KERNEL_ORBITS={len(explorer.orbits)} "
                                  "KERNEL_POINTS={sum(len(o.points) for o in explorer.orbits)}')\n"
                                  "print('KERNEL_TIMING=' + repr({k: round(v, 4) for k, v in explorer.last_timing.items()}))"})
    (work / "explorer_demo.ipynb").write_text(json.dumps(nb))
    port, token = _free_port(), secrets.token_hex(16)
    env = dict(os.environ)
    for key, sub in (("JUPYTER_RUNTIME_DIR", "runtime"), ("JUPYTERLAB_SETTINGS_DIR", "settings"),
                     ("JUPYTERLAB_WORKSPACES_DIR", "workspaces"), ("JUPYTER_CONFIG_DIR", "config")):
        (work / sub).mkdir()
        env[key] = str(work / sub)
    # no news pop-up over the page
    notes = work / "settings" / "@jupyterlab" / "apputils-extension"
    notes.mkdir(parents=True)
    (notes / "notification.jupyterlab-settings").write_text(json.dumps({"fetchNews": "false"}))
    log = open(work / "lab.log", "w")
    proc = subprocess.Popen(
        [sys.executable, "-m", "jupyter", "lab", "--no-browser", "--ServerApp.ip=127.0.0.1",
         f"--ServerApp.port={port}", "--ServerApp.port_retries=0", f"--IdentityProvider.token={token}",
         f"--ServerApp.root_dir={work}", "--LabApp.expose_app_in_browser=True",
         *(["--allow-root"] if hasattr(os, "geteuid") and os.geteuid() == 0 else [])],
        cwd=work, env=env, stdout=log, stderr=subprocess.STDOUT)
    try:
        _wait_http(f"http://127.0.0.1:{port}/api/status?token={token}", 90, proc, work / "lab.log")
        yield {"url": f"http://127.0.0.1:{port}", "token": token, "dir": work}
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=20)
        except subprocess.TimeoutExpired:
            proc.kill()
        log.close()


def _main_canvas_box(page):
    """The bounding box of the largest canvas inside the explorer (the section plot)."""
    boxes = page.evaluate("""() => {
        const out = [];
        const walk = (root) => {
            root.querySelectorAll('*').forEach(el => {
                if (el.tagName === 'CANVAS') { const r = el.getBoundingClientRect();
                    if (r.width > 0) out.push([r.x, r.y, r.width, r.height]); }
                if (el.shadowRoot) walk(el.shadowRoot);
            });
        };
        document.querySelectorAll('.phaselab-explorer').forEach(walk);
        return out;
    }""")
    assert boxes, "no bokeh canvas inside the explorer"
    return max(boxes, key=lambda b: b[2] * b[3])


def _count(page):
    el = page.locator(".phaselab-explorer .pl-count").first
    return int(el.get_attribute("data-orbits") or 0), int(el.get_attribute("data-points") or 0)


def test_explorer_in_jupyterlab(lab):
    from playwright.sync_api import sync_playwright

    ARTIFACTS.mkdir(exist_ok=True)
    profile = lab["dir"] / "chromium-profile"
    with sync_playwright() as pw:
        ctx = pw.chromium.launch_persistent_context(
            str(profile), executable_path=CHROMIUM, headless=True, args=CHROMIUM_ARGS,
            viewport={"width": 1400, "height": 1000})
        try:
            page = ctx.new_page()
            console = []
            page.on("console", lambda m: console.append(f"{m.type}: {m.text}"))
            page.on("pageerror", lambda e: console.append(f"pageerror: {e}"))
            page.goto(f"{lab['url']}/lab/tree/explorer_demo.ipynb?token={lab['token']}")
            page.wait_for_function("() => window.jupyterapp && window.jupyterapp.shell.currentWidget "
                                   "&& window.jupyterapp.shell.currentWidget.sessionContext "
                                   "&& window.jupyterapp.shell.currentWidget.sessionContext.session "
                                   "&& window.jupyterapp.shell.currentWidget.sessionContext.session.kernel",
                                   timeout=120_000)
            page.evaluate("() => { const s = window.jupyterapp.shell; if (!s.leftCollapsed) s.collapseLeft(); }")
            page.evaluate("() => window.jupyterapp.commands.execute('notebook:run-all-cells')")
            page.wait_for_selector(".phaselab-explorer .pl-count[data-orbits='3']", timeout=240_000)
            # the three seeds of the demo have arrived; let the companion trace land too
            page.wait_for_timeout(1500)
            page.locator(".phaselab-explorer").first.scroll_into_view_if_needed()
            page.locator(".phaselab-explorer").first.screenshot(path=str(ARTIFACTS / "explorer-start.png"))
            orbits0, points0 = _count(page)
            assert orbits0 == 3 and points0 > 0

            x, y, w, h = _main_canvas_box(page)
            # the plot frame sits inside the canvas (axes at left and bottom); aim a little off
            # centre of the frame, inside the allowed region of the demo's shell
            cx, cy = x + 48 + 0.55 * (w - 58), y + 10 + 0.42 * (h - 50)
            page.evaluate("""() => {
                window.__pl = {down: null, seen: null, sent: null, got: null};
                const send = WebSocket.prototype.send;
                WebSocket.prototype.send = function (data) {
                    if (window.__pl.down !== null && window.__pl.sent === null) window.__pl.sent = performance.now();
                    return send.call(this, data);
                };
                document.addEventListener('pointerdown', () => { window.__pl.down = performance.now();
                                                                 window.__pl.down_wall = Date.now(); }, true);
                const target = document.querySelector('.phaselab-explorer .pl-count').parentElement;
                new MutationObserver(() => {
                    const el = document.querySelector('.phaselab-explorer .pl-count');
                    if (el && el.getAttribute('data-orbits') === '4' && window.__pl.seen === null)
                        window.__pl.seen = performance.now();
                }).observe(target, {subtree: true, childList: true, attributes: true});
            }""")
            page.mouse.click(cx, cy)
            page.wait_for_function("() => window.__pl.seen !== null", timeout=30_000)
            latency = page.evaluate("() => window.__pl.seen - window.__pl.down")
            sent = page.evaluate("() => window.__pl.sent - window.__pl.down")
            orbits1, points1 = _count(page)
            assert orbits1 == 4, page.locator(".phaselab-explorer .pl-status").inner_text()
            assert points1 > points0
            (ARTIFACTS / "click-latency.txt").write_text(
                f"click-to-points latency in the browser: {latency:.0f} ms "
                f"({points1 - points0} new points); first websocket message {sent:.0f} ms after pointerdown\n")
            print(f"click-to-points latency in the browser: {latency:.0f} ms")
            page.wait_for_timeout(1200)
            page.locator(".phaselab-explorer").first.screenshot(path=str(ARTIFACTS / "explorer-after-click.png"))

            # the kernel agrees: run the reporting cell (the last one) again
            page.evaluate("""() => { const nb = window.jupyterapp.shell.currentWidget.content;
                                    nb.activeCellIndex = nb.widgets.length - 1; }""")
            page.evaluate("() => window.jupyterapp.commands.execute('notebook:run-cell')")
            page.wait_for_function("() => [...document.querySelectorAll('.jp-OutputArea-output')]"
                                   ".some(e => e.innerText.includes('KERNEL_ORBITS=4'))", timeout=60_000)
            text = page.evaluate("() => [...document.querySelectorAll('.jp-OutputArea-output')]"
                                 ".map(e => e.innerText).join('\\n')")
            kernel_points = int(re.search(r"KERNEL_POINTS=(\d+)", text).group(1))
            timing = re.search(r"KERNEL_TIMING=(.*)", text).group(1)
            down_wall = page.evaluate("() => window.__pl.down_wall")
            with open(ARTIFACTS / "click-latency.txt", "a") as fh:
                fh.write(f"kernel timings: {timing}; pointerdown at {down_wall / 1000:.3f} (wall clock)\n")
            assert kernel_points == points1

            # move the energy slider with the keyboard: every orbit is recomputed
            handle = page.locator(".phaselab-explorer .widget-slider .noUi-handle").first
            handle.scroll_into_view_if_needed()
            handle.focus()
            for _ in range(12):
                page.keyboard.press("ArrowLeft")
            page.wait_for_function(
                "() => /Recomputed|outside the allowed|no energetically/.test("
                "document.querySelector('.phaselab-explorer .pl-status').innerText)", timeout=60_000)
            page.wait_for_timeout(1500)
            status = page.locator(".phaselab-explorer .pl-status").inner_text()
            assert "E = " in status
            page.locator(".phaselab-explorer").first.screenshot(path=str(ARTIFACTS / "explorer-after-slider.png"))
            page.screenshot(path=str(ARTIFACTS / "lab-page.png"), full_page=True)
        finally:
            (ARTIFACTS / "browser-console.txt").write_text("\n".join(console))
            ctx.close()
