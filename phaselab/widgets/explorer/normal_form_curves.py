"""The explorer's normal-form control: the normal form's invariant curves at the current
energy drawn dashed over the section (computed by
:mod:`phaselab.widgets.normal_form_overlay`, in the worker; redrawn when the energy, the
parameters or the plane change). The control's state is not part of session files."""

from __future__ import annotations

import html

import ipywidgets as W

from phaselab.errors import PhaselabError
from phaselab.widgets.normal_form_overlay import (DEFAULT_COUNT, DEFAULT_ORDER, MAX_COUNT, ORDERS, NormalFormOverlay,
                                                  check_count, check_order)
from phaselab.widgets.worker import Outcome

#: the dashed curves' colour: a slate violet used by no orbit, mark or manifold
CURVE_COLOR = "#6a4fb3"


class NormalFormCurves:
    """The normal-form toggle, its order and count, and the dashed curves (mixed into
    :class:`Explorer`)."""

    def _add_normal_form_control(self):
        """The widgets, the curves' source and renderer, and their key (before display)."""
        from bokeh.models import ColumnDataSource, Legend, LegendItem

        self._nf_overlay = NormalFormOverlay(self.system)
        self._nf_shown = None
        self._nf_said = None   # the last status text of this control
        self.nf_toggle = W.Checkbox(value=False, description="normal-form curves", indent=False,
                                    layout=W.Layout(width="150px"))
        self.nf_order = W.Dropdown(options=list(ORDERS), value=DEFAULT_ORDER, description="order",
                                   style={"description_width": "38px"}, layout=W.Layout(width="100px"))
        self.nf_count = W.BoundedIntText(value=DEFAULT_COUNT, min=1, max=MAX_COUNT, description="curves",
                                         style={"description_width": "44px"}, layout=W.Layout(width="110px"))
        fig = self.figures.main
        self.nf_source = ColumnDataSource(dict(xs=[], ys=[]), name="phaselab-normal-form")
        renderer = fig.multi_line("xs", "ys", source=self.nf_source, line_color=CURVE_COLOR, line_width=1.3,
                                  line_dash="dashed", line_alpha=0.9)
        self.nf_key = Legend(items=[LegendItem(label="normal form", renderers=[renderer])], location="top_right",
                             label_text_font_size="10px", background_fill_alpha=0.7, visible=False,
                             name="phaselab-normal-form-key")
        fig.add_layout(self.nf_key)
        for w in (self.nf_toggle, self.nf_order, self.nf_count):
            w.observe(self._on_normal_form_control, "value")

    def _with_normal_form_row(self, rows):
        """``rows`` with the control's row put before the files row (sections of two degrees
        of freedom only)."""
        if self.view.kind != "section" or self.system.dof != 2:
            return tuple(rows)
        label = W.HTML(f"<div class='pl-group'>{html.escape('normal form')}</div>")
        row = W.HBox([label, self.nf_toggle, self.nf_order, self.nf_count], layout=W.Layout(align_items="center"))
        rows = list(rows)
        at = next((i for i, r in enumerate(rows) if self.controls.stem in getattr(r, "children", ())), len(rows) - 1)
        return tuple(rows[:at] + [row] + rows[at:])

    def show_normal_form_curves(self, on=True, *, order=None, count=None):
        """Draw (``on``) or remove the normal form's invariant curves at the current energy.

        Parameters
        ----------
        on : bool
        order : {4, 6, 8}, optional
            Order of the normal form (default the control's).
        count : int, optional
            Number of curves, 1..12 (default the control's).
        """
        try:
            order = self.nf_order.value if order is None else check_order(order)
            count = self.nf_count.value if count is None else check_count(count)
        except PhaselabError as exc:
            self._say(f"Normal-form curves refused: {exc}.", refused=True)
            return
        self._setting_controls = True
        try:
            self.nf_toggle.value = bool(on)
            self.nf_order.value = order
            self.nf_count.value = count
        finally:
            self._setting_controls = False
        self._nf_shown = None
        self._refresh_normal_form_curves(announce=True)

    def _on_normal_form_control(self, change):
        if self._setting_controls:
            return
        self._nf_shown = None
        self._refresh_normal_form_curves(announce=True)

    def _clear_normal_form_curves(self):
        with self._held():
            self.nf_source.data = dict(xs=[], ys=[])
            self.nf_key.visible = False

    def _refresh_normal_form_curves(self, announce=False):
        """Compute and draw the curves for the current setting (nothing when off or unchanged).
        A refusal is always said in the status line; a success when ``announce`` (a change of
        the control) or when the status line still shows this control's last words, so that
        it does not hide what a recomputation said."""
        if getattr(self, "nf_toggle", None) is None:
            return
        if not self.nf_toggle.value:
            if len(self.nf_source.data["xs"]):
                self._clear_normal_form_curves()
            self._nf_shown = None
            return
        view, energy, params = self.view, self.session.energy, self.params
        order, count = self.nf_order.value, self.nf_count.value
        key = (id(view), energy, tuple(sorted(params.items())), order, count)
        if key == self._nf_shown:
            return
        overlay = self._nf_overlay

        def compute():
            return overlay.curves(view, energy, params, order, count)

        def deliver(out: Outcome):
            if view is not self.view or not self.nf_toggle.value:
                return
            if out.error is not None:
                self._clear_normal_form_curves()
                self._nf_shown = None
                why = out.error if isinstance(out.error, PhaselabError) else \
                    f"{type(out.error).__name__}: {out.error}"
                self._say(f"No normal-form curves: {why}", refused=True)
                self._nf_said = self._message
                return
            found = out.value
            self._nf_shown = key
            self.nf_source.data = dict(xs=[c[:, 0] for c in found.lines], ys=[c[:, 1] for c in found.lines])
            self.nf_key.items[0].label = {"value": found.label}
            self.nf_key.visible = True
            if announce or self._message == self._nf_said:   # not over what another command said
                self._say(f"Drew {len(found.levels)} invariant curves of the {found.label} at E = {energy:.6g} "
                          f"({found.measured}: {found.mismatch:.1e} of E - E0).")
                self._nf_said = self._message
            self._schedule_picture()

        self._submit("normal form", f"computing the order-{order} normal form's curves", compute, deliver)
