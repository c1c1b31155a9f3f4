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
