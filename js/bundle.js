// SyncBundle: the state updates of many widgets, sent by the kernel in one message, applied together.
//
// A new selection changes a dozen widgets at once (bars, lines, images, texts). Sent one message per
// widget, the browser handles each message in a task of its own and draws a frame between two of them.
// Here they come as one message, and every model takes its update in the same task, so the page draws
// once. Each update goes through the model's own handler of an "update" message (its deserialisers
// and its queue of state changes), exactly as if it had come on the model's own channel.

async function applyUpdates(manager, updates, buffers) {
  const models = await Promise.all(updates.map((u) => manager.get_model(u.model_id).catch(() => null)));
  let start = 0;
  updates.forEach((u, i) => {
    const paths = u.buffer_paths || [];
    const part = buffers.slice(start, start + paths.length);
    start += paths.length;
    const target = models[i];
    if (!target) return; // closed in the meantime: nothing to update
    target._handle_comm_msg({
      content: { data: { method: "update", state: u.state, buffer_paths: paths } },
      buffers: part,
      parent_header: {},
    });
  });
}

function initialize({ model }) {
  model.on("msg:custom", (content, buffers) => {
    if (content && content.kind === "updates") applyUpdates(model.widget_manager, content.updates, buffers || []);
  });
  // the kernel sends bundles only once a page has said it can apply them
  model.set("ready", true);
  model.save_changes();
}

export default { initialize };
