// PickTable: a small table whose rows (and some cells) select samples when clicked.
// The kernel sends the columns and the rows; a click sends {action: "pick", row, column} back.
// Every string from the data (class names, ids) is set with textContent; the only markup is our own.

const CSS = `
.lspt-root { font-family: var(--jp-ui-font-family, system-ui, sans-serif); font-size: 12px;
  color: var(--jp-ui-font-color1, #1f2328); min-width: 0; }
.lspt-caption { font-weight: 600; font-size: 12.5px; margin: 0 0 4px; }
.lspt-box { overflow: auto; border: 1px solid var(--jp-border-color2, #dde1e5); border-radius: 5px; }
.lspt-table { border-collapse: collapse; width: 100%; font-size: 12px; }
.lspt-table th { position: sticky; top: 0; z-index: 1; background: var(--jp-layout-color2, #f3f4f6);
  font-weight: 600; padding: 4px 8px; color: var(--jp-ui-font-color2, #59636e); white-space: nowrap;
  cursor: pointer; user-select: none; text-align: right; }
.lspt-table th.lspt-left, .lspt-table td.lspt-left { text-align: left; }
.lspt-table td { padding: 3px 8px; border-top: 1px solid var(--jp-border-color3, #eceef1); text-align: right;
  font-variant-numeric: tabular-nums; white-space: nowrap; line-height: 1.35; }
.lspt-table td.lspt-left { max-width: 220px; overflow: hidden; text-overflow: ellipsis; }
.lspt-table tbody tr { cursor: pointer; outline: none; }
.lspt-table tbody tr:hover { background: var(--jp-layout-color2, #f3f6fa); }
.lspt-table tbody tr:focus-visible { box-shadow: inset 0 0 0 2px var(--jp-brand-color2, #7aa7e0); }
.lspt-table tbody tr.lspt-active { background: var(--jp-brand-color3, #dbe8f8); }
.lspt-table td.lspt-pick { color: var(--jp-content-link-color, #1f6fd1); text-decoration: underline dotted; }
.lspt-table td.lspt-pick.lspt-active-cell { background: var(--jp-brand-color2, #a9c7ee); }
.lspt-table td.lspt-off { color: var(--jp-ui-font-color3, #818b98); cursor: default; }
.lspt-swatch { display: inline-block; width: 10px; height: 10px; border-radius: 2px; margin-right: 6px;
  vertical-align: -1px; }
.lspt-bar { position: relative; display: inline-block; width: 64px; height: 9px; margin-right: 6px;
  vertical-align: -1px; background: var(--jp-layout-color3, #eceef1); border-radius: 2px; }
.lspt-bar-mid { position: absolute; left: 50%; top: -2px; bottom: -2px; width: 1px;
  background: var(--jp-ui-font-color3, #818b98); }
.lspt-bar-fill { position: absolute; top: 0; bottom: 0; border-radius: 2px; }
.lspt-note { color: var(--jp-ui-font-color2, #59636e); font-size: 11.5px; margin-top: 4px; line-height: 1.4; }
.lspt-empty { color: var(--jp-ui-font-color2, #59636e); padding: 8px; }
`;

function cellText(value) {
  if (value === null || value === undefined) return "";
  if (typeof value === "object") return value.text === undefined || value.text === null ? "" : String(value.text);
  return String(value);
}

function sortValue(value) {
  if (value && typeof value === "object" && typeof value.sort === "number") return value.sort;
  const text = cellText(value);
  const n = Number(text.replace(/[,%+]/g, ""));
  return text !== "" && Number.isFinite(n) ? n : text.toLowerCase();
}

// our own colours only (hex from the kernel's palette); anything else is dropped
function safeColor(c) {
  return typeof c === "string" && /^#[0-9a-fA-F]{3,8}$/.test(c) ? c : null;
}

function render({ model, el }) {
  el.classList.add("lspt-root");
  const style = document.createElement("style");
  style.textContent = CSS; // our own CSS, no data in it
  el.appendChild(style);
  const caption = make("div", "lspt-caption");
  const box = make("div", "lspt-box");
  const note = make("div", "lspt-note");
  el.append(caption, box, note);
  let sortKey = null;
  let sortDir = 1;
  const rowNodes = new Map();

  const send = (row, column) => model.send({ action: "pick", row, column });

  function drawActive() {
    const active = model.get("active") || {};
    for (const [key, tr] of rowNodes) {
      const on = key === active.row;
      tr.classList.toggle("lspt-active", on && !active.column);
      for (const td of tr.querySelectorAll("td.lspt-pick")) {
        td.classList.toggle("lspt-active-cell", on && td.dataset.column === active.column);
      }
    }
  }

  function cell(col, value) {
    const td = make("td", col.align === "left" ? "lspt-left" : null);
    td.dataset.column = col.key;
    const v = value && typeof value === "object" ? value : null;
    if (v && safeColor(v.swatch)) {
      const sw = make("span", "lspt-swatch");
      sw.style.background = safeColor(v.swatch);
      td.appendChild(sw);
    }
    if (v && typeof v.bar === "number" && Number.isFinite(v.bar)) {
      const bar = make("span", "lspt-bar");
      const fill = make("span", "lspt-bar-fill");
      const w = Math.min(1, Math.abs(v.bar)) * 50;
      fill.style.width = `${w.toFixed(1)}%`;
      fill.style.left = v.bar >= 0 ? "50%" : `${(50 - w).toFixed(1)}%`;
      fill.style.background = safeColor(v.color) || "#5f6b7a";
      bar.append(fill, make("span", "lspt-bar-mid"));
      td.appendChild(bar);
    }
    td.appendChild(document.createTextNode(cellText(value)));
    const text = cellText(value);
    if (v && v.title) td.title = String(v.title);
    else if (col.align === "left" && text) td.title = text;
    if (col.pick) {
      const off = v && v.off;
      td.classList.add(off ? "lspt-off" : "lspt-pick");
    }
    return td;
  }

  function draw() {
    caption.textContent = model.get("caption");
    caption.style.display = model.get("caption") ? "" : "none";
    note.textContent = model.get("note");
    note.style.display = model.get("note") ? "" : "none";
    box.style.maxHeight = `${model.get("max_height")}px`;
    const columns = model.get("columns");
    let rows = model.get("rows").slice();
    rowNodes.clear();
    if (!rows.length) {
      box.replaceChildren(make("div", "lspt-empty", model.get("empty")));
      return;
    }
    if (sortKey !== null) {
      rows.sort((a, b) => {
        const x = sortValue(a.cells[sortKey]);
        const y = sortValue(b.cells[sortKey]);
        if (typeof x === "number" && typeof y === "number") return sortDir * (x - y);
        return sortDir * String(x).localeCompare(String(y));
      });
    }
    const table = make("table", "lspt-table");
    const head = make("tr");
    for (const col of columns) {
      const arrow = col.key === sortKey ? (sortDir > 0 ? " ▲" : " ▼") : "";
      const th = make("th", col.align === "left" ? "lspt-left" : null, col.label + arrow);
      th.dataset.column = col.key;
      th.title = col.title ? `${col.title} (click to sort)` : "click to sort";
      th.addEventListener("click", () => {
        if (sortKey === col.key) sortDir = -sortDir;
        else {
          sortKey = col.key;
          sortDir = 1;
        }
        draw();
      });
      head.appendChild(th);
    }
    const thead = make("thead");
    thead.appendChild(head);
    const tbody = make("tbody");
    for (const row of rows) {
      const tr = make("tr");
      tr.tabIndex = 0;
      tr.dataset.key = String(row.key);
      if (row.title) tr.title = String(row.title);
      for (const col of columns) tr.appendChild(cell(col, row.cells[col.key]));
      tr.addEventListener("click", (e) => {
        const td = e.target.closest("td");
        const column = td && td.classList.contains("lspt-pick") ? td.dataset.column : "";
        send(String(row.key), column);
      });
      tr.addEventListener("keydown", (e) => {
        if (e.key === "Enter" || e.key === " ") {
          e.preventDefault();
          send(String(row.key), "");
        }
      });
      rowNodes.set(String(row.key), tr);
      tbody.appendChild(tr);
    }
    table.append(thead, tbody);
    box.replaceChildren(table);
    drawActive();
  }

  const names = ["columns", "rows", "caption", "note", "max_height", "empty"];
  for (const name of names) model.on(`change:${name}`, draw);
  model.on("change:active", drawActive);
  draw();
  return () => {
    for (const name of names) model.off(`change:${name}`, draw);
    model.off("change:active", drawActive);
  };
}

export default { render };
