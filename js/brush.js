// RectangleBrush: a rectangle brush drawn over a bqplot figure (the widget's child), in the browser alone.
//
// The rectangle follows the mouse here, with no message to the kernel while the button is down; on release
// the brush sends its extents in data units once ("box": x0, x1, y0, y1), and a click without a drag sends
// an empty box (the brush removed). bqplot's own brush sends every mouse move, and the widget manager holds
// the release back until the kernel has answered the move before it, so a brush then reaches the kernel one
// round trip late. The selection is painted here at once from the picture of every point ("points": the
// points in the box at full strength, the rest faded) and gives way to the kernel's own picture, computed
// over every row, as soon as bqplot shows it. The figure is drawn inside this widget (as ShownWhenVisible
// draws its child); a layer over it takes the mouse while "active" (rectangle mode) and lets it through to
// the figure otherwise (lasso).

// A click moves the mouse less than this (pixels): it removes the brush instead of drawing one.
const CLICK = 3;
// Milliseconds the painting of a brush waits for the kernel's picture before it gives way to bqplot's again.
const ANSWER_WAIT = 5000;

function render({ model, el }) {
  el.classList.add("ls-brush");
  el.style.position = "relative";
  const layer = make("div", "ls-brush-layer");
  Object.assign(layer.style, { position: "absolute", left: "0", top: "0", right: "0", bottom: "0", zIndex: "2" });
  const rect = make("div", "ls-brush-rect");
  Object.assign(rect.style, {
    position: "absolute",
    display: "none",
    boxSizing: "border-box",
    pointerEvents: "none",
    background: "rgba(127, 156, 192, 0.2)",
    border: "1px solid #7f9cc0",
  });
  // The brushed selection painted here at once, until the kernel's own picture of it arrives (see answer()).
  const paint = make("canvas", "ls-brush-paint");
  Object.assign(paint.style, { position: "absolute", display: "none", pointerEvents: "none" });
  layer.appendChild(paint);
  layer.appendChild(rect);
  let view = null;
  let gone = false;
  let drag = null;
  let full = null; // the picture of every point, decoded: { image, alpha (Uint8ClampedArray), width, height }
  let hidden = null; // bqplot's image elements hidden while the painting stands in for them
  let timer = null;

  // The plot area in this element's pixels (bqplot's background rectangle of the plot: where a drag may go),
  // and where x_range and y_range lie (the figure's first image mark spans them; bqplot draws the scales'
  // range a few pixels inside the background when a mark asks for room, so the background alone is not it).
  function area() {
    const bg = el.querySelector(".plotarea_background");
    if (!bg) return null;
    const a = bg.getBoundingClientRect();
    const b = el.getBoundingClientRect();
    if (a.width <= 0 || a.height <= 0) return null;
    const image = el.querySelector("image");
    const d = image ? image.getBoundingClientRect() : a;
    if (d.width <= 0 || d.height <= 0) return null;
    return {
      left: a.left - b.left,
      top: a.top - b.top,
      width: a.width,
      height: a.height,
      dl: d.left - b.left,
      dt: d.top - b.top,
      dw: d.width,
      dh: d.height,
      ox: b.left,
      oy: b.top,
    };
  }

  function place(p, c0, c1, r0, r1) {
    Object.assign(rect.style, {
      display: "block",
      left: `${Math.min(c0, c1)}px`,
      top: `${Math.min(r0, r1)}px`,
      width: `${Math.abs(c1 - c0)}px`,
      height: `${Math.abs(r1 - r0)}px`,
    });
  }

  // The box of the model (data units) drawn, or nothing when it is empty.
  function show() {
    const box = model.get("box") || [];
    const p = area();
    if (drag) return;
    if (box.length !== 4 || !p) {
      rect.style.display = "none";
      return;
    }
    const [x0, x1] = model.get("x_range");
    const [y0, y1] = model.get("y_range");
    const col = (x) => p.dl + ((x - x0) / (x1 - x0)) * p.dw;
    const row = (y) => p.dt + ((y1 - y) / (y1 - y0)) * p.dh;
    place(p, col(box[0]), col(box[1]), row(box[2]), row(box[3]));
  }

  function activate() {
    layer.style.pointerEvents = model.get("active") ? "auto" : "none";
    if (!model.get("active")) rect.style.display = "none";
    else show();
  }

  function local(p, event) {
    const c = Math.min(Math.max(event.clientX - p.ox, p.left), p.left + p.width);
    const r = Math.min(Math.max(event.clientY - p.oy, p.top), p.top + p.height);
    return [c, r];
  }

  function onMove(event) {
    if (!drag) return;
    const [c, r] = local(drag.p, event);
    drag.c1 = c;
    drag.r1 = r;
    if (Math.abs(c - drag.c0) >= CLICK || Math.abs(r - drag.r0) >= CLICK) drag.moved = true;
    if (drag.moved) place(drag.p, drag.c0, c, drag.r0, r);
    event.preventDefault();
  }

  // Decode the picture of every point (the "points" image widget) once it changes, so a release paints at once.
  async function prepare() {
    const ref = model.get("points");
    full = null;
    if (!ref) return;
    const points = await model.widget_manager.get_model(childId(ref));
    const value = points.get("value");
    if (!value || !value.byteLength) return;
    const bytes = value.buffer ? new Uint8Array(value.buffer, value.byteOffset, value.byteLength) : value;
    const url = URL.createObjectURL(new Blob([bytes], { type: "image/png" }));
    try {
      const image = new Image();
      image.src = url;
      await image.decode();
      const probe = document.createElement("canvas");
      probe.width = image.naturalWidth;
      probe.height = image.naturalHeight;
      const ctx = probe.getContext("2d");
      ctx.drawImage(image, 0, 0);
      const data = ctx.getImageData(0, 0, probe.width, probe.height).data;
      const alpha = new Uint8ClampedArray(probe.width * probe.height);
      for (let i = 0; i < alpha.length; i++) alpha[i] = data[4 * i + 3];
      if (model.get("points") === ref) full = { image, alpha, width: probe.width, height: probe.height };
    } finally {
      URL.revokeObjectURL(url);
    }
  }

  // The kernel's picture arrived (bqplot changed an image): it takes over from the painting.
  function answer() {
    if (timer !== null) clearTimeout(timer);
    timer = null;
    paint.style.display = "none";
    if (hidden) hidden.forEach((image) => (image.style.visibility = ""));
    hidden = null;
  }

  // Paint at once what the kernel will draw for this brush: every point faded, those in ``box`` (data
  // units; null: the brush removed) at full strength; a box holding no point selects nothing.
  function instant(box) {
    const p = area();
    const images = Array.from(el.querySelectorAll("image"));
    if (!full || !p || images.length < 1) return;
    const { image, alpha, width: W, height: H } = full;
    const [x0, x1] = model.get("x_range");
    const [y0, y1] = model.get("y_range");
    let cut = null;
    if (box) {
      const c0 = Math.max(0, Math.floor(((box[0] - x0) / (x1 - x0)) * W));
      const c1 = Math.min(W, Math.floor(((box[1] - x0) / (x1 - x0)) * W) + 1);
      const r0 = Math.max(0, Math.floor(((y1 - box[3]) / (y1 - y0)) * H));
      const r1 = Math.min(H, Math.floor(((y1 - box[2]) / (y1 - y0)) * H) + 1);
      let any = false;
      for (let r = r0; r < r1 && !any; r++) {
        for (let c = c0; c < c1; c++) {
          if (alpha[r * W + c] > 0) {
            any = true;
            break;
          }
        }
      }
      if (any) cut = [c0, c1, r0, r1];
    }
    paint.width = W;
    paint.height = H;
    Object.assign(paint.style, {
      left: `${p.dl}px`,
      top: `${p.dt}px`,
      width: `${p.dw}px`,
      height: `${p.dh}px`,
      display: "block",
    });
    const ctx = paint.getContext("2d");
    ctx.clearRect(0, 0, W, H);
    if (cut) {
      const [c0, c1, r0, r1] = cut;
      ctx.globalAlpha = model.get("faded");
      ctx.drawImage(image, 0, 0);
      ctx.globalAlpha = 1; // the points in the box over the faded ones, as the view draws its selection
      ctx.drawImage(image, c0, r0, c1 - c0, r1 - r0, c0, r0, c1 - c0, r1 - r0);
    } else {
      ctx.drawImage(image, 0, 0);
    }
    if (hidden) hidden.forEach((im) => (im.style.visibility = ""));
    hidden = images;
    images.forEach((im) => (im.style.visibility = "hidden"));
    if (timer !== null) clearTimeout(timer);
    timer = setTimeout(answer, ANSWER_WAIT); // no answer (the kernel gone, say): bqplot's picture again
  }

  function onUp(event) {
    if (!drag) return;
    onMove(event);
    const d = drag;
    drag = null;
    window.removeEventListener("mousemove", onMove, true);
    window.removeEventListener("mouseup", onUp, true);
    const had = (model.get("box") || []).length === 4; // this view's own selection is on screen
    let box = [];
    if (d.moved) {
      const [x0, x1] = model.get("x_range");
      const [y0, y1] = model.get("y_range");
      const x = (c) => x0 + ((c - d.p.dl) / d.p.dw) * (x1 - x0);
      const y = (r) => y1 - ((r - d.p.dt) / d.p.dh) * (y1 - y0);
      const xs = [x(d.c0), x(d.c1)].sort((a, b) => a - b);
      const ys = [y(d.r0), y(d.r1)].sort((a, b) => a - b);
      box = [xs[0], xs[1], ys[0], ys[1]];
      instant(box);
    } else {
      rect.style.display = "none";
      if (had) instant(null); // a click removes this view's own selection only
    }
    model.set("box", box);
    model.save_changes();
  }

  layer.addEventListener("mousedown", (event) => {
    if (event.button !== 0 || !model.get("active")) return;
    const p = area();
    if (!p) return;
    const c = event.clientX - p.ox;
    const r = event.clientY - p.oy;
    if (c < p.left || c > p.left + p.width || r < p.top || r > p.top + p.height) return; // on an axis
    drag = { p, c0: c, r0: r, c1: c, r1: r, moved: false };
    window.addEventListener("mousemove", onMove, true);
    window.addEventListener("mouseup", onUp, true);
    event.preventDefault();
  });

  model.on("change:points", prepare);
  model.on("change:box", show);
  model.on("change:x_range", show);
  model.on("change:y_range", show);
  model.on("change:active", activate);
  const resize = new ResizeObserver(() => show());
  resize.observe(el);
  const changes = new MutationObserver((records) => {
    if (hidden && records.some((r) => r.target.localName === "image" || r.addedNodes.length)) answer();
  });

  (async () => {
    const made = await childView(model, () => gone);
    if (!made) return;
    view = made;
    attach(view, el);
    el.appendChild(layer);
    changes.observe(view.el, { attributes: true, attributeFilter: ["href"], childList: true, subtree: true });
    activate();
    prepare();
  })();

  return () => {
    gone = true;
    resize.disconnect();
    changes.disconnect();
    if (timer !== null) clearTimeout(timer);
    window.removeEventListener("mousemove", onMove, true);
    window.removeEventListener("mouseup", onUp, true);
    if (view) {
      const lumino = view.luminoWidget || view.pWidget;
      if (lumino && lumino.isAttached) lumino.dispose();
      else view.remove();
    }
  };
}

export default { render };
