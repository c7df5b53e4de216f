"""How a page tells the kernel that it has built a view of an explorer, and whether the view
missed any of the kernel's changes.

jupyter_bokeh builds a view from the widget's ``render_bundle`` (the document as serialised
at some moment) and applies the patches the kernel sends afterwards. Patches that reach a
page before its view exists are lost to that view (a view made while the first orbits were
being sent, a reload, another tab). Resending the whole document whenever a view is built
costs a full redraw, seconds with a hundred thousand points, and is rarely needed; here the
view finds out itself:

* The kernel numbers its patches: each carries the next integer streamed into the
  ``revision`` source (rollover 2, so the page holds the last two numbers it received;
  :meth:`phaselab.widgets.page.LiveBokehModel.batch`).
* When the page applies a patch whose number does not follow the one before, it missed
  patches: it says so through the ``ready`` source (``missed = 1``), and the kernel sends
  the whole document again.
* When a page lays out a new view, it writes ``ready`` once for that document: the time, the
  last revision it holds, and whether phaselab's JupyterLab plugin runs in the page
  (``keeper``). If the kernel is further on, it sends one more number: a view that missed
  the patches in between finds the gap in the next step above.

The explorers listen to ``ready`` (``PictureKeeping._page_ready``).
"""

from __future__ import annotations

from dataclasses import dataclass

from bokeh.models import ColumnDataSource, CustomJS

#: Page code shared by both callbacks: ``report(missed)`` writes the ``ready`` source.
_REPORT = """
const plugin = window._JUPYTERLAB && window._JUPYTERLAB['phaselab-notebook'];
const r = revision.data.r;
const report = (missed) => {
    ready.data = {n: [Date.now()], keeper: [plugin && plugin.active ? 1 : 0],
                  revision: [r[r.length - 1]], missed: [missed]};
};
"""


@dataclass(frozen=True)
class PageSync:
    """The two sources and the page code of one explorer's document.

    Attributes
    ----------
    ready : ColumnDataSource
        Written by the page: ``n`` (page time, ms), ``keeper`` (1 if phaselab's JupyterLab
        plugin runs in the page), ``revision`` (the last patch number the view holds),
        ``missed`` (1 if the view missed patches).
    revision : ColumnDataSource
        Column ``r``: the kernel's last two patch numbers.
    on_build : CustomJS
        Run on a change of the main figure's ``inner_width`` (made when a page lays out a
        view); reports once per page document.
    on_revision : CustomJS
        Run when a patch number arrives; reports a gap.
    """

    ready: ColumnDataSource
    revision: ColumnDataSource
    on_build: CustomJS
    on_revision: CustomJS

    @property
    def models(self) -> list:
        """The models to keep in the document (as tags of a figure: they have no view)."""
        return [self.ready, self.revision]


def page_sync() -> PageSync:
    """A new :class:`PageSync` (revision 0)."""
    ready = ColumnDataSource(dict(n=[], keeper=[], revision=[], missed=[]), name="phaselab-ready")
    revision = ColumnDataSource(dict(r=[-1, 0]), name="phaselab-revision")
    args = dict(ready=ready, revision=revision)
    on_build = CustomJS(args=args, code=_REPORT + """
const doc = cb_obj.document;
if (doc == null || doc.__phaselab_ready) return;
doc.__phaselab_ready = true;
report(0);""")
    on_revision = CustomJS(args=args, code=_REPORT + """
if (r.length >= 2 && r[r.length - 1] !== r[r.length - 2] + 1) report(1);""")
    return PageSync(ready, revision, on_build, on_revision)


def connect(sync: PageSync, figure, bokeh, on_ready) -> None:
    """Wire ``sync`` into an explorer: the page code on ``figure`` (the main figure) and on
    the revision source, the numbering of patches in ``bokeh`` (a LiveBokehModel), and
    ``on_ready(data)`` called with what the page writes into ``ready``."""
    figure.js_on_change("inner_width", sync.on_build)
    sync.revision.js_on_change("streaming", sync.on_revision)
    bokeh.number_patches(sync.revision)
    sync.ready.on_change("data", lambda attr, old, new: on_ready(new))
