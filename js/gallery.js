// SampleGallery: one page of sample tiles (thumbnail or text snippet, id, label, prediction, top-3 bars).
// Every string that comes from the data is set with textContent; the only markup we build is our own.
// Long names and ids are cut in the middle for display, with the full text in the title attribute (on hover).

const CSS = `
.lsg-root { font-family: var(--jp-ui-font-family, system-ui, sans-serif); font-size: 12px;
  color: var(--jp-ui-font-color1, #1f2328); }
.lsg-head { display: flex; flex-wrap: wrap; align-items: center; gap: 8px; margin: 0 0 8px 0; }
.lsg-title { font-weight: 600; font-size: 13px; }
.lsg-scope, .lsg-sortlabel { color: var(--jp-ui-font-color2, #59636e); }
.lsg-spacer { flex: 1 1 auto; }
.lsg-head select, .lsg-head button { font: inherit; padding: 2px 6px; border-radius: 4px;
  border: 1px solid var(--jp-border-color1, #c8ccd0); background: var(--jp-layout-color1, #fff);
  color: inherit; cursor: pointer; }
.lsg-head button:disabled { opacity: 0.45; cursor: default; }
.lsg-page { min-width: 86px; text-align: center; color: var(--jp-ui-font-color2, #59636e); }
.lsg-grid { display: grid; grid-template-columns: repeat(auto-fill, minmax(156px, 1fr)); gap: 8px; }
.lsg-tile { border: 1px solid var(--jp-border-color2, #dde1e5); border-radius: 6px; padding: 6px 7px 7px;
  background: var(--jp-layout-color1, #fff); cursor: pointer; display: flex; flex-direction: column;
  gap: 4px; min-width: 0; outline: none; transition: box-shadow 0.1s, border-color 0.1s; }
.lsg-tile:hover { border-color: var(--jp-brand-color2, #7aa7e0); box-shadow: 0 1px 4px rgba(0,0,0,0.12); }
.lsg-tile:focus-visible { border-color: var(--jp-brand-color1, #1f6fd1); }
.lsg-tile.lsg-focus { border-color: var(--jp-brand-color1, #1f6fd1);
  box-shadow: 0 0 0 2px var(--jp-brand-color3, #b9d2f3); }
.lsg-wrong { border-left: 3px solid var(--jp-error-color1, #cf222e); }
.lsg-right { border-left: 3px solid var(--jp-success-color1, #1a7f37); }
.lsg-thumb { height: 72px; display: flex; align-items: center; justify-content: center;
  background: var(--jp-layout-color2, #f3f4f6); border-radius: 4px; overflow: hidden; }
.lsg-thumb img { image-rendering: pixelated; max-height: 72px; max-width: 100%; }
.lsg-missing { color: var(--jp-ui-font-color2, #59636e); font-size: 11px; padding: 4px; text-align: center;
  overflow-wrap: anywhere; }
.lsg-text { height: 72px; overflow: hidden; font-size: 11.5px; line-height: 1.35; padding: 4px 5px;
  background: var(--jp-layout-color2, #f3f4f6); border-radius: 4px; overflow-wrap: anywhere; }
.lsg-id { font-family: var(--jp-code-font-family, ui-monospace, monospace); font-size: 11px;
  color: var(--jp-ui-font-color2, #59636e); white-space: nowrap; overflow: hidden; text-overflow: ellipsis; }
.lsg-labels { display: flex; flex-direction: column; gap: 1px; }
.lsg-line { white-space: nowrap; overflow: hidden; text-overflow: ellipsis; }
.lsg-key { color: var(--jp-ui-font-color2, #59636e); }
.lsg-mark-wrong { color: var(--jp-error-color1, #cf222e); font-weight: 600; }
.lsg-mark-right { color: var(--jp-success-color1, #1a7f37); font-weight: 600; }
.lsg-bars { display: grid; grid-template-columns: minmax(0, 1fr) max-content; align-items: baseline;
  column-gap: 4px; row-gap: 0; font-size: 11px; }
.lsg-bname { white-space: nowrap; overflow: hidden; text-overflow: ellipsis; min-width: 0; }
.lsg-bar { grid-column: 1 / -1; height: 5px; margin: 1px 0 3px; background: var(--jp-layout-color3, #e3e6ea);
  border-radius: 3px; overflow: hidden; }
.lsg-fill { height: 100%; background: var(--jp-brand-color1, #1f6fd1); border-radius: 3px; }
.lsg-fill.lsg-is-label { background: var(--jp-success-color1, #1a7f37); }
.lsg-pct { text-align: right; font-variant-numeric: tabular-nums; color: var(--jp-ui-font-color2, #59636e); }
.lsg-value { font-size: 10.5px; color: var(--jp-ui-font-color3, #818b98); font-variant-numeric: tabular-nums; }
.lsg-empty { padding: 16px; color: var(--jp-ui-font-color2, #59636e); }
`;

// How the sort menu names the score columns (the column name with spaces where not listed).
const SORT_NAMES = {
  true_probability: "label probability",
  true_log_probability: "label log-probability",
  true_rank: "label rank",
  brier: "Brier score",
  correct: "right / wrong",
  row: "row (frame order)",
};

function pct(p) {
  const v = 100 * p;
  return (v >= 99.95 || v < 0.05 ? v.toFixed(0) : v.toFixed(1)) + "%";
}

function fmt(v) {
  if (v === null || v === undefined) return "";
  if (typeof v === "boolean") return v ? "yes" : "no";
  if (!Number.isFinite(v)) return String(v);
  if (Number.isInteger(v)) return String(v);
  const a = Math.abs(v);
  return a !== 0 && (a < 0.001 || a >= 10000) ? v.toExponential(2) : v.toFixed(3);
}

function render({ model, el }) {
  el.classList.add("lsg-root");
  const style = document.createElement("style");
  style.textContent = CSS; // our own CSS, no data in it
  el.appendChild(style);

  const head = make("div", "lsg-head");
  const title = make("span", "lsg-title", "Samples");
  const scope = make("span", "lsg-scope");
  const spacer = make("span", "lsg-spacer");
  const sortLabel = make("label", "lsg-sortlabel", "sort by ");
  const sortSel = make("select", "lsg-sort");
  sortLabel.appendChild(sortSel);
  const dirBtn = make("button", "lsg-dir");
  const prev = make("button", "lsg-prev", "‹ prev");
  const pageInfo = make("span", "lsg-page");
  const next = make("button", "lsg-next", "next ›");
  head.append(title, scope, spacer, sortLabel, dirBtn, prev, pageInfo, next);
  const grid = make("div", "lsg-grid");
  el.append(head, grid);

  let urls = [];
  const tileByRow = new Map();

  function drawHead() {
    scope.textContent = model.get("scope");
    const cols = model.get("sort_columns");
    const current = model.get("sort_by");
    if (sortSel.options.length !== cols.length || [...sortSel.options].some((o, i) => o.value !== cols[i])) {
      sortSel.replaceChildren(...cols.map((c) => {
        const o = make("option", null, SORT_NAMES[c] || c.replace(/_/g, " "));
        o.value = c;
        return o;
      }));
    }
    sortSel.value = current;
    const desc = model.get("descending");
    dirBtn.textContent = desc ? "↓ high first" : "↑ low first";
    dirBtn.title = "toggle ascending / descending";
    const page = model.get("page");
    const pages = model.get("n_pages");
    pageInfo.textContent = `page ${page + 1} of ${pages}`;
    prev.disabled = page <= 0;
    next.disabled = page >= pages - 1;
  }

  function drawFocus() {
    const focus = model.get("focus");
    for (const [row, tile] of tileByRow) tile.classList.toggle("lsg-focus", row === focus);
  }

  function bars(top, labelName) {
    const box = make("div", "lsg-bars");
    for (const [name, p] of top) {
      // the name and its share on one line, the bar below across the tile: long names keep their room
      const n = make("span", "lsg-bname", short(name, 60));
      n.title = name;
      const bar = make("div", "lsg-bar");
      const fill = make("div", "lsg-fill");
      if (name === labelName) fill.classList.add("lsg-is-label");
      fill.style.width = `${Math.max(0, Math.min(100, 100 * p)).toFixed(1)}%`;
      bar.appendChild(fill);
      box.append(n, make("span", "lsg-pct", pct(p)), bar);
    }
    return box;
  }

  function tile(t) {
    const node = make("div", "lsg-tile");
    node.tabIndex = 0;
    node.dataset.row = String(t.row);
    if (t.correct === true) node.classList.add("lsg-right");
    if (t.correct === false) node.classList.add("lsg-wrong");
    if (t.png) {
      const box = make("div", "lsg-thumb");
      const img = document.createElement("img");
      const url = URL.createObjectURL(new Blob([t.png], { type: "image/png" }));
      urls.push(url);
      img.src = url;
      img.width = t.width;
      img.height = t.height;
      img.alt = `sample ${t.id}`;
      box.appendChild(img);
      node.appendChild(box);
    } else if (t.error) {
      const box = make("div", "lsg-thumb");
      box.appendChild(make("div", "lsg-missing", t.error));
      node.appendChild(box);
    } else if (t.text !== null && t.text !== undefined) {
      node.appendChild(make("div", "lsg-text", t.text));
    }
    const id = make("div", "lsg-id", short(t.id, 60));
    id.title = t.id;
    node.appendChild(id);
    const labels = make("div", "lsg-labels");
    if (t.label !== null && t.label !== undefined) {
      const line = make("div", "lsg-line");
      line.append(make("span", "lsg-key", "label "), make("span", "lsg-label", short(t.label, 60)));
      line.title = t.label;
      labels.appendChild(line);
    }
    const pl = make("div", "lsg-line");
    pl.append(make("span", "lsg-key", "predicted "), make("span", "lsg-pred", short(t.predicted, 60)));
    if (t.correct === true) pl.appendChild(make("span", "lsg-mark-right", " ✓"));
    if (t.correct === false) pl.appendChild(make("span", "lsg-mark-wrong", " ✗"));
    pl.title = t.predicted;
    labels.appendChild(pl);
    node.appendChild(labels);
    node.appendChild(bars(t.top, t.label));
    const key = model.get("sort_by");
    node.appendChild(make("div", "lsg-value", `${SORT_NAMES[key] || key.replace(/_/g, " ")} ${fmt(t.value)}`));
    const pick = () => {
      model.set("focus", t.row);
      model.save_changes();
    };
    node.addEventListener("click", pick);
    node.addEventListener("keydown", (e) => {
      if (e.key === "Enter" || e.key === " ") {
        e.preventDefault();
        pick();
      }
    });
    tileByRow.set(t.row, node);
    return node;
  }

  function drawTiles() {
    for (const u of urls) URL.revokeObjectURL(u);
    urls = [];
    tileByRow.clear();
    const tiles = model.get("tiles");
    if (!tiles.length) {
      grid.replaceChildren(make("div", "lsg-empty", "No samples to show."));
      return;
    }
    grid.replaceChildren(...tiles.map(tile));
    drawFocus();
  }

  sortSel.addEventListener("change", () => {
    model.set("sort_by", sortSel.value);
    model.save_changes();
  });
  dirBtn.addEventListener("click", () => {
    model.set("descending", !model.get("descending"));
    model.save_changes();
  });
  const go = (delta) => {
    const page = model.get("page") + delta;
    if (page < 0 || page >= model.get("n_pages")) return;
    model.set("page", page);
    model.save_changes();
  };
  prev.addEventListener("click", () => go(-1));
  next.addEventListener("click", () => go(1));

  const onHead = () => drawHead();
  const onTiles = () => drawTiles();
  const onFocus = () => drawFocus();
  for (const name of ["scope", "sort_columns", "sort_by", "descending", "page", "n_pages"]) {
    model.on(`change:${name}`, onHead);
  }
  model.on("change:tiles", onTiles);
  model.on("change:focus", onFocus);
  drawHead();
  drawTiles();

  return () => {
    for (const name of ["scope", "sort_columns", "sort_by", "descending", "page", "n_pages"]) {
      model.off(`change:${name}`, onHead);
    }
    model.off("change:tiles", onTiles);
    model.off("change:focus", onFocus);
    for (const u of urls) URL.revokeObjectURL(u);
  };
}

export default { render };
