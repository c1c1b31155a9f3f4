"""Benchmark the report and the summary against one streaming pass over the same data, measured in the same run.

Usage::

    python bench/bench_report.py            # every case at the issue's sizes
    python bench/bench_report.py --scale 0.1  # every size a tenth, for a quick look

Cases, each in a fresh process (imports and numba's cached kernels loaded before the clock starts):

- ``report 1M x 100``: :func:`logitscope.report.write_report` of an in-memory float32 frame with
  ``fit_temperature=True, target_accuracy=0.98`` (target under 5 s; peak memory at most 1.5 times the logit
  matrix);
- ``report 5M x 2``: the same (target under 10 s);
- ``summary 2M x 100``: ``LogitFrame.summary()`` of a frame read from an ``.npz`` file, timed past the read
  (target under 2 s); the read is printed apart;
- ``chunked report 10M x 10``: ``logitscope report STORE.zarr --fit-temperature --target-accuracy 0.98``
  on dask's threaded scheduler, against one read pass of the store.

The floor of each case is one pass over the same data in the same process: ``z.sum(axis=1)`` of the
matrix in memory, or a dask reduction over every chunk of the store. Peak memory is the process's
``VmHWM`` (``/proc/self/status``) reset just before the measured step (``/proc/self/clear_refs``), less
the resident memory before the data was made, so it counts the matrix and what the step adds. Data: a
help desk routing tickets (a class signal plus noise), seeded.
"""

from __future__ import annotations

import argparse
import contextlib
import io
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np


def _status(key: str) -> int:
    with open("/proc/self/status") as fh:
        for line in fh:
            if line.startswith(key + ":"):
                return int(line.split()[1]) * 1024
    return 0


def _reset_peak() -> bool:
    try:
        with open("/proc/self/clear_refs", "w") as fh:
            fh.write("5")
        return True
    except OSError:
        return False


def _data(n: int, k: int, seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    y = rng.integers(0, k, n)
    z = np.empty((n, k), dtype=np.float32)
    for a in range(0, n, 1 << 18):  # in blocks: no float64 temporaries of the whole matrix
        b = min(n, a + (1 << 18))
        z[a:b] = rng.standard_normal((b - a, k), dtype=np.float32) * np.float32(1.5)
        z[np.arange(a, b), y[a:b]] += np.float32(4.0 if k > 2 else 1.5)
    return z, y


def _floor(z: np.ndarray) -> float:
    start = time.perf_counter()
    z.sum(axis=1)
    return time.perf_counter() - start


def _warm() -> None:
    """Load the compiled kernels and the report templates before the clock starts."""
    from logitscope import LogitFrame
    from logitscope.report import write_report

    z, y = _data(2000, 3)
    with tempfile.TemporaryDirectory() as d:
        write_report(LogitFrame(z, labels=y), Path(d) / "w.html", fit_temperature=True, target_accuracy=0.9)


def child(case: str, n: int, k: int, path: str) -> dict[str, object]:
    from logitscope import LogitFrame
    from logitscope.report import write_report

    _warm()
    base = _status("VmRSS")
    out: dict[str, object] = {"case": case, "n": n, "k": k}
    if case == "report":
        z, y = _data(n, k)
        frame = LogitFrame(z, labels=y, copy=False)
        out["floor"] = min(_floor(frame.logits) for _ in range(3))
        out["matrix_bytes"] = z.nbytes
        _reset_peak()
        start = time.perf_counter()
        write_report(frame, Path(path) / "r.html", fit_temperature=True, target_accuracy=0.98)
        out["seconds"] = time.perf_counter() - start
    elif case == "summary":
        z, y = _data(n, k)
        LogitFrame(z, labels=y, copy=False).write(Path(path) / "s.npz")
        del z, y
        base = _status("VmRSS")
        _reset_peak()
        start = time.perf_counter()
        frame = LogitFrame.read(Path(path) / "s.npz")
        out["read"] = time.perf_counter() - start
        out["floor"] = min(_floor(frame.logits) for _ in range(3))
        out["matrix_bytes"] = frame.logits.nbytes
        start = time.perf_counter()
        frame.summary()
        out["seconds"] = time.perf_counter() - start
    elif case == "chunked":
        import dask
        import dask.array as da
        import zarr

        from logitscope.cli import main

        store = str(Path(path) / "tickets.zarr")
        group = zarr.open_group(store, mode="r")
        zs, ys = da.from_zarr(group["logits"]), da.from_zarr(group["labels"])
        start = time.perf_counter()
        dask.compute(zs.sum(axis=1).sum(), ys.sum(), scheduler="threads")
        out["floor"] = time.perf_counter() - start
        out["matrix_bytes"] = int(np.prod(zs.shape)) * zs.dtype.itemsize
        _reset_peak()
        start = time.perf_counter()
        with contextlib.redirect_stdout(io.StringIO()):
            code = main(["report", store, "-o", str(Path(path) / "c.html"), "--fit-temperature",
                         "--target-accuracy", "0.98"])  # fmt: skip
        if code:
            raise SystemExit(code)
        out["seconds"] = time.perf_counter() - start
    out["peak_bytes"] = max(0, _status("VmHWM") - base)
    return out


def measure(case: str, n: int, k: int, path: Path) -> dict[str, object]:
    res = subprocess.run(
        [sys.executable, __file__, "--child", case, str(n), str(k), str(path)],
        capture_output=True, text=True, check=False,
    )  # fmt: skip
    if res.returncode:
        raise RuntimeError(f"{case} {n} x {k} failed: {res.stderr[-3000:]}")
    return json.loads(res.stdout.strip().splitlines()[-1])


def write_store(path: Path, n: int, k: int) -> None:
    from logitscope.chunked import ZarrAppender

    rng = np.random.default_rng(0)
    with ZarrAppender(path, [f"queue {i}" for i in range(k)], np.float32, overwrite=True) as out:
        for lo in range(0, n, 1 << 20):
            m = min(1 << 20, n - lo)
            y = rng.integers(0, k, m)
            z = rng.standard_normal((m, k), dtype=np.float32) * np.float32(1.5)
            z[np.arange(m), y] += np.float32(4.0)
            out.append(z, labels=y)


def main() -> None:
    p = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("--scale", type=float, default=1.0, help="multiply every size by this")
    p.add_argument("--only", nargs="*", default=None, help="cases to run: report-1, report-2, summary, chunked")
    p.add_argument("--child", nargs=4, help=argparse.SUPPRESS)
    args = p.parse_args()
    if args.child:
        case, n, k, path = args.child
        print(json.dumps(child(case, int(n), int(k), path)))
        return
    s = args.scale
    cases = [
        ("report-1", "report", int(1_000_000 * s), 100, 5.0, 1.5),
        ("report-2", "report", int(5_000_000 * s), 2, 10.0, None),
        ("summary", "summary", int(2_000_000 * s), 100, 2.0, None),
        ("chunked", "chunked", int(10_000_000 * s), 10, None, None),
    ]
    rows = []
    for name, case, n, k, target, mem_target in cases:
        if args.only and name not in args.only:
            continue
        with tempfile.TemporaryDirectory(prefix="logitscope-bench-") as d:
            if case == "chunked":
                write_store(Path(d) / "tickets.zarr", n, k)
            r = measure(case, n, k, Path(d))
        rows.append((name, r, target, mem_target))
        print(f"done: {name} {r}", file=sys.stderr, flush=True)
    print(f"{'case':<40}{'time s':>9}{'target s':>10}{'floor s':>9}{'x floor':>9}{'peak MB':>9}{'x matrix':>10}"
          f"{'mem target':>12}")  # fmt: skip
    for _name, r, target, mem_target in rows:
        label = {"report": "report", "summary": "summary", "chunked": "chunked report (Zarr)"}[str(r["case"])]
        label = f"{label} {int(r['n']):,} x {r['k']}"  # type: ignore[call-overload]
        t, fl = float(r["seconds"]), float(r["floor"])  # type: ignore[arg-type]
        peak, mat = float(r["peak_bytes"]), float(r["matrix_bytes"])  # type: ignore[arg-type]
        tt = "-" if target is None else f"< {target:g}"
        mt = "-" if mem_target is None else f"<= {mem_target:g}x"
        print(f"{label:<40}{t:9.2f}{tt:>10}{fl:9.3f}{t / fl:9.1f}{peak / 2**20:9.0f}{peak / mat:10.2f}{mt:>12}")
        if "read" in r:
            print(f"{'  (file read, not counted)':<40}{float(r['read']):9.2f}")  # type: ignore[arg-type]
    print(f"\n{os.cpu_count()} cores; other processes on them change the figures (run on a quiet machine).")
    shutil.rmtree(Path(tempfile.gettempdir()) / "logitscope-bench-none", ignore_errors=True)


if __name__ == "__main__":
    main()
