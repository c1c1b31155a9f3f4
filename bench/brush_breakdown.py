"""Where a brush's time goes in chromium, at N x K (default 100,000 x 100).

``bench/bench_dashboard.py`` gives the brush's total (mouse-up until every
linked view shows the selection). This script splits it, per brush, by what
the page sees on its kernel websocket and, with ``--trace``, by what chromium's
main thread does:

- ``sent``: the brush's one message leaves the page;
- ``busy``: the kernel's "busy" status arrives (the round trip through the
  Jupyter server to the kernel and back);
- ``first`` / ``last``: the first and the last widget message of the answer
  arrive, and how many there were and their bytes; before each, ``made``: when
  the kernel made that message (its header's time, to the millisecond). Once
  the page has loaded the module that applies them (``SyncBundle``), one message
  carries every view's update, so ``msgs`` is 1 and first is last;
- ``done``: every view shows the selection (the same condition as the bench);
- ``frame``: with ``--trace``, the longest main-thread task after the mouse-up
  and its style recalculation, layout and paint (milliseconds, with the number
  of elements restyled), and ``main``: the main thread's busy time from the
  mouse-up until every view shows the selection (near ``done`` when the page's
  own work, not the kernel, is what the brush waits for).

All times are milliseconds after the mouse-up. The scenario is the parcel
camera of ``bench/bench_dashboard.py`` (seeded synthetic logits).

Run: ``python bench/brush_breakdown.py [--n 100000] [--k 100] [--brushes 6] [--trace]``.
"""

from __future__ import annotations

import argparse
import json
import shutil
import statistics
import sys
import tempfile
from pathlib import Path
from typing import Any

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))
sys.path.insert(0, str(REPO / "bench"))

# JS, run before the page's own scripts: log every kernel websocket message (arrival time, size, type).
WEBSOCKET_LOG_JS = r"""
window.__lsWs = [];
const Native = window.WebSocket;
function Logged(url, protocols) {
  const ws = protocols === undefined ? new Native(url) : new Native(url, protocols);
  ws.addEventListener('message', (ev) => {
    const t = performance.now();
    let size = 0, head = '';
    if (typeof ev.data === 'string') { size = ev.data.length; head = ev.data.slice(0, 3000); }
    else if (ev.data instanceof ArrayBuffer) {
      size = ev.data.byteLength;
      head = new TextDecoder().decode(new Uint8Array(ev.data, 0, Math.min(3000, size)));
    }
    const type = (head.match(/"msg_type":\s*"([a-z_]+)"/) || [])[1] || '';
    const state = (head.match(/"execution_state":\s*"([a-z]+)"/) || [])[1] || '';
    const date = (head.match(/"date":\s*"([^"]+)"/) || [])[1];
    const made = date ? Date.parse(date) - performance.timeOrigin : NaN;  // the kernel's header time
    window.__lsWs.push({t, size, type, state, made});
  });
  const send = ws.send.bind(ws);
  ws.send = (data) => { window.__lsWs.push({t: performance.now(), sent: true}); return send(data); };
  return ws;
}
Logged.prototype = Native.prototype;
Object.assign(Logged, {CONNECTING: 0, OPEN: 1, CLOSING: 2, CLOSED: 3});
window.WebSocket = Logged;
"""


def _split(log: list[dict[str, Any]], up: float) -> dict[str, float]:
    after = [m for m in log if m["t"] >= up]
    sent = next((m["t"] - up for m in after if m.get("sent")), float("nan"))
    busy = next((m["t"] - up for m in after if m.get("state") == "busy"), float("nan"))
    comms = [m for m in after if m.get("type") == "comm_msg"]
    return {
        "sent": sent,
        "busy": busy,
        "first": comms[0]["t"] - up if comms else float("nan"),
        "last": comms[-1]["t"] - up if comms else float("nan"),
        "made_first": comms[0]["made"] - up if comms else float("nan"),
        "made_last": comms[-1]["made"] - up if comms else float("nan"),
        "messages": float(len(comms)),
        "kB": sum(m["size"] for m in comms) / 1000.0,
    }


def _longest_frame(path: Path, until_ms: float) -> dict[str, float] | None:
    """The longest main-thread task after the mouse-up in a chromium trace, split into its rendering steps.

    Also ``main``: the main thread's time in tasks begun from the mouse-up until ``until_ms`` after it.
    """
    events = json.loads(path.read_text())
    events = events["traceEvents"] if isinstance(events, dict) else events
    ups = [
        e
        for e in events
        if e.get("name") == "EventDispatch" and e.get("args", {}).get("data", {}).get("type") == "mouseup"
    ]
    if not ups:
        return None
    up = ups[-1]
    thread = (up["pid"], up["tid"])
    mine = [e for e in events if (e["pid"], e["tid"]) == thread and e.get("ph") == "X" and e["ts"] >= up["ts"]]
    tasks = [e for e in mine if e.get("name") in ("RunTask", "ThreadControllerImpl::RunTask")]
    if not tasks:
        return None
    task = max(tasks, key=lambda e: e.get("dur", 0))
    inside = [e for e in mine if task["ts"] <= e["ts"] and e["ts"] + e.get("dur", 0) <= task["ts"] + task["dur"]]

    def total(name: str) -> float:
        return sum(e.get("dur", 0) for e in inside if e.get("name") == name) / 1000.0

    # the main thread's work from the mouse-up until then (top-level tasks only, not the ones nested in them)
    tops = [e for e in mine if e.get("name") == task["name"] and e["ts"] <= up["ts"] + until_ms * 1000]
    tops = [e for e in tops if not any(o is not e and o["ts"] <= e["ts"] < o["ts"] + o.get("dur", 0) for o in tops)]
    restyled = sum(e.get("args", {}).get("elementCount", 0) for e in inside if e.get("name") == "UpdateLayoutTree")
    return {
        "at": (task["ts"] - up["ts"]) / 1000.0,
        "ms": task["dur"] / 1000.0,
        "style": total("UpdateLayoutTree"),
        "elements": float(restyled),
        "layout": total("Layout"),
        "paint": total("Paint") + total("PrePaint"),
        "main": sum(e.get("dur", 0) for e in tops) / 1000.0,
    }


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=100_000)
    parser.add_argument("--k", type=int, default=100)
    parser.add_argument("--brushes", type=int, default=6)
    parser.add_argument("--trace", action="store_true", help="record a chromium trace of each brush")
    args = parser.parse_args(argv)

    import bench_dashboard as bd
    from tests.browser.harness import cell, run_cell

    if bd.browser_missing():
        return 2
    cells = [bd.frame_cell(args.n, args.k), "dash = logitscope.explore(frame, relabel_path='marks.json')\ndash"]
    rows: list[dict[str, float]] = []
    traces = Path(tempfile.mkdtemp(prefix="brush-traces-"))
    with bd.notebook_page(cells, "brush-breakdown", WEBSOCKET_LOG_JS) as (browser, page):
        run_cell(page, 0, timeout_ms=600_000)
        bd._render(page, 1, bd.heat_cells(args.k))
        page.evaluate(bd.MOUSEUP_JS)
        area = cell(page, 1).locator(".logitscope-scatter .plotarea_background").first
        area.scroll_into_view_if_needed()
        for i in range(args.brushes):
            x0, y0, x1, y1 = bd._next_rectangle(page, area, i)  # the bench's rectangles
            before = page.evaluate(bd.SIGNATURES_JS, 1)
            page.evaluate("window.__lsWs = []")
            trace = traces / f"brush-{i}.json"
            if args.trace:
                browser.start_tracing(
                    page=page,
                    path=str(trace),
                    categories=["devtools.timeline", "disabled-by-default-devtools.timeline", "toplevel"],
                )
            bd._drag(page, x0, y0, x1, y1)
            done = page.wait_for_function(bd.UPDATED_JS, arg=[1, before], polling="raf", timeout=20_000)
            page.wait_for_function(  # the kernel's idle status has arrived
                "() => window.__lsWs.some((m) => m.state === 'idle' && m.t > window.__lsMouseUp)",
                timeout=20_000,
            )
            row = _split(page.evaluate("window.__lsWs"), float(page.evaluate("window.__lsMouseUp")))
            row["done"] = float(done.json_value())
            if args.trace:
                page.wait_for_timeout(100)
                browser.stop_tracing()
                frame_split = _longest_frame(trace, row["done"])
                if frame_split:
                    row.update({f"frame_{k}": v for k, v in frame_split.items()})
            rows.append(row)
            page.wait_for_timeout(200)

    shutil.rmtree(traces, ignore_errors=True)
    print(f"N = {args.n:,}, K = {args.k}: ms after the mouse-up, per brush")
    head = (
        f"{'brush':>5} {'sent':>6} {'busy':>6} {'made':>6} {'first':>6} {'made':>6} {'last':>6} "
        f"{'msgs':>5} {'kB':>6} {'done':>6}"
    )
    if args.trace:
        head += f"   {'frame at':>8} {'ms':>5} {'style':>6} {'(elts)':>7} {'layout':>7} {'paint':>6} {'main':>6}"
    print(head)
    for i, r in enumerate(rows, 1):
        line = (
            f"{i:>5} {r['sent']:6.1f} {r['busy']:6.1f} {r['made_first']:6.1f} {r['first']:6.1f} "
            f"{r['made_last']:6.1f} {r['last']:6.1f} "
            f"{r['messages']:5.0f} {r['kB']:6.1f} {r['done']:6.1f}"
        )
        if "frame_ms" in r:
            line += (
                f"   {r['frame_at']:8.1f} {r['frame_ms']:5.1f} {r['frame_style']:6.1f} "
                f"{r['frame_elements']:7.0f} {r['frame_layout']:7.1f} {r['frame_paint']:6.1f} {r['frame_main']:6.1f}"
            )
        print(line)
    if rows:
        med = {k: statistics.median(r[k] for r in rows) for k in ("sent", "busy", "first", "last", "done")}
        traced = [r["frame_main"] for r in rows if "frame_main" in r]  # a trace without the mouse-up gives none
        print(
            "median: sent {sent:.1f}, kernel busy {busy:.1f}, first answer {first:.1f}, "
            "last answer {last:.1f}, all views {done:.1f}".format(**med)
            + (f", main thread busy {statistics.median(traced):.1f}" if traced else "")
        )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
