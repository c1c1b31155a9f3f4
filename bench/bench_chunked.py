"""Benchmark the chunked path on a store beyond memory, against baselines measured in the same run.

Usage::

    python bench/bench_chunked.py                   # 10M and 100M rows x 10 classes, float32 (4 GB of logits)
    python bench/bench_chunked.py --sizes 2e6 2e7   # smaller, for a quick look

For each size the script writes a Zarr store into a temporary directory, batch by
batch with :class:`logitscope.chunked.ZarrAppender` (a help desk routing tickets to
10 queues: a class signal plus noise), then times, each in a fresh process:

- floor: one read pass of the same store (every chunk of logits and labels read and
  reduced by dask on its threaded scheduler);
- ``logitscope summary STORE --fit-temperature --json`` (the CLI, in process);

and prints the time of each beside the floor, the summary's peak memory (resident
set of its process) beside the target (under 1 GB), and the time at the largest
size against the smallest (target: linear, the ratio of the sizes). The store is
read back from the page cache when memory allows, as a second pass on the same
machine would be: the floor is read the same way.

With ``--views`` it also measures, in Python, the aggregates a dashboard at the
smallest size would draw from: the confidence histograms of right and wrong samples,
the confusion counts, and one brush (an interval of confidence) recomputing both for
the selection, against the issue's targets (build under 10 s, brush under 300 ms).
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

CLASSES = [f"queue {i}" for i in range(10)]


def write_store(path: Path, n: int, seed: int = 0, batch: int = 1 << 20) -> float:
    """Write ``n`` rows batch by batch, as a model would while predicting; returns the seconds taken."""
    from logitscope.chunked import ZarrAppender

    rng = np.random.default_rng(seed)
    start = time.perf_counter()
    with ZarrAppender(path, CLASSES, np.float32, overwrite=True) as out:
        for lo in range(0, n, batch):
            m = min(batch, n - lo)
            y = rng.integers(0, 10, m)
            z = rng.standard_normal((m, 10), dtype=np.float32) * np.float32(1.5)
            z[np.arange(m), y] += np.float32(4.0)
            out.append(z, labels=y)
    return time.perf_counter() - start


def child(mode: str, store: str) -> None:
    """Run one measured step in this (fresh) process; print seconds and peak resident memory as JSON.

    The imports (dask, zarr, numba's cached kernels) are done before the clock starts and their
    resident memory is reported apart, as ``base_bytes``.
    """
    import contextlib
    import io

    import dask
    import dask.array as da
    import zarr

    from logitscope.analysis import sample_scores
    from logitscope.cli import main

    sample_scores(np.zeros((4, 10), dtype=np.float32), np.zeros(4, dtype=np.int64))  # load the compiled kernels
    base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024  # kilobytes on Linux
    start = time.perf_counter()
    out = None
    if mode == "floor":
        group = zarr.open_group(store, mode="r")
        z, y = da.from_zarr(group["logits"]), da.from_zarr(group["labels"])
        dask.compute(z.sum(axis=1).sum(), y.sum(), scheduler="threads")
    else:
        buf = io.StringIO()
        with contextlib.redirect_stdout(buf):
            code = main(["summary", store, "--fit-temperature", "--json"])
        if code:
            raise SystemExit(code)
        out = json.loads(buf.getvalue())
    took = time.perf_counter() - start
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    print(json.dumps({"seconds": took, "peak_bytes": peak, "base_bytes": base, "summary": out}))


def measure(mode: str, store: Path) -> dict[str, object]:
    res = subprocess.run(
        [sys.executable, __file__, "--child", mode, str(store)], capture_output=True, text=True, check=False
    )
    if res.returncode:
        raise RuntimeError(f"{mode} failed: {res.stderr[-2000:]}")
    return json.loads(res.stdout.strip().splitlines()[-1])


def views(n: int, seed: int = 1) -> list[tuple[str, float, float]]:
    """Aggregates of a dashboard at ``n`` rows, in Python: build once, then one brush."""
    from logitscope import LogitFrame

    rng = np.random.default_rng(seed)
    y = rng.integers(0, 10, n)
    z = rng.standard_normal((n, 10), dtype=np.float32) * np.float32(1.5)
    z[np.arange(n), y] += np.float32(4.0)
    edges = np.linspace(0.0, 1.0, 51)
    start = time.perf_counter()
    frame = LogitFrame(z, labels=y)
    s = frame.sample_scores()
    assert s.correct is not None
    right = np.histogram(s.confidence[s.correct], edges)[0]
    wrong = np.histogram(s.confidence[~s.correct], edges)[0]
    conf = np.bincount(y * 10 + s.predicted, minlength=100)
    t_build = time.perf_counter() - start
    assert right.sum() + wrong.sum() == n and conf.sum() == n
    start = time.perf_counter()
    rows = np.flatnonzero((s.confidence >= 0.5) & (s.confidence < 0.8))  # a brush on the histogram
    c, ok = s.confidence[rows], s.correct[rows]
    np.histogram(c[ok], edges)
    np.histogram(c[~ok], edges)
    np.bincount(y[rows] * 10 + s.predicted[rows], minlength=100)
    t_brush = time.perf_counter() - start
    return [("dashboard aggregates: build (scores, histograms, confusion)", t_build, 10.0),
            (f"dashboard aggregates: one brush ({rows.size:,} rows) to every view", t_brush, 0.3)]  # fmt: skip


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--sizes", type=float, nargs="+", default=[1e7, 1e8])
    parser.add_argument("--dir", help="where to write the stores (default: a temporary directory, removed after)")
    parser.add_argument("--keep", action="store_true", help="keep the stores")
    parser.add_argument("--reuse", action="store_true", help="read stores left by --keep instead of writing them")
    parser.add_argument("--views", action="store_true", help="also time the dashboard aggregates at the smallest size")
    parser.add_argument("--child", nargs=2, metavar=("MODE", "STORE"), help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        child(*args.child)
        return

    root = Path(args.dir) if args.dir else Path(tempfile.mkdtemp(prefix="logitscope-bench-"))
    root.mkdir(parents=True, exist_ok=True)
    sizes = sorted(int(s) for s in args.sizes)
    results = []
    try:
        for n in sizes:
            store = root / f"tickets-{n}.zarr"
            if args.reuse and store.exists():
                from logitscope.chunked import store_info

                assert store_info(store)["rows"] == n
                t_write = float("nan")
            else:
                t_write = write_store(store, n)
            gb = n * 10 * 4 / 1e9
            floor = measure("floor", store)
            summ = measure("summary", store)
            results.append((n, gb, t_write, floor, summ))
            if not args.keep:
                shutil.rmtree(store)
    finally:
        if not args.keep and not args.dir:
            shutil.rmtree(root, ignore_errors=True)

    print(f"cores: {os.cpu_count()}; load average before the run: {os.getloadavg()[0]:.1f}")
    print("times after the imports; peak = the process's largest resident set, of which 'imports' is there before")
    head = f"{'rows':>13} {'logits':>8} {'write':>8} {'floor':>8} {'summary':>8} {'x floor':>8} {'peak MB':>8}"
    print(f"\n{head} {'imports':>8}")
    for n, gb, t_write, floor, summ in results:
        ratio = summ["seconds"] / floor["seconds"]
        peak, base = summ["peak_bytes"] / 2**20, summ["base_bytes"] / 2**20
        print(f"{n:>13,} {gb:>6.1f}GB {t_write:>7.1f}s {floor['seconds']:>7.1f}s {summ['seconds']:>7.1f}s "
              f"{ratio:>8.1f} {peak:>8.0f} {base:>8.0f}")  # fmt: skip
    print("\ntargets")
    lines = []
    for n, _, _, floor, summ in results:
        peak = summ["peak_bytes"] / 2**30
        lines.append((f"summary --fit-temperature peak memory at {n:,} rows under 1 GB", f"{peak:.2f} GB", peak < 1.0))
        lines.append((f"summary --fit-temperature at {n:,} rows against one read pass (floor {floor['seconds']:.1f} s)",
                      f"{summ['seconds'] / floor['seconds']:.1f}x floor", True))  # fmt: skip
    if len(results) > 1:
        (n0, *_, s0), (n1, *_, s1) = results[0], results[-1]
        ratio, linear = s1["seconds"] / s0["seconds"], n1 / n0
        lines.append((f"time at {n1:,} over time at {n0:,} rows (linear: {linear:.0f})", f"{ratio:.1f}",
                      ratio <= 1.25 * linear))  # fmt: skip
    if args.views:
        for name, took, target in views(sizes[0]):
            lines.append((f"{name} at {sizes[0]:,} rows (target {target:g} s)", f"{took:.3f} s", took <= target))
    for name, value, ok in lines:
        print(f"  {'met ' if ok else 'MISS'}  {name}: {value}")
    s = results[-1][4]["summary"]
    print("\nsummary of the largest store:", json.dumps({k: s[k] for k in ("accuracy", "fitted_temperature", "aurc")}))


if __name__ == "__main__":
    main()
