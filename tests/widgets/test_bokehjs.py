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
    assert sent[0][bokehjs.LOAD_MIME] == bokehjs.packed_library()


NOTEBOOK_SETUP = """import asyncio, phaselab
toy = phaselab.Hamiltonian("(p_s**2 + p_b**2)/2 + s**2/2 + 1.69*b**2/2 + 0.6*s*b**2 - 0.25*s**3/3",
                           ["s", "b"], ["p_s", "p_b"], name="toy molecule")"""
EXPLORER_CELL = """e{k} = phaselab.explore(toy, energy=0.9, plane={{"s": 0.0}}, solve_for="p_s", crossings=120)
e{k}.add_seeds([(0.3, 0.0), (0.{k}5, 0.2)])
e{k}"""
# the pictures are drawn after a quiet spell, delivered by the kernel's event loop: the last
# cell awaits (blocking calls such as Explorer.wait would hold that loop) until each
# explorer's picture shows its two orbits
SETTLE_CELL = """explorers = (e0, e1, e2)
for _ in range(1200):
    await asyncio.sleep(0.25)
    if all(e.picture.state.get("orbits") == 2 and not (e.jobs.busy or e.idle_jobs.busy or e.picture_jobs.busy) for e in explorers):
        break
await asyncio.sleep(0.5)"""


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


def test_packed_library_unpacks_to_the_library():
    import zlib

    js = bokehjs.library_js()
    text = re.search(r'const text = "([A-Za-z0-9+/=]+)", size = (\d+);', bokehjs.packed_library())
    # zlib's raw inflate (RFC 1951) as the outside reference for what the page unpacks
    assert zlib.decompress(base64.b64decode(text.group(1)), -15).decode("utf-8") == js
    assert int(text.group(2)) == len(js.encode("utf-8"))
    assert len(bokehjs.packed_library()) < 0.45 * len(js)


def test_page_inflater_agrees_with_zlib(tmp_path):
    """The page's inflater run by node on zlib's raw deflate output at levels 0, 1 and 9
    (stored, fixed and dynamic blocks), compared by SHA-256 with the input."""
    import hashlib
    import random
    import shutil
    import subprocess
    import zlib

    from phaselab.widgets.packed_script import INFLATE_JS

    node = shutil.which("node")
    if node is None:
        pytest.skip("node is not installed")
    rng = random.Random(5)
    cases = [b"", b"a", b"ab" * 40_000, bytes(rng.getrandbits(8) for _ in range(70_000)),
             b"x" * 70_000 + bytes(range(256)) * 300 + bokehjs.library_js()[:200_000].encode()]
    lines = [INFLATE_JS, "const crypto = require('crypto');"]
    for raw in cases:
        for level in (0, 1, 9):
            c = zlib.compressobj(level, zlib.DEFLATED, -15, 9)
            data = base64.b64encode(c.compress(raw) + c.flush()).decode()
            lines.append(f"{{ const o = __plInflate(new Uint8Array(Buffer.from('{data}', 'base64')), {len(raw)});"
                         f" console.log(crypto.createHash('sha256').update(o).digest('hex')); }}")
    script = tmp_path / "inflate.js"
    script.write_text("\n".join(lines))
    out = subprocess.run([node, str(script)], capture_output=True, text=True, timeout=60, check=True)
    expected = [hashlib.sha256(raw).hexdigest() for raw in cases for _ in range(3)]
    assert out.stdout.split() == expected
