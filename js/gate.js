// ShownWhenVisible: draws its child widget only once its own box has a size on the page.
//
// A bqplot figure drawn while it is hidden (a notebook in a background JupyterLab tab, restored after a
// page reload, say) measures its box as 0 x 0, draws its plot area at a negative size and fills the console
// with errors. This module waits until its element is laid out (a ResizeObserver reports a positive width),
// then asks the widget manager for the child's view and attaches it as JupyterLab attaches any output
// (lumino's Widget.attach, so tab bars and other lumino parts get their events).

function render({ model, el }) {
  el.classList.add("ls-gate");
  let view = null;
  let pending = false;
  let gone = false;

  async function show() {
    if (view || pending || gone) return;
    const box = el.getBoundingClientRect();
    if (box.width <= 0 || !el.isConnected) return; // hidden: wait for the next resize
    pending = true;
    try {
      const made = await childView(model, () => gone);
      if (!made) return;
      view = made;
      attach(view, el);
      model.set("shown", true);
      model.save_changes();
    } finally {
      pending = false;
    }
  }

  const watch = new ResizeObserver(() => {
    show();
  });
  watch.observe(el);
  show();

  return () => {
    gone = true;
    watch.disconnect();
    if (view) {
      const lumino = view.luminoWidget || view.pWidget;
      if (lumino && lumino.isAttached) lumino.dispose();
      else view.remove();
    }
  };
}

export default { render };
