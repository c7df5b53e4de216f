"""The page's report of its views (phaselab/widgets/page_sync.py): patches numbered by the
kernel, gaps found by the page, the document sent again only to a view that missed some.

The page code is run in Node.js with stand-ins for the two sources (skipped without node).
"""

from __future__ import annotations

import json
import shutil
import subprocess

import pytest
from bokeh.models import ColumnDataSource, Range1d
from bokeh.plotting import figure

from phaselab.widgets.page import LiveBokehModel
from phaselab.widgets.page_sync import connect, page_sync


def _explorer_like():
    fig = figure(width=200, height=200, x_range=Range1d(0, 1), y_range=Range1d(0, 1))
    points = ColumnDataSource(dict(x=[0.1], y=[0.2]))
    fig.scatter("x", "y", source=points)
    sync = page_sync()
    fig.tags = sync.models
    bokeh = LiveBokehModel(fig, combine_events=False)
    answers = []
    connect(sync, fig, bokeh, answers.append)
    sent = []
    bokeh.send = lambda content, buffers=None: sent.append(content)
    return fig, points, sync, bokeh, sent, answers


def _patches(sent):
    """The events of each patch sent (every third message is a patch's content)."""
    contents = [json.loads(m["payload"]) for m in sent if m.get("msg") == "patch"][2::3]
    return [c["events"] for c in contents]


def _revisions(events, sync):
    return [e["data"]["entries"][0][1] for e in events
            if e["kind"] == "ColumnsStreamed" and e["model"]["id"] == sync.revision.id]


def test_every_patch_ends_with_the_next_number():
    fig, points, sync, bokeh, sent, _ = _explorer_like()
    with bokeh.batch():
        points.stream(dict(x=[0.3], y=[0.4]))
        fig.x_range.start = -1.0
    fig.x_range.end = 2.0  # a change outside a batch: a numbered patch of its own
    patches = _patches(sent)
    assert len(patches) == 2 and len(patches[0]) == 3 and len(patches[1]) == 2
    numbers = [_revisions(p, sync) for p in patches]
    assert numbers == [[[1]], [[2]]]
    # the number is each patch's last change: the page reads it after the rest
    assert all(p[-1]["model"]["id"] == sync.revision.id for p in patches)
    assert bokeh.revision == 2 and list(sync.revision.data["r"]) == [1, 2]


def test_the_page_is_answered_by_what_it_holds():
    fig, points, sync, bokeh, sent, answers = _explorer_like()
    with bokeh.batch():
        points.stream(dict(x=[0.3], y=[0.4]))
    sent.clear()
    bundles = []
    bokeh.observe(lambda change: bundles.append(change), names="render_bundle")
    # what the page writes into ready reaches the explorer's handler
    sync.ready.data = dict(n=[1.0], keeper=[1], revision=[1], missed=[0])
    assert answers[-1]["revision"] == [1]
    sent.clear()
    # a view at the kernel's revision: nothing to send
    bokeh.answer_page(dict(n=[1.0], keeper=[1], revision=[2], missed=[0]))
    assert not sent and not bundles
    # a view built at an earlier revision while patches were on their way (or lost): one
    # more number, alone in its patch
    bokeh.answer_page(dict(n=[2.0], keeper=[1], revision=[0], missed=[0]))
    assert [_revisions(p, sync) for p in _patches(sent)] == [[[3]]] and not bundles
    # a view that found a gap: the whole document again
    bokeh.answer_page(dict(n=[3.0], keeper=[1], revision=[2], missed=[1]))
    assert len(bundles) == 1


NODE = shutil.which("node")


def _run_page_code(code, r):
    """Run a callback's page code in Node.js with ``revision.data.r = r``; the ``ready`` data
    it writes (or null)."""
    script = ("const ready = {data: null}; const revision = {data: {r: %s}}; const window = {};"
              "const cb_obj = {document: {}};"
              "(function () { %s })(); console.log(JSON.stringify(ready.data));") % (json.dumps(r), code)
    out = subprocess.run([NODE, "-e", script], capture_output=True, text=True, timeout=30)
    assert out.returncode == 0, out.stderr
    return json.loads(out.stdout)


@pytest.mark.skipif(NODE is None, reason="node is not installed")
def test_the_page_code_reports_a_gap_and_a_new_view():
    sync = page_sync()
    # consecutive numbers: nothing to say; a jump: the view missed patches
    assert _run_page_code(sync.on_revision.code, [4, 5]) is None
    gap = _run_page_code(sync.on_revision.code, [3, 7])
    assert gap["missed"] == [1] and gap["revision"] == [7] and gap["keeper"] == [0]
    # a new view reports once, with the revision it holds
    built = _run_page_code(sync.on_build.code, [6, 7])
    assert built["missed"] == [0] and built["revision"] == [7]
