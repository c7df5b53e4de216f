"""The linked explorer's bokeh widget: a selection made in the page reaches Python quickly.

A box or lasso in one projection selects rows of the shared source in the page, and the
page sends the selected row numbers to the kernel. jupyter_bokeh checks such a list number
by number against the property's type and walks it for models: half a second for 50,000
rows. The row numbers of the points source's selection are taken here as one integer array
instead (the same value, set by the same descriptor, observers called as usual). The page
also sends back the rows the kernel streamed to it: they are dropped (the page edits no data
of the explorer; applied, they doubled the streamed rows on the kernel's side). Every other
message goes the ordinary way.
"""

from __future__ import annotations

import numpy as np

from phaselab.widgets.page import LiveBokehModel


class LinkedBokehModel(LiveBokehModel):
    """A :class:`~phaselab.widgets.page.LiveBokehModel` with a quick path for the selection
    of one data source.

    Parameters
    ----------
    model : bokeh layout
    selection : bokeh.models.Selection
        The selection whose ``indices`` take the quick path.
    """

    def __init__(self, model, selection, **kwargs):
        self._selection = selection
        super().__init__(model, **kwargs)

    def _sync_model(self, _model, content, _buffers):
        if isinstance(content, dict) and content.get("event") == "jsevent" and \
                content.get("kind") in ("ColumnsStreamed", "ColumnsPatched"):
            # the page sends the kernel's own streams back (it edits no data itself):
            # applied again they would double the streamed rows in Python
            return
        rows = self._selected_rows(content)
        if rows is None:
            super()._sync_model(_model, content, _buffers)
            return
        from bokeh.core.property.validation import without_property_validation

        sel = self._selection
        descriptor = sel.lookup("indices")

        @without_property_validation
        def assign():
            # setter=self: the page has the selection already, nothing is sent back
            descriptor._set(sel, descriptor._get(sel), rows, setter=self)

        assign()

    def _selected_rows(self, content):
        """The selected rows as int64 (n,) if ``content`` is the page's change of the
        selection's ``indices`` given as a plain list of whole numbers, else None."""
        if not isinstance(content, dict) or content.get("event") != "jsevent":
            return None
        if content.get("kind") != "ModelChanged" or content.get("attr") != "indices":
            return None
        ref, new = content.get("model"), content.get("new")
        if not isinstance(ref, dict) or ref.get("id") != self._selection.id or not isinstance(new, list):
            return None
        try:
            rows = np.asarray(new, dtype=np.float64)
        except (TypeError, ValueError):
            return None
        if rows.ndim != 1 or not np.all(np.isfinite(rows)) or np.any(rows != np.round(rows)) or np.any(rows < 0):
            return None
        return rows.astype(np.int64)
