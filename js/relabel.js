// RelabelQueue and DoubtfulLabelPicker (one module; the model's `_kind` says which to draw).
// Data strings (ids, class names, notes, paths) are set with textContent only.

const CSS = `
.lsr-root { font-family: var(--jp-ui-font-family, system-ui, sans-serif); font-size: 12px;
  color: var(--jp-ui-font-color1, #1f2328); border: 1px solid var(--jp-border-color2, #dde1e5);
  border-radius: 8px; padding: 8px 10px; background: var(--jp-layout-color1, #fff);
  display: flex; flex-direction: column; gap: 7px; }
.lsr-head { display: flex; flex-wrap: wrap; align-items: baseline; gap: 8px; }
.lsr-title { font-weight: 600; font-size: 13px; }
.lsr-count { color: var(--jp-ui-font-color2, #59636e); }
.lsr-path { font-family: var(--jp-code-font-family, ui-monospace, monospace); font-size: 11px;
  color: var(--jp-ui-font-color2, #59636e); overflow-wrap: anywhere; }
.lsr-row { display: flex; flex-wrap: wrap; align-items: center; gap: 6px; }
.lsr-root button, .lsr-root select, .lsr-root input { font: inherit; padding: 2px 7px; border-radius: 4px;
  border: 1px solid var(--jp-border-color1, #c8ccd0); background: var(--jp-layout-color1, #fff); color: inherit; }
.lsr-root button { cursor: pointer; }
.lsr-root button:disabled { opacity: 0.45; cursor: default; }
.lsr-root button.lsr-primary { background: var(--jp-brand-color1, #1f6fd1); border-color: var(--jp-brand-color1, #1f6fd1);
  color: #fff; }
.lsr-note { flex: 1 1 160px; min-width: 120px; }
.lsr-key { color: var(--jp-ui-font-color2, #59636e); }
.lsr-status { color: var(--jp-ui-font-color2, #59636e); font-size: 11.5px; overflow-wrap: anywhere; }
.lsr-tablebox { max-height: 240px; overflow: auto; border: 1px solid var(--jp-border-color2, #dde1e5);
  border-radius: 5px; }
.lsr-table { border-collapse: collapse; width: 100%; font-size: 11.5px; }
.lsr-table th { position: sticky; top: 0; background: var(--jp-layout-color2, #f3f4f6); text-align: left;
  font-weight: 600; padding: 3px 6px; color: var(--jp-ui-font-color2, #59636e); }
.lsr-table td { padding: 3px 6px; border-top: 1px solid var(--jp-border-color3, #eceef1); vertical-align: top;
  overflow-wrap: break-word; }
.lsr-table td.lsr-notecell { min-width: 120px; }
.lsr-table td:last-child { width: 1%; }
.lsr-table td.lsr-id { font-family: var(--jp-code-font-family, ui-monospace, monospace); white-space: nowrap; }
.lsr-link { color: var(--jp-content-link-color, #1f6fd1); cursor: pointer; text-decoration: underline dotted; }
.lsr-table td.lsr-time { white-space: nowrap; color: var(--jp-ui-font-color2, #59636e); }
.lsr-table button { padding: 0 6px; font-size: 11px; white-space: nowrap; }
.lsr-empty { color: var(--jp-ui-font-color2, #59636e); padding: 6px; }
.lsr-n { width: 64px; }
`;

function option(value, text) {
  const o = make("option", null, text);
  o.value = value;
  return o;
}

function setup(el, kind) {
  el.classList.add("lsr-root", kind);
  const style = document.createElement("style");
  style.textContent = CSS; // our own CSS, no data in it
  el.appendChild(style);
}

function renderQueue({ model, el }) {
  setup(el, "lsr-queue");
  const head = make("div", "lsr-head");
  const count = make("span", "lsr-count");
  const path = make("span", "lsr-path");
  head.append(make("span", "lsr-title", "Relabel queue"), count, path);

  const controls = make("div", "lsr-row");
  const markSel = make("button", "lsr-primary lsr-mark-selection");
  const markFocus = make("button", "lsr-primary lsr-mark-focus");
  const suggested = make("select", "lsr-suggested");
  const note = make("input", "lsr-note");
  note.type = "text";
  note.placeholder = "note (optional)";
  controls.append(make("span", "lsr-key", "mark"), markSel, markFocus, make("span", "lsr-key", "as"), suggested, note);

  const status = make("div", "lsr-status");
  const tableBox = make("div", "lsr-tablebox");
  const footer = make("div", "lsr-row");
  const exportBtn = make("button", "lsr-export", "Export CSV");
  const shownInfo = make("span", "lsr-key");
  footer.append(exportBtn, shownInfo);
  el.append(head, controls, status, tableBox, footer);

  function drawHead() {
    const n = model.get("n_marks");
    count.textContent = `${n} mark${n === 1 ? "" : "s"}`;
    path.textContent = `saved to ${short(model.get("path"), 160)}`;
    path.title = model.get("path");
    status.textContent = model.get("status");
  }

  function drawControls() {
    const k = model.get("n_selected");
    markSel.textContent = `selection (${k})`;
    markSel.disabled = k === 0;
    const fid = model.get("focus_id");
    markFocus.textContent = fid ? `focused: ${short(fid, 32)}` : "focused sample";
    markFocus.title = fid;
    markFocus.disabled = !fid;
    const classes = model.get("classes");
    const keep = suggested.value;
    const def = model.get("focus_default");
    const defText = def ? `model's suggestion (focused: ${short(def, 40)})` : "model's suggestion";
    if (suggested.options.length !== classes.length + 1) {
      suggested.replaceChildren(option("", defText), ...classes.map((c) => {
        const o = option(c, short(c, 60));
        o.title = c;
        return o;
      }));
    } else {
      suggested.options[0].textContent = defText;
    }
    suggested.value = keep && classes.includes(keep) ? keep : "";
  }

  function drawTable() {
    const items = model.get("items");
    const n = model.get("n_marks");
    shownInfo.textContent = items.length < n ? `showing the latest ${items.length} of ${n}` : "";
    exportBtn.disabled = n === 0;
    if (!items.length) {
      tableBox.replaceChildren(make("div", "lsr-empty", "Nothing marked yet."));
      return;
    }
    const table = make("table", "lsr-table");
    const hr = make("tr");
    for (const h of ["id", "given", "suggested", "note", "marked at", ""]) hr.appendChild(make("th", null, h));
    const thead = make("thead");
    thead.appendChild(hr);
    const tbody = make("tbody");
    for (const m of items) {
      const tr = make("tr");
      const idCell = make("td", "lsr-id");
      const idText = named("span", m.row !== null && m.row !== undefined ? "lsr-link" : null, m.id_text, 32);
      if (m.row !== null && m.row !== undefined) {
        idText.title = `${m.id_text}: show in the sample card`;
        idText.addEventListener("click", () => model.send({ action: "focus", row: m.row }));
      }
      idCell.appendChild(idText);
      const rm = make("button", "lsr-remove", "remove");
      rm.addEventListener("click", () => model.send({ action: "unmark", id: m.id }));
      const rmCell = make("td");
      rmCell.appendChild(rm);
      tr.append(
        idCell,
        named("td", "lsr-given", m.given_label, 32),
        named("td", "lsr-sugg", m.suggested_label, 32),
        named("td", "lsr-notecell", m.note, 400),
        make("td", "lsr-time", m.marked_at),
        rmCell,
      );
      tbody.appendChild(tr);
    }
    table.append(thead, tbody);
    tableBox.replaceChildren(table);
  }

  const send = (scope) => model.send({ action: "mark", scope, suggested: suggested.value, note: note.value });
  markSel.addEventListener("click", () => send("selection"));
  markFocus.addEventListener("click", () => send("focus"));
  exportBtn.addEventListener("click", () => model.send({ action: "export" }));

  const events = [
    ["n_marks", drawHead], ["path", drawHead], ["status", drawHead],
    ["n_selected", drawControls], ["focus_id", drawControls], ["focus_default", drawControls],
    ["classes", drawControls], ["items", drawTable], ["n_marks", drawTable],
  ];
  for (const [name, fn] of events) model.on(`change:${name}`, fn);
  drawHead();
  drawControls();
  drawTable();
  return () => {
    for (const [name, fn] of events) model.off(`change:${name}`, fn);
  };
}

function renderPicker({ model, el }) {
  setup(el, "lsr-picker");
  const row = make("div", "lsr-row");
  const method = make("select", "lsr-method");
  const n = make("input", "lsr-n");
  n.type = "number";
  n.step = "1";
  const go = make("button", "lsr-primary lsr-pick", "Select the most doubtful");
  row.append(make("span", "lsr-title", "Doubtful labels"), make("span", "lsr-key", "method"), method,
    make("span", "lsr-key", "how many"), n, go);
  const status = make("div", "lsr-status");
  el.append(row, status);

  function draw() {
    const methods = model.get("methods");
    if (method.options.length !== methods.length) {
      method.replaceChildren(...methods.map(([value, text]) => option(value, text)));
    }
    method.value = model.get("method");
    // the box's bounds are the parameter's accepted range; a value outside it is refused by Python, not clamped
    n.min = String(model.get("n_min"));
    n.max = String(model.get("n_max"));
    n.value = String(model.get("n"));
    const enabled = model.get("enabled");
    method.disabled = !enabled;
    n.disabled = !enabled;
    go.disabled = !enabled;
    status.textContent = model.get("status");
  }

  method.addEventListener("change", () => {
    model.set("method", method.value);
    model.save_changes();
  });
  n.addEventListener("change", () => model.send({ action: "n", value: n.value }));
  go.addEventListener("click", () => model.send({ action: "pick" }));
  const names = ["methods", "method", "n", "n_min", "n_max", "enabled", "status"];
  for (const name of names) model.on(`change:${name}`, draw);
  draw();
  return () => {
    for (const name of names) model.off(`change:${name}`, draw);
  };
}

function render(ctx) {
  return ctx.model.get("_kind") === "picker" ? renderPicker(ctx) : renderQueue(ctx);
}

export default { render };
