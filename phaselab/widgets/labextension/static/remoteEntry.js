/*
 * phaselab-notebook: a JupyterLab plugin that keeps each explorer's saved picture current.
 *
 * An explorer keeps a PNG of its last state in an ordinary output beside the widget, for a
 * reader who opens the notebook without a kernel (phaselab/widgets/page.py). The kernel
 * replaces that output through its display id, and JupyterLab routes such an update only to
 * outputs made by executions of the same page: after a reload the output on the page is the
 * saved copy, which no update reached. This plugin listens to each notebook's kernel messages;
 * an update whose metadata names a picture ({"phaselab": {"picture": id}}) replaces every
 * output of that notebook's model with the same mark, so a save after a reload keeps the last
 * state. It changes nothing else and reads nothing but those messages.
 *
 * Written by hand in the form JupyterLab loads a prebuilt extension (a container object with
 * init and get on window._JUPYTERLAB); it needs no shared module and no build step.
 */
(function () {
  "use strict";

  const NAME = "phaselab-notebook";
  const MARK = "phaselab";

  function pictureId(metadata) {
    const mark = metadata && metadata[MARK];
    return mark && typeof mark.picture === "string" ? mark.picture : null;
  }

  function sameData(a, b) {
    return JSON.stringify(a) === JSON.stringify(b);
  }

  // Replace the outputs of `model` (a notebook model) marked with picture `id`.
  function replacePictures(model, id, content) {
    const cells = model.cells;
    for (let c = 0; c < cells.length; c++) {
      const cell = cells.get(c);
      if (cell.type !== "code" || !cell.outputs) continue;
      const outputs = cell.outputs;
      for (let i = 0; i < outputs.length; i++) {
        const output = outputs.get(i);
        if (pictureId(output.metadata) !== id || sameData(output.data, content.data)) continue;
        outputs.set(i, {output_type: "display_data", data: content.data, metadata: content.metadata || {}});
      }
    }
  }

  function watch(widget, watched) {
    const context = widget && widget.context;
    const session = widget && widget.sessionContext;
    if (watched.has(widget) || !context || !context.model || !context.model.cells
        || !session || !session.iopubMessage) {
      return;
    }
    watched.add(widget);
    session.iopubMessage.connect((sender, msg) => {
      if (msg.header.msg_type !== "update_display_data") return;
      const id = pictureId(msg.content.metadata);
      if (id !== null && !context.isDisposed) replacePictures(context.model, id, msg.content);
    });
  }

  const plugin = {
    id: NAME + ":saved-picture",
    description: "Keeps the picture a phaselab explorer saves in its notebook up to date after a reload.",
    autoStart: true,
    activate(app) {
      const watched = new WeakSet();
      const scan = () => {
        for (const widget of app.shell.widgets("main")) watch(widget, watched);
      };
      for (const signal of [app.shell.layoutModified, app.shell.currentChanged]) {
        if (signal && typeof signal.connect === "function") signal.connect(scan);
      }
      app.restored.then(scan);
      container.active = true;  // read by the explorer's page code (phaselab/widgets/figures.py)
    },
  };

  const container = {
    active: false,
    init() {
      return Promise.resolve();
    },
    get(module) {
      if (module !== "./extension") {
        return Promise.reject(new Error(NAME + ": no module " + module));
      }
      return Promise.resolve(() => ({__esModule: true, default: plugin}));
    },
  };

  window._JUPYTERLAB = window._JUPYTERLAB || {};
  window._JUPYTERLAB[NAME] = container;
})();
