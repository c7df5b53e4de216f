"""BokehJS once per page: the rules of phaselab.widgets.bokehjs, and a notebook with three
explorers executed by nbclient and saved (size, one copy of the library, each picture kept)."""

from __future__ import annotations

import base64
import html
import json
import re

import pytest

pytest.importorskip("jupyter_bokeh")

from phaselab.widgets import bokehjs  # noqa: E402
from phaselab.widgets.bokehjs import Request  # noqa: E402


def test_library_sent_once_per_page_and_again_with_its_cell():
    held = Request("page-1", "cell-a", "m1")
    assert bokehjs.needed(None, held)                                   # outside a kernel request
    assert bokehjs.needed(Request("page-1", "cell-b", "m2"), None)      # nothing sent yet
    assert not bokehjs.needed(Request("page-1", "cell-b", "m2"), held)  # a later explorer, same page
    assert not bokehjs.needed(Request("page-1", "cell-a", "m1"), held)  # two explorers in one cell
    assert bokehjs.needed(Request("page-1", "cell-a", "m3"), held)      # its cell runs again
    assert bokehjs.needed(Request("page-2", "cell-b", "m4"), held)      # another tab, or a reload
    assert not bokehjs.needed(Request("page-1", None, "m5"), Request("page-1", None, "m1"))  # no cell ids


def test_load_publishes_only_bokehs_load_type(monkeypatch):
    sent = []
    monkeypatch.setattr("IPython.display.publish_display_data", lambda data, *a, **k: sent.append(data))
    monkeypatch.setattr(bokehjs, "current_request", lambda: Request("page-9", "cell-z", "m1"))
    monkeypatch.setitem(bokehjs._held, "request", None)
    assert bokehjs.load() is True and bokehjs.load() is False
    assert bokehjs.load(force=True) is True
    assert len(sent) == 2 and all(list(d) == [bokehjs.LOAD_MIME] for d in sent)
    assert "Bokeh" in sent[0][bokehjs.LOAD_MIME] and len(sent[0][bokehjs.LOAD_MIME]) > 500_000


NOTEBOOK_SETUP = """import asyncio, phaselab
toy = phaselab.Hamiltonian("(p_s**2 + p_b**2)/2 + s**2/2 + 1.69*b**2/2 + 0.6*s*b**2 - 0.25*s**3/3",
                           ["s", "b"], ["p_s", "p_b"], name="toy molecule")"""
EXPLORER_CELL = """e{k} = phaselab.explore(toy, energy=0.9, plane={{"s": 0.0}}, solve_for="p_s", crossings=120)
e{k}.add_seeds([(0.3, 0.0), (0.{k}5, 0.2)])
e{k}"""
# the pictures are drawn after a quiet spell: the last cell lets the kernel's loop deliver them
SETTLE_CELL = """for e in (e0, e1, e2):
    e.wait(180)
await asyncio.sleep(3 * 2.5 + 3)
for e in (e0, e1, e2):
    e.wait(60)
await asyncio.sleep(1)"""


@pytest.mark.slow
def test_three_explorers_saved_notebook_is_small_and_keeps_the_pictures(tmp_path):
    nbformat = pytest.importorskip("nbformat")
    nbclient = pytest.importorskip("nbclient")
    cells = [nbformat.v4.new_code_cell(NOTEBOOK_SETUP)]
    cells += [nbformat.v4.new_code_cell(EXPLORER_CELL.format(k=k)) for k in range(3)]
    cells.append(nbformat.v4.new_code_cell(SETTLE_CELL))
    nb = nbformat.v4.new_notebook(cells=cells)
    nbclient.NotebookClient(nb, timeout=600, kernel_name="python3").execute()
    path = tmp_path / "three.ipynb"
    nbformat.write(nb, path)
    size = path.stat().st_size
    assert size < 1_500_000, f"{size} bytes"  # the target
    outputs = [(i, o) for i, c in enumerate(nb.cells) for o in c.get("outputs", [])]
    assert not [o for _, o in outputs if "application/javascript" in o.get("data", {})]
    assert [i for i, o in outputs if bokehjs.LOAD_MIME in o.get("data", {})] == [1]
    for k in range(3):
        pages = [o["data"]["text/html"] for i, o in outputs if i == k + 1 and "text/html" in o.get("data", {})]
        found = [re.search(r"data-state='([^']*)'><img alt='explorer picture' src='data:image/png;base64,([^']+)'", p)
                 for p in pages]
        found = [m for m in found if m]
        assert len(found) == 1, f"explorer {k}: {pages}"
        png = base64.b64decode(found[0].group(2))
        assert png[:8] == b"\x89PNG\r\n\x1a\n"  # the PNG signature (PNG specification, RFC 2083)
        state = json.loads(html.unescape(found[0].group(1)))
        assert state["orbits"] == 2 and state["colour"] == "own", state
