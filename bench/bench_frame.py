"""What building a LogitFrame costs, with its own copy of the logits and without, against a streaming floor.

Usage::

    python bench/bench_frame.py            # N = 1,000,000, K = 100, float32
    python bench/bench_frame.py --n 200000 --k 1000

A frame copies the arrays it is given by default (so writing into the caller's array cannot
change it); ``copy=False`` shares the logit matrix. Both run the same validation: a look at
the first rows for probabilities passed as logits, and the finiteness check, which rides on the
per-sample scores at the frame's temperature (computed at once and kept, see ``LogitFrame``).
So a frame's build time includes its scores, and ``frame.sample_scores()`` afterwards is free;
``sample_scores(z, y)`` alone is printed beside it. Baseline, measured in the same run:
``z.sum(axis=1)``, one streaming pass over the matrix (the memory-bandwidth floor), and
``z.copy()``. Printed: best-of-``--repeat`` wall times, their ratios to the floor, and the peak
memory each allocates (tracemalloc) as a multiple of the matrix. Expected (not asserted
anywhere): the copy adds about one ``z.copy()`` and exactly one matrix of memory;
``copy=False`` adds the scores' memory (81 bytes a row) and nothing else beyond O(N).
"""

from __future__ import annotations

import argparse
import time
import tracemalloc
from collections.abc import Callable

import numpy as np

from logitscope import LogitFrame
from logitscope.analysis import sample_scores


def best_of(fn: Callable[[], object], repeat: int) -> float:
    best = float("inf")
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - start)
    return best


def peak_bytes(fn: Callable[[], object]) -> int:
    tracemalloc.start()
    tracemalloc.reset_peak()
    try:
        kept = fn()  # keep the result alive while the peak is read: its own arrays count
        _, peak = tracemalloc.get_traced_memory()
        del kept
    finally:
        tracemalloc.stop()
    return peak


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--n", type=int, default=1_000_000)
    parser.add_argument("--k", type=int, default=100)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()

    rng = np.random.default_rng(0)
    # a parcel-sorting camera's logits: a class signal plus noise, float32
    y = rng.integers(0, args.k, args.n)
    z = rng.standard_normal((args.n, args.k), dtype=np.float32) * np.float32(2.0)
    z[np.arange(args.n), y] += np.float32(4.0)
    mb = z.nbytes / 2**20
    print(f"N = {args.n:,}, K = {args.k}, float32 logits: {mb:.0f} MiB")
    z.sum(axis=1)  # page the matrix in

    cases: list[tuple[str, Callable[[], object]]] = [
        ("floor: z.sum(axis=1)", lambda: z.sum(axis=1)),
        ("z.copy()", lambda: z.copy()),
        ("sample_scores(z, y) alone", lambda: sample_scores(z, y)),
        ("LogitFrame(z, labels=y)  (own copy, the default)", lambda: LogitFrame(z, labels=y)),
        ("LogitFrame(z, labels=y, copy=False)", lambda: LogitFrame(z, labels=y, copy=False)),
    ]
    times = {name: best_of(fn, args.repeat) for name, fn in cases}
    floor = times[cases[0][0]]
    print(f"{'':50s} {'time':>9s} {'x floor':>8s} {'peak memory':>12s} {'x matrix':>9s}")
    for name, fn in cases:
        peak = peak_bytes(fn)
        print(
            f"{name:50s} {times[name]:8.3f}s {times[name] / floor:8.2f} {peak / 2**20:10.0f}MB {peak / z.nbytes:9.2f}"
        )
    copied, shared = times[cases[3][0]], times[cases[4][0]]
    print(
        f"\nthe copy costs {copied - shared:.3f} s ({(copied - shared) / floor:.2f} floor passes, "
        f"{(copied - shared) / times['z.copy()']:.2f} x z.copy()) and one matrix of memory ({mb:.0f} MiB)"
    )


if __name__ == "__main__":
    main()
