"""Getting the explorer onto the page, every time a view of it is made.

Three things go wrong with a plain ``jupyter_bokeh.BokehModel`` and are handled here:

* BokehJS must be on the page before a bokeh view is created, in every browser tab.
  :func:`load_bokehjs` puts the core library (inline, no network) into the output of the
  first explorer displayed for each page (:mod:`phaselab.widgets.bokehjs`), so a second
  tab running the notebook, or a reloaded saved notebook, has it too, and a notebook with
  several explorers holds it once.
* A view is built from the model's ``render_bundle``, which jupyter_bokeh fills once, when
  the model is made; later changes travel as patches to views that exist. A view made
  later (the first display after seeds were added, another tab, a reload) would show the
  first state. :class:`LiveBokehModel` serialises the document afresh whenever a view may
  be made from it: when it is displayed and whenever the page asks for its state.
* A notebook saved and opened without a kernel has no widget to draw.
  :class:`StaticPicture` keeps a PNG of the last state in an ordinary output next to the
  widget; the explorer's own style sheet hides it while the live explorer is on the page.

The kernel replaces the picture's output through its display id, and JupyterLab routes such
an update only to outputs of executions the same page started: after a reload (the kernel
still running) the output on the page is the saved copy, which no update would reach. The
JupyterLab plugin installed with phaselab (``phaselab-notebook``, in
``widgets/labextension``; JupyterLab loads it from ``share/jupyter/labextensions``) replaces,
on every such update, each output of the notebook marked with the picture's id
(:data:`PICTURE_MARK` in the output's metadata). When a page rebuilds its view of an
explorer, the explorer sends its picture again, so a save straight after a reload keeps the
last state. A page without the plugin (JupyterLab run from another environment than the
kernel's) says so in the explorer's status line (``messages.PAGE_REBUILT``).
"""

from __future__ import annotations

import base64
import contextlib
import html
import json

from jupyter_bokeh import BokehModel


def load_bokehjs(force=False):
    """Display the core BokehJS library inline (no network, no banner) unless this page's
    notebook holds it already; ``force`` displays it anyway."""
    from phaselab.widgets import bokehjs

    return bokehjs.load(force=force)


class LiveBokehModel(BokehModel):
    """A BokehModel whose ``render_bundle`` is brought up to date before a view is made.

    ``changes`` counts document changes; the bundle is serialised again only when some
    happened since it was last serialised. With :meth:`number_patches`, every patch sent
    carries the next ``revision`` (see :mod:`phaselab.widgets.page_sync`): a page finds
    out itself whether its view missed any.
    """

    def __init__(self, model, **kwargs):
        self.changes = 0
        self._bundled = 0
        self.revision = 0
        self._revision_source = None
        self.page_builds = 0     # full states asked for after the first: pages (re)built a view
        self._opened = False
        super().__init__(model, **kwargs)
        self._opened = True
        self._document.on_change(self._count_change)

    def _count_change(self, event):
        if getattr(event, "setter", None) is self:
            return  # came from the page: the views there have it already
        self.changes += 1

    @property
    def stale(self) -> bool:
        return self._bundled != self.changes

    def refresh(self, send=True):
        """Serialise the document into ``render_bundle`` if it changed; ``send`` pushes it to
        the page (views there rebuild from it)."""
        if not self.stale:
            return False
        bundle = self._model_to_traits(self._model)
        self._bundled = self.changes
        if send:
            self.render_bundle = bundle
        else:
            self._trait_values["render_bundle"] = bundle  # sent with the state being asked for
        return True

    # ------------------------------------------------------------------ one patch per batch
    def _document_patched(self, event):
        if getattr(event, "setter", None) is self:
            return  # came from the page
        batch = self.__dict__.get("_batch")
        if batch is not None:
            batch.append(event)
        elif self._revision_source is None:
            super()._document_patched(event)
        else:
            with self.batch():  # a change made outside a batch: a patch of its own, numbered
                self._batch.append(event)

    def number_patches(self, source):
        """Number every patch from now on: the next integer is streamed into ``source``
        (a ColumnDataSource with column ``r``, rollover 2) as the patch's last change."""
        self._revision_source = source
        self.revision = int(source.data["r"][-1])

    def _next_revision(self):
        self.revision += 1
        self._revision_source.stream(dict(r=[self.revision]), rollover=2)

    def answer_page(self, data: dict):
        """Answer what a page wrote into its ``ready`` source (:mod:`phaselab.widgets.page_sync`):
        a view that missed patches gets the whole document again; a view built at an earlier
        revision than the kernel's gets one more number, by which it finds out."""
        if (data.get("missed") or [0])[-1]:
            self.refresh(send=True)
        elif self._revision_source is not None and (data.get("revision") or [self.revision])[-1] < self.revision:
            with self.batch():
                self._next_revision()

    @contextlib.contextmanager
    def batch(self):
        """Send the document changes made inside as one patch: the page applies them at once
        and draws once, instead of drawing after each (one message per change is
        jupyter_bokeh's own way)."""
        if self.__dict__.get("_batch") is not None:
            yield  # inside an outer batch: it sends everything
            return
        self._batch = []
        try:
            yield
        finally:
            if self._batch and self._revision_source is not None and not self._numbered(self._batch[-1]):
                self._next_revision()  # joins the batch: the page reads it after the rest
            events, self._batch = self._batch, None
            if events:
                self._send_patch(events)

    def _numbered(self, event) -> bool:
        """Whether ``event`` is the streaming of a patch number."""
        return getattr(event, "model", None) is self._revision_source

    def _send_patch(self, events):
        """One PATCH-DOC message for ``events``, in the framing jupyter_bokeh's page side reads
        (header, metadata, content). Arrays travel inside the content (base64) rather than as
        buffers of their own: a click's patch is three comm messages, not three plus two per
        array column (27 for a new orbit), each of which crossed the server and the page's
        message queue on its own."""
        from bokeh.core.serialization import Serializer
        from bokeh.protocol.messages.patch_doc import patch_doc

        doc = self._document
        serializer = Serializer(references=doc.models.synced_references, deferred=False)
        content = dict(events=serializer.encode(events))
        doc.models.flush_synced(lambda model: not serializer.has_ref(model))
        msg = patch_doc(patch_doc.create_header(), {}, content)
        self.send({"msg": "patch", "payload": msg.header_json})
        self.send({"msg": "patch", "payload": msg.metadata_json})
        self.send({"msg": "patch", "payload": msg.content_json})

    def get_state(self, key=None, drop_defaults=False):
        # a full state is asked for when a page (re)builds its widgets: give the current plot
        if key is None:
            self.refresh(send=False)
            if self._opened:
                self.page_builds += 1
        return super().get_state(key=key, drop_defaults=drop_defaults)


_HIDE_RULE = ".jp-OutputArea-child:has(.{cls}) {{ display: none; }}"

#: The key of the picture output's metadata read by the JupyterLab plugin: ``{"phaselab":
#: {"picture": id}}`` (``widgets/labextension/static/remoteEntry.js``).
PICTURE_MARK = "phaselab"


class StaticPicture:
    """A PNG of the explorer's last state, in an output of its own, shown only when the
    live explorer is not on the page (a saved notebook opened without a kernel)."""

    def __init__(self, uid: str):
        self.cls = f"pl-still-{uid}"
        self.handle = None
        self.png = b""
        self.state: dict = {}

    @property
    def hide_rule(self) -> str:
        return _HIDE_RULE.format(cls=self.cls)

    def _html(self, caption, state=None):
        data = html.escape(json.dumps(state or {}), quote=True)
        words = f"<div style='font-size:11px;color:#7b7f86'>{html.escape(caption)}</div>" if caption else ""
        if not self.png:   # nothing drawn (yet): the caption alone, if any
            return f"<div class='{self.cls}' data-state='{data}'>{words}</div>"
        png = base64.b64encode(self.png).decode("ascii")
        return (f"<div class='{self.cls}' data-state='{data}'><img alt='explorer picture' "
                f"src='data:image/png;base64,{png}'/>{words}</div>")

    @property
    def metadata(self) -> dict:
        """The output's metadata: the mark by which the page's plugin finds every copy of it."""
        return {PICTURE_MARK: {"picture": self.cls}}

    def show(self, caption=""):
        from IPython.display import HTML, display

        self.handle = display(HTML(self._html(caption)), display_id=True, metadata=self.metadata)

    def update(self, png: bytes, caption="", state=None):
        """Replace the picture; ``state`` (a dict of numbers and words) is written beside it as
        ``data-state`` so what it shows can be compared with the live page."""
        self.png = png
        self.state = dict(state or {})
        if self.handle is not None:
            from IPython.display import HTML

            self.handle.update(HTML(self._html(caption, state)), metadata=self.metadata)
