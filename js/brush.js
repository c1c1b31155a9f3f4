// RectangleBrush: a rectangle brush drawn over a bqplot figure (the widget's child), in the browser alone.
//
// The rectangle follows the mouse here, with no message to the kernel while the button is down; on release
// the brush sends its extents in data units once ("box": x0, x1, y0, y1), and a click without a drag sends
// an empty box (the brush removed). bqplot's own brush sends every mouse move, and the widget manager holds
// the release back until the kernel has answered the move before it, so a brush then reaches the kernel one
// round trip late. The figure is drawn inside this widget (as ShownWhenVisible draws its child); a layer over
// it takes the mouse while "active" (rectangle mode) and lets it through to the figure otherwise (lasso).

function childId(ref) {
  const s = String(ref || "");
  return s.startsWith("IPY_MODEL_") ? s.slice("IPY_MODEL_".length) : s;
}

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

// A click moves the mouse less than this (pixels): it removes the brush instead of drawing one.
const CLICK = 3;

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
  layer.appendChild(rect);
  let view = null;
  let gone = false;
  let drag = null;

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

  function onUp(event) {
    if (!drag) return;
    onMove(event);
    const d = drag;
    drag = null;
    window.removeEventListener("mousemove", onMove, true);
    window.removeEventListener("mouseup", onUp, true);
    let box = [];
    if (d.moved) {
      const [x0, x1] = model.get("x_range");
      const [y0, y1] = model.get("y_range");
      const x = (c) => x0 + ((c - d.p.dl) / d.p.dw) * (x1 - x0);
      const y = (r) => y1 - ((r - d.p.dt) / d.p.dh) * (y1 - y0);
      const xs = [x(d.c0), x(d.c1)].sort((a, b) => a - b);
      const ys = [y(d.r0), y(d.r1)].sort((a, b) => a - b);
      box = [xs[0], xs[1], ys[0], ys[1]];
    } else {
      rect.style.display = "none";
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

  model.on("change:box", show);
  model.on("change:x_range", show);
  model.on("change:y_range", show);
  model.on("change:active", activate);
  const resize = new ResizeObserver(() => show());
  resize.observe(el);

  (async () => {
    const manager = model.widget_manager;
    const child = await manager.get_model(childId(model.get("child")));
    const made = await manager.create_view(child, {});
    if (gone) {
      made.remove();
      return;
    }
    view = made;
    attach(view, el);
    el.appendChild(layer);
    activate();
  })();

  return () => {
    gone = true;
    resize.disconnect();
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
