"""JavaScript run in the page of the linked explorer (three degrees of freedom), shared by
tests/widgets/test_linked_browser.py and benchmarks/linked_browser_benchmark.py.

``window.__pl`` gets: the explorer's BokehJS document, its plot views, screen positions of
data points, the point sources (the big one and the fresh slots) and their renderers, and the
click timing (pointerdown at the event's own time stamp, so a page busy when the pointer
went down is counted): ``hook()`` wraps each plot view's paint and listens to the sources and the
websocket; ``arm(n_plots)`` before a click records pointerdown (``down``), the first message
sent to the kernel (``sent``), the last message received before the new rows (``last``), the
new rows held by a source (``data``, after the sources' own listeners ran), and the first
animation frame after every one of the ``n_plots`` plots painted again (``drawn``); all in
``performance.now()`` milliseconds, ``down_wall`` the offset to wall-clock milliseconds.
"""

LINKED_JS = """() => { const pl = window.__pl = {};
  pl.doc = () => { const docs = (window.Bokeh && window.Bokeh.documents) || [];
    for (let i = docs.length - 1; i >= 0; i--) { const d = docs[i];
      if (d.roots().length && d.get_model_by_name('phaselab-seeding')) return d; } return null; };
  pl.plots = () => { const out = [];
    const walk = (v) => { if (v.model && v.model.name && v.model.name.startsWith('phaselab-') && v.canvas_view
                              && v.el && v.el.isConnected) out.push(v);
                          for (const c of (v.child_views || [])) walk(c); };
    for (const root of window.Bokeh.index) walk(root); return out; };
  pl.view = (name) => pl.plots().find(v => v.model.name === name);
  pl.screen = (name, x, y) => { const v = pl.view(name); const r = v.canvas_view.el.getBoundingClientRect();
    return [r.left + v.frame.x_scale.compute(x), r.top + v.frame.y_scale.compute(y)]; };
  pl.src = () => pl.doc().get_model_by_name('phaselab-linked-points');
  pl.slots = () => [...pl.doc().all_models].filter(m => m.name && m.name.startsWith('phaselab-linked-fresh-'))
                                           .sort((a, b) => a.name.localeCompare(b.name, 'en', {numeric: true}));
  pl.fresh_rows = () => pl.slots().reduce((n, s) => n + s.data.orbit.length, 0);
  pl.sources = () => [pl.src(), ...pl.slots()].filter(s => s != null);
  pl.rows = () => pl.sources().reduce((n, s) => n + s.data.orbit.length, 0);
  pl.n = pl.rows;
  pl.sel = () => pl.sources().reduce((n, s) => n + s.selected.indices.length, 0);
  pl.renderers = (s) => [...pl.doc().all_models].filter(m => m.data_source === (s || pl.src()));
  pl.sharing = () => pl.renderers(pl.src()).length;
  pl.layers = () => pl.sources().map(s => pl.renderers(s).map(r => r.level));
  pl.filtered = () => pl.sources().filter(s => s.data.orbit.length > 0)   // an empty slot is switched when filled
                                   .every(s => pl.renderers(s).every(r => r.view.filter.indices != null));
  pl.outside = (col, half) => { let worst = -Infinity;
    for (const s of pl.sources().filter(s => s.data.orbit.length > 0)) { const w = s.data[col];
      for (const r of pl.renderers(s)) { if (r.view.filter.indices == null) return Infinity;   // shown unfiltered
        for (const i of r.view.filter.indices) worst = Math.max(worst, Math.abs(w[i]) - half); } }
    return worst; };
  pl.slabs = () => pl.sources().map(s => { const f = pl.renderers(s).map(r => r.view.filter);
    return JSON.stringify([s.name, s.data.orbit.length, s.data.c3.length, f.length, [...new Set(f.map(x => x.name))],
            [...new Set(f.map(x => x.indices ? x.indices.length + ':' + Math.max(-1, ...x.indices) : null))]]); });
  pl.webgl = () => pl.plots().map(v => v.canvas_view.webgl != null);
  pl.hook = () => {
    pl.paints = new Map();
    for (const v of pl.plots()) { const orig = v._actual_paint.bind(v);
      v._actual_paint = () => { const t0 = performance.now(); orig(); const t1 = performance.now();
        if (pl.data != null && t0 >= pl.data) { pl.paints.set(v.model.name, t1); pl.paint_ms += t1 - t0; } }; }
    for (const s of pl.sources()) { const mark = () => { if (pl.down != null && pl.data == null && pl.rows() > pl.n0)
                                                        pl.data = performance.now(); };
      s.change.connect(mark); s.streaming.connect(mark); s.properties.data.change.connect(mark); }
    const send = WebSocket.prototype.send;
    WebSocket.prototype.send = function (data) {
      if (pl.down != null && pl.sent == null) pl.sent = performance.now();
      if (!this.__plHeard) { this.__plHeard = true;
        this.addEventListener('message', () => { if (pl.sent != null && pl.data == null) pl.last = performance.now(); }); }
      return send.call(this, data); };
  };
  pl.arm = (n_plots) => { pl.n0 = pl.rows(); pl.down = null; pl.sent = null; pl.last = null; pl.data = null;
    pl.drawn = null; pl.paint_ms = 0; pl.paints = new Map();
    // the event's own time stamp: when the pointer went down, even if the page was busy then
    document.addEventListener('pointerdown', (e) => { pl.down = e.timeStamp; pl.down_wall = Date.now()
                                                        - performance.now(); }, {capture: true, once: true});
    const poll = () => { if (pl.data != null && pl.paints.size >= n_plots) {
        requestAnimationFrame(() => { pl.drawn = performance.now(); }); return; }
      requestAnimationFrame(poll); };
    requestAnimationFrame(poll); };
  pl.timing = () => [pl.down, pl.sent, pl.last, pl.data, pl.drawn, pl.down_wall, pl.paint_ms];
}"""
