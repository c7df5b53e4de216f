"""BokehJS on the page once per notebook view, not once per explorer.

The library (about 1.3 MB inline, no network) must be on a page before a bokeh view is made,
and a notebook keeps every output it was sent: an explorer that sent it with each display
(and in two forms, plain JavaScript and bokeh's own load type) made a notebook with three
explorers weigh over 8 MB. Here it is sent once, packed (deflated, about 0.47 MB, see
:mod:`phaselab.widgets.packed_script`), in bokeh's load type only (run by the jupyter_bokeh
extension that draws the explorer), by the first explorer displayed for each page connected
to the kernel:

* A page is told apart by the client session of the request being executed (a second tab,
  or a page reloaded and run again, has its own: its first explorer sends the library again).
* The output holding it belongs to one cell; when that cell runs again (its old outputs are
  cleared) the library is sent again with it, so a saved notebook keeps one copy.
* Outside a kernel request (a script, a callback) it is always sent.

Limit: a notebook whose holding cell's outputs were cleared by hand, or deleted, keeps no
copy; reopened with a kernel, its explorers are drawn once a cell with an explorer runs again
(or after ``phaselab.widgets.explorer.load_bokehjs(force=True)``).
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

#: The mime type jupyter_bokeh's page side runs as a script (bokeh.io.notebook.LOAD_MIME_TYPE).
LOAD_MIME = "application/vnd.bokehjs_load.v0+json"


@dataclass
class Request:
    """Where a display happens: the page's client session, the cell and the message id."""

    session: str | None
    cell: str | None
    message: str | None


#: The request whose output holds the library (None: not sent yet in this kernel).
_held: dict = {"request": None}


def current_request() -> Request | None:
    """The kernel request being executed now, or None outside a kernel's request."""
    from IPython import get_ipython

    shell = get_ipython()
    kernel = getattr(shell, "kernel", None)
    get_parent = getattr(kernel, "get_parent", None)
    if get_parent is None:
        return None
    parent = get_parent() or {}
    header = parent.get("header") or {}
    session = header.get("session") or None
    if session is None:
        return None
    cell = (parent.get("metadata") or {}).get("cellId") or None
    return Request(session, cell, header.get("msg_id"))


def needed(request: Request | None, held: Request | None) -> bool:
    """Whether a display made for ``request`` must carry the library, given the request
    ``held`` whose output holds it (see the module's rules)."""
    if request is None or held is None:
        return True
    if request.session != held.session:
        return True  # another page, or this one reloaded
    # the holding cell runs again: its old output (and the library in it) is being replaced
    return request.cell is not None and request.cell == held.cell and request.message != held.message


@functools.lru_cache(maxsize=1)
def packed_library() -> str:
    """:func:`library_js` packed (:mod:`phaselab.widgets.packed_script`): about 0.47 MB."""
    from phaselab.widgets.packed_script import packed

    return packed(library_js())


def library_js() -> str:
    """The core BokehJS library inline (no network), wrapped in bokeh's own loader."""
    from bokeh.core.templates import AUTOLOAD_NB_JS
    from bokeh.embed.bundle import bundle_for_objs_and_resources
    from bokeh.resources import Resources

    bundle = bundle_for_objs_and_resources(None, Resources(mode="inline", components=["bokeh"]))
    return AUTOLOAD_NB_JS.render(bundle=bundle, elementid=None, force=True, timeout=5000,
                                 register_mime=False)


def load(force: bool = False) -> bool:
    """Send the library to the page unless this page's notebook already holds it; returns
    whether it was sent. ``force`` sends it anyway."""
    from IPython.display import publish_display_data

    request = current_request()
    if not force and not needed(request, _held["request"]):
        return False
    publish_display_data({LOAD_MIME: packed_library()})
    _held["request"] = request
    return True
