"""The picture both explorers keep for a notebook opened without a kernel (mixed into
:class:`~phaselab.widgets.explorer.Explorer` and
:class:`~phaselab.widgets.explorer.linked.LinkedExplorer`).

The picture is a :class:`~phaselab.widgets.page.StaticPicture`: an ordinary output next to
the widget, hidden by the explorer's style sheet while the live explorer is on the page. It
is shown when the explorer is displayed and redrawn once changes pause for
:data:`PICTURE_DELAY` seconds, in a job runner of its own, so a click never waits for it
and it never waits behind a compile (a first click's, a companion panel's). When a
page rebuilds its view of the explorer (a reload, another tab) the picture is sent again, for
phaselab's JupyterLab plugin to write into that page's notebook; a page without the plugin
is told that its saved copy stays as it was (``messages.PAGE_REBUILT``).

What differs between the explorers is what is drawn: each gives :meth:`_picture_job`, called
on the widgets' thread when the quiet spell is over, returning the drawing to run in the
worker, the state written beside the picture and a note for its caption.
"""

from __future__ import annotations

from phaselab.widgets import messages
from phaselab.widgets.worker import Outcome, call_later

#: Seconds of quiet after which the saved-notebook picture is redrawn.
PICTURE_DELAY = 2.5
#: Resolution of the picture (dots per inch): enough to read, small in the saved notebook.
PICTURE_DPI = 80


class PictureKeeping:
    """Showing, scheduling, drawing and resending the kept picture.

    The explorer provides ``picture`` (a StaticPicture), ``jobs`` and ``picture_jobs``
    (JobRunners: the picture's own, so it never waits behind a compile), ``bokeh`` (a
    LiveBokehModel), ``name``, ``_loop``, ``_say(text, refused)`` and ``_picture_job()``.
    """

    def _show_picture(self):
        """Display the picture's output (an output of its own, next to the widget's) and draw
        it after a quiet spell."""
        self.picture.show()
        self._schedule_picture()

    def _schedule_picture(self):
        """Redraw the picture kept for a notebook opened without a kernel once changes pause
        for :data:`PICTURE_DELAY` seconds. Called after every change the page is sent (one
        patch), every zoom or pan, and every display; a burst of changes draws once, from the
        state at its end."""
        if self.picture.handle is None or not self.jobs.background:
            return
        # the state is taken on the widgets' thread when the quiet spell is over
        self.picture_jobs.submit("picture", lambda: None, lambda out: self._draw_picture(), delay=PICTURE_DELAY)

    def _page_ready(self, data):
        """A page has built a view of the explorer, or found that its view missed patches
        (``data``: what its page code wrote in the ``ready`` source, see
        :mod:`phaselab.widgets.page_sync`); the document is sent again where needed. When the
        view is a rebuild (a reload, another tab), send the picture again, so that the copy
        saved in that page's notebook shows the last state, or, on a page without phaselab's
        JupyterLab plugin (widgets/page.py), say that the copy there stays as it was."""
        self.bokeh.answer_page(data)
        if self.bokeh.page_builds == 0 or self.picture.handle is None or (data.get("missed") or [0])[-1]:
            return
        keeper = data.get("keeper") or [0]
        if keeper[-1]:
            self._schedule_picture()
        else:
            call_later(self._loop, 0.5, lambda: self._say(messages.PAGE_REBUILT, refused=True))

    def _draw_picture(self):
        """Take what to draw now, draw it in the picture's worker, then replace the picture."""
        if self.picture.handle is None:
            return
        compute, state, note = self._picture_job()
        caption = f"{self.name}: picture of the explorer's last state{note} (run the notebook for the live explorer)"

        def deliver(out: Outcome):
            if out.error is None:
                self.picture.update(out.value, caption, state)

        self.picture_jobs.submit("picture-draw", compute, deliver)
