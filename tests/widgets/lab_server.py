"""A private JupyterLab for the browser tests: 127.0.0.1, a free port, a random token, its own
settings, runtime and workspace folders inside the test's folder, no news pop-up."""

from __future__ import annotations

import contextlib
import json
import os
import secrets
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

import pytest

CHROMIUM = "/usr/bin/chromium"


def skip_without_browser() -> None:
    """Skip unless Debian's chromium, playwright and JupyterLab are installed."""
    if not os.path.exists(CHROMIUM):
        pytest.skip(f"{CHROMIUM} is absent (install Debian's chromium: apt-get install -y chromium)")
    pytest.importorskip("playwright.sync_api", reason="the playwright package is not installed")
    pytest.importorskip("jupyterlab", reason="jupyterlab is not installed")


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _wait_http(url: str, seconds: float, proc, log_path: Path) -> None:
    end = time.monotonic() + seconds
    while time.monotonic() < end:
        if proc.poll() is not None:
            raise RuntimeError(f"JupyterLab exited with code {proc.returncode}; log: "
                               + log_path.read_text()[-2000:])
        try:
            with urllib.request.urlopen(url, timeout=2) as r:
                if r.status == 200:
                    return
        except OSError:
            time.sleep(0.25)
    raise RuntimeError(f"JupyterLab did not answer at {url} within {seconds} s")


@contextlib.contextmanager
def running_lab(work: Path, seconds: float = 90, env_overrides: dict | None = None):
    """Run JupyterLab with ``work`` as its root (its kernels get ``env_overrides`` on top of
    this process's environment); yields ``{"url", "token", "dir"}``."""
    port, token = _free_port(), secrets.token_hex(16)
    env = {**os.environ, **(env_overrides or {})}
    for key, sub in (("JUPYTER_RUNTIME_DIR", "runtime"), ("JUPYTERLAB_SETTINGS_DIR", "settings"),
                     ("JUPYTERLAB_WORKSPACES_DIR", "workspaces"), ("JUPYTER_CONFIG_DIR", "config")):
        (work / sub).mkdir()
        env[key] = str(work / sub)
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
        _wait_http(f"http://127.0.0.1:{port}/api/status?token={token}", seconds, proc, work / "lab.log")
        yield {"url": f"http://127.0.0.1:{port}", "token": token, "dir": work}
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=20)
        except subprocess.TimeoutExpired:
            proc.kill()
        log.close()


def open_notebook(page, lab: dict, name: str, seconds: float = 120) -> None:
    """Open notebook ``name`` of the running lab in the Playwright ``page``, wait until its
    kernel is there, and fold the left side bar away (so the plots get the page's width)."""
    page.goto(f"{lab['url']}/lab/tree/{name}?token={lab['token']}")
    page.wait_for_function("() => window.jupyterapp && window.jupyterapp.shell.currentWidget "
                           "&& window.jupyterapp.shell.currentWidget.sessionContext "
                           "&& window.jupyterapp.shell.currentWidget.sessionContext.session "
                           "&& window.jupyterapp.shell.currentWidget.sessionContext.session.kernel",
                           timeout=seconds * 1000)
    page.evaluate("() => { const s = window.jupyterapp.shell; if (!s.leftCollapsed) s.collapseLeft(); }")
