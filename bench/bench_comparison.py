"""Benchmark the checkpoint comparison view in the kernel against baselines measured in the same run.

Usage::

    python bench/bench_comparison.py              # N = 100,000, K = 100, float32
    python bench/bench_comparison.py --n 200000 --k 1000

Baselines:

- floor: one streaming pass ``z.sum(axis=1)`` over one checkpoint's logits;
- analysis: :func:`logitscope.checkpoints.compare_frames` (alignment by id of B in
  another row order, flip table, McNemar, per class), what the view renders;
- select: ``state.select(rows)`` with no view attached.

Measured: building the view (which reads both frames' confidences and paints the
scatter image), a click on a flip-table cell, a click on a class, and a rectangle
brush over a quarter of the plot (each computes the rows over all N rows in
Python and repaints the selected points). Targets (printed, never asserted in
unit tests): the view built within 3x the analysis time, and a click or brush
within 40 floor passes. The browser side (the image and the table reaching the
page) is measured by bench/bench_dashboard.py's style of test, not here.
"""

from __future__ import annotations

import argparse
import time
from collections.abc import Callable

import numpy as np

from logitscope import LogitFrame
from logitscope.checkpoints import compare_frames
from logitscope.widgets import CheckpointComparisonView, SharedState


def best_of(fn: Callable[[], object], repeat: int) -> float:
    best = float("inf")
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - start)
    return best


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=100_000)
    parser.add_argument("--k", type=int, default=100)
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args()
    rng = np.random.default_rng(0)
    n, k = args.n, args.k
    y = rng.integers(0, k, n)
    za = rng.normal(size=(n, k)).astype(np.float32)
    za[np.arange(n), y] += 3.0
    zb = za + rng.normal(scale=1.0, size=(n, k)).astype(np.float32)
    order = rng.permutation(n)
    ids = np.arange(n)
    a = LogitFrame(za, labels=y, ids=ids)
    b = LogitFrame(zb[order], labels=y[order], ids=ids[order])

    # warm-up: the first call compiles the numba kernels; it is not what a user waits for twice
    compare_frames(LogitFrame(za[:50], labels=y[:50], ids=ids[:50]), LogitFrame(zb[:50], labels=y[:50], ids=ids[:50]))
    floor = best_of(lambda: za.sum(axis=1), args.repeat)
    analysis = best_of(lambda: compare_frames(a, b), max(1, args.repeat // 2))
    comparison = compare_frames(a, b)
    build = best_of(lambda: CheckpointComparisonView(comparison), max(1, args.repeat // 2))
    view = CheckpointComparisonView(comparison)
    state = SharedState(n)
    rows = comparison.flips.rows("broken") if comparison.flips is not None else np.arange(10)
    select = best_of(lambda: state.select(rows if state.rows.size == 0 else None), args.repeat)

    def toggle_cell() -> None:
        view.select_cell("broken" if view.selected_cell != "broken" else "fixed")

    def toggle_class() -> None:
        view.select_class(3 if view.selected_class != 3 else 4)

    # a box from the median confidence up on both axes: about a quarter of the points, or more
    mid_a = float(np.median(comparison.a.sample_scores().confidence))
    mid_b = float(np.median(comparison.b.sample_scores().confidence))
    boxes = [((mid_a, 1.0), (mid_b, 1.0)), ((0.0, mid_a), (0.0, mid_b))]

    def toggle_box() -> None:
        boxes.reverse()
        view.select_box(*boxes[0])

    cell = best_of(toggle_cell, args.repeat)
    klass = best_of(toggle_class, args.repeat)
    box = best_of(toggle_box, args.repeat)
    brushed = int(view.state.rows.size)

    print(f"N = {n:,}, K = {k}, float32; best of {args.repeat}")
    print(f"  floor z.sum(axis=1)            {1e3 * floor:8.2f} ms")
    print(f"  analysis compare_frames        {1e3 * analysis:8.2f} ms")
    print(f"  state.select alone             {1e3 * select:8.2f} ms")
    print(f"  build the view                 {1e3 * build:8.2f} ms  = {build / analysis:5.2f} x analysis (target <= 3)")
    print(f"  (the last brush selected {brushed:,} rows)")
    for name, t in (("flip-table cell click", cell), ("class click", klass), ("rectangle brush", box)):
        print(f"  {name:<30} {1e3 * t:8.2f} ms  = {t / floor:5.1f} floor passes (target <= 40)")


if __name__ == "__main__":
    main()
