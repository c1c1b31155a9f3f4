// SampleCard: the focused sample, large. Data strings go through textContent only; long names and ids are
// cut in the middle for display, with the full text in the title attribute (shown on hover).

const CSS = `
.lsc-root { font-family: var(--jp-ui-font-family, system-ui, sans-serif); font-size: 12px;
  color: var(--jp-ui-font-color1, #1f2328); border: 1px solid var(--jp-border-color2, #dde1e5);
  border-radius: 8px; padding: 10px 12px; background: var(--jp-layout-color1, #fff); min-width: 360px;
  box-sizing: border-box; overflow: auto; }
.lsc-empty { color: var(--jp-ui-font-color2, #59636e); padding: 8px 2px; }
.lsc-body { display: flex; flex-wrap: wrap; gap: 14px; align-items: flex-start; }
.lsc-view { flex: 0 0 auto; display: flex; align-items: center; justify-content: center;
  background: var(--jp-layout-color2, #f3f4f6); border-radius: 6px; padding: 6px; min-width: 120px; }
.lsc-view img { image-rendering: pixelated; display: block; max-width: 320px; height: auto; }
.lsc-text { flex: 1 1 260px; max-width: 520px; max-height: 260px; overflow: auto; white-space: pre-wrap;
  overflow-wrap: anywhere; line-height: 1.45; font-size: 12.5px; background: var(--jp-layout-color2, #f3f4f6);
  border-radius: 6px; padding: 8px 10px; }
.lsc-missing { color: var(--jp-ui-font-color2, #59636e); padding: 10px; max-width: 240px; overflow-wrap: anywhere; }
.lsc-info { flex: 1 1 200px; min-width: 200px; display: flex; flex-direction: column; gap: 8px; }
.lsc-id { font-family: var(--jp-code-font-family, ui-monospace, monospace); font-size: 13px; font-weight: 600;
  overflow-wrap: anywhere; }
.lsc-verdict { display: flex; flex-wrap: wrap; gap: 6px 14px; font-size: 12.5px; }
.lsc-key { color: var(--jp-ui-font-color2, #59636e); }
.lsc-val { font-weight: 600; overflow-wrap: anywhere; }
.lsc-right { color: var(--jp-success-color1, #1a7f37); font-weight: 600; }
.lsc-wrong { color: var(--jp-error-color1, #cf222e); font-weight: 600; }
.lsc-scores { display: grid; grid-template-columns: repeat(auto-fill, minmax(96px, 1fr)); gap: 4px 10px; }
.lsc-score { display: flex; flex-direction: column; }
.lsc-score .lsc-num { font-variant-numeric: tabular-nums; font-size: 13px; }
.lsc-h { font-weight: 600; font-size: 11px; text-transform: uppercase; letter-spacing: 0.04em;
  color: var(--jp-ui-font-color2, #59636e); margin-top: 2px; }
.lsc-bars { display: grid; grid-template-columns: minmax(60px, max-content) minmax(80px, 1fr) 48px;
  align-items: center; gap: 3px 8px; }
.lsc-bname { white-space: nowrap; overflow: hidden; text-overflow: ellipsis; max-width: 220px; }
.lsc-bname.lsc-is-label { font-weight: 600; }
.lsc-bar { height: 9px; background: var(--jp-layout-color3, #e3e6ea); border-radius: 3px; overflow: hidden; }
.lsc-fill { height: 100%; background: var(--jp-brand-color1, #1f6fd1); }
.lsc-fill.lsc-is-label { background: var(--jp-success-color1, #1a7f37); }
.lsc-pct { text-align: right; font-variant-numeric: tabular-nums; color: var(--jp-ui-font-color2, #59636e); }
.lsc-note { color: var(--jp-ui-font-color2, #59636e); font-size: 11px; }
.lsc-meta { border-collapse: collapse; font-size: 12px; align-self: flex-start; }
.lsc-meta td { padding: 2px 10px 2px 0; vertical-align: top; overflow-wrap: anywhere; }
.lsc-meta td:first-child { color: var(--jp-ui-font-color2, #59636e); white-space: nowrap; }
`;

// Longest text shown in the card; a longer one ends with a note of what was left out.
const MAX_TEXT = 20000;

function num(v) {
  if (v === null || v === undefined) return "";
  if (Number.isInteger(v)) return String(v);
  const a = Math.abs(v);
  return a !== 0 && (a < 0.001 || a >= 10000) ? v.toExponential(3) : v.toFixed(4);
}

function pct(p) {
  const v = 100 * p;
  return (v >= 99.95 || v < 0.05 ? v.toFixed(0) : v.toFixed(1)) + "%";
}

function render({ model, el }) {
  el.classList.add("lsc-root");
  const style = document.createElement("style");
  style.textContent = CSS; // our own CSS, no data in it
  const box = make("div", "lsc-box");
  el.append(style, box);
  let url = null;

  function draw() {
    if (url) URL.revokeObjectURL(url);
    url = null;
    const s = model.get("sample");
    if (!s || s.row === undefined) {
      box.replaceChildren(make("div", "lsc-empty", "Click a sample in the gallery to see it here."));
      return;
    }
    const body = make("div", "lsc-body");
    if (s.png) {
      const view = make("div", "lsc-view");
      const img = document.createElement("img");
      url = URL.createObjectURL(new Blob([s.png], { type: "image/png" }));
      img.src = url;
      img.width = s.width;
      img.height = s.height;
      img.alt = `sample ${s.id}`;
      view.appendChild(img);
      body.appendChild(view);
    } else if (s.error) {
      const view = make("div", "lsc-view");
      view.appendChild(make("div", "lsc-missing", s.error));
      body.appendChild(view);
    } else if (s.text !== null && s.text !== undefined) {
      const text = String(s.text);
      const more = text.length - MAX_TEXT;
      const shown = more > 0 ? `${text.slice(0, MAX_TEXT)} … (${more} more characters)` : text;
      body.appendChild(make("div", "lsc-text", shown));
    }

    const info = make("div", "lsc-info");
    info.appendChild(named("div", "lsc-id", s.id, 80));
    const verdict = make("div", "lsc-verdict");
    if (s.label !== null && s.label !== undefined) {
      const l = make("span");
      l.append(make("span", "lsc-key", "label "), named("span", "lsc-val lsc-label", s.label, 48));
      verdict.appendChild(l);
    }
    const p = make("span");
    p.append(make("span", "lsc-key", "predicted "), named("span", "lsc-val lsc-pred", s.predicted, 48));
    if (s.correct === true) p.appendChild(make("span", "lsc-right", " ✓ right"));
    if (s.correct === false) p.appendChild(make("span", "lsc-wrong", " ✗ wrong"));
    verdict.appendChild(p);
    verdict.appendChild(make("span", "lsc-key", `row ${s.row} · T = ${num(model.get("temperature"))}`));
    info.appendChild(verdict);

    const scores = make("div", "lsc-scores");
    for (const [name, v] of s.scores) {
      const c = make("div", "lsc-score");
      c.append(make("span", "lsc-key", name), make("span", "lsc-num", num(v)));
      scores.appendChild(c);
    }
    info.appendChild(scores);

    const shown = s.probabilities.length;
    info.appendChild(
      make("div", "lsc-h", shown < s.n_classes ? `top ${shown} of ${s.n_classes} classes` : "class probabilities"),
    );
    const bars = make("div", "lsc-bars");
    for (const [name, prob, isLabel] of s.probabilities) {
      const n = make("span", "lsc-bname", short(name, 60));
      n.title = name; // the column cuts long names; the full name on hover
      const bar = make("div", "lsc-bar");
      const fill = make("div", "lsc-fill");
      fill.style.width = `${Math.max(0, Math.min(100, 100 * prob)).toFixed(2)}%`;
      if (isLabel) {
        n.classList.add("lsc-is-label");
        fill.classList.add("lsc-is-label");
      }
      bar.appendChild(fill);
      bars.append(n, bar, make("span", "lsc-pct", pct(prob)));
    }
    info.appendChild(bars);
    if (s.label_outside) {
      const [name, prob, rank] = s.label_outside;
      const note = make("div", "lsc-note", `given label ${short(name, 60)}: ${pct(prob)}, rank ${rank} of ${s.n_classes}`);
      note.title = name;
      info.appendChild(note);
    }
    if (s.meta.length) {
      info.appendChild(make("div", "lsc-h", "metadata"));
      const table = make("table", "lsc-meta");
      for (const [k, v] of s.meta) {
        const tr = make("tr");
        tr.append(named("td", null, k, 40), named("td", null, v, 200));
        table.appendChild(tr);
      }
      info.appendChild(table);
    }
    body.appendChild(info);
    box.replaceChildren(body);
  }

  model.on("change:sample", draw);
  model.on("change:temperature", draw);
  draw();
  return () => {
    model.off("change:sample", draw);
    model.off("change:temperature", draw);
    if (url) URL.revokeObjectURL(url);
  };
}

export default { render };
