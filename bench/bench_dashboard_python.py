"""The dashboard at 10M rows, in Python: building every view and one brush reaching all of them.

Usage::

    python bench/bench_dashboard_python.py               # 10M x 10 float32
    python bench/bench_dashboard_python.py --n 2e6 --k 20

Scenario (invented): a mail room's sorting line reads 10 million postcode digits a day; the
logits are seeded synthetic numbers (a class signal plus noise), not a real model. In one
process the script times

- floor: one streaming pass over the logit matrix (``z.sum(axis=1)``), in the same run;
- build: ``Dashboard(frame)`` (every view of the Explore tab drawn from aggregates: the
  scatter paints an image, the histogram and the confusion matrix come from counts, the
  gallery ranks only the rows of its page);
- brush: a rectangle brush on the score scatter until every linked view has its new state
  (median of several brushes of about 15 % of the rows each);

and prints each beside its target (build under 10 s, brush under 300 ms) and the floor.
The browser side is measured by ``bench/bench_dashboard.py``.
"""

from __future__ import annotations

import argparse
import statistics
import tempfile
import time
from pathlib import Path

import numpy as np

TARGET_BUILD_S = 10.0
TARGET_BRUSH_S = 0.3


def sorting_line_frame(n: int, k: int, seed: int = 11):  # type: ignore[no-untyped-def]
    """Seeded synthetic logits of the sorting-line scenario (see the module docstring)."""
    import logitscope

    rng = np.random.default_rng(seed)
    labels = rng.integers(0, k, n)
    z = rng.normal(size=(n, k)).astype(np.float32)
    z[np.arange(n), labels] += 2.5
    return logitscope.LogitFrame(z, labels=labels, copy=False)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=float, default=1e7)
    parser.add_argument("--k", type=int, default=10)
    parser.add_argument("--brushes", type=int, default=5)
    args = parser.parse_args()
    from logitscope.widgets import Dashboard

    n, k = int(args.n), int(args.k)
    frame = sorting_line_frame(n, k)
    z = frame.logits
    t = time.perf_counter()
    z.sum(axis=1)
    floor = time.perf_counter() - t
    t = time.perf_counter()
    dash = Dashboard(frame, relabel_path=Path(tempfile.mkdtemp()) / "marks.json")
    build = time.perf_counter() - t
    times, sizes = [], []
    for lo in np.linspace(0.3, 0.6, args.brushes):
        t = time.perf_counter()
        rows = dash.scatter.select_box((float(lo), float(lo) + 0.1), (0.0, 10.0))
        times.append(time.perf_counter() - t)
        sizes.append(rows.size)
        assert dash.gallery.n_shown == rows.size  # the brush reached the gallery
    brush = statistics.median(times)
    print(f"dashboard in Python at {n:,} x {k} float32 (floor: one streaming pass, {floor:.3f} s)")
    print(f"{'case':<44} {'time s':>8} {'target s':>9} {'x floor':>8}")
    build_row = f"{'build (every view of the Explore tab)':<44} {build:>8.2f} {'< ' + str(TARGET_BUILD_S):>9}"
    print(f"{build_row} {build / floor:>8.1f}")
    label = f"brush to all views (median, ~{int(np.median(sizes)):,} rows)"
    print(f"{label:<44} {brush:>8.3f} {'< ' + str(TARGET_BRUSH_S):>9} {brush / floor:>8.1f}")


if __name__ == "__main__":
    main()
