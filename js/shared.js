// Small DOM helpers every logitscope widget module uses. logitscope.widgets._assets.esm puts this
// text before each module, so one copy serves them all (an anywidget module is a single file).

// An element with a class and a text (set as text, never parsed as HTML).
function make(tag, cls, text) {
  const node = document.createElement(tag);
  if (cls) node.className = cls;
  if (text !== undefined && text !== null) node.textContent = String(text);
  return node;
}

// At most `max` characters, cut in the middle with an ellipsis (as logitscope.text.shorten does).
function short(text, max) {
  const s = String(text);
  if (s.length <= max) return s;
  const keep = max - 1;
  const head = Math.ceil(keep / 2);
  const tail = keep - head;
  return s.slice(0, head) + "…" + (tail ? s.slice(s.length - tail) : "");
}

// A node showing `text` cut to `max` characters; the full text is its title when cut.
function named(tag, cls, text, max) {
  const full = text === null || text === undefined ? "" : String(text);
  const node = make(tag, cls, short(full, max));
  if (full.length > max) node.title = full;
  return node;
}

// The model id inside a widget reference ("IPY_MODEL_<id>", as a child trait is serialised).
function childId(ref) {
  const s = String(ref || "");
  return s.startsWith("IPY_MODEL_") ? s.slice("IPY_MODEL_".length) : s;
}

// Attach a child widget's view inside host as JupyterLab attaches any output (lumino's Widget.attach, so
// tab bars and other lumino parts get their after-attach messages), then tell the view it is displayed.
function attach(view, host) {
  const lumino = view.luminoWidget || view.pWidget;
  const ctor = lumino && lumino.constructor;
  if (ctor && typeof ctor.attach === "function") {
    ctor.attach(lumino, host);
  } else {
    host.appendChild(view.el);
  }
  view.trigger("displayed");
}

// The view of the widget's "child" trait, made by the widget manager; null (and the view removed) when
// isGone() holds by the time it is made (the widget's own view was removed meanwhile).
async function childView(model, isGone) {
  const manager = model.widget_manager;
  const child = await manager.get_model(childId(model.get("child")));
  const made = await manager.create_view(child, {});
  if (isGone()) {
    made.remove();
    return null;
  }
  return made;
}
