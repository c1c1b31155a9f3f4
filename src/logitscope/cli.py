"""Command line: ``logitscope summary | demo-data | report``.

Errors in the input end with exit code 2 and one readable line on stderr.
Progress of steps longer than a second goes to stderr, never to stdout.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
import threading
import time
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any, TypeVar

from .errors import LogitscopeError

T = TypeVar("T")

__all__ = ["format_summary", "main"]


def _progress_wanted(stream: Any) -> bool:
    """Progress lines go to a terminal, or anywhere when ``LOGITSCOPE_PROGRESS=1``."""
    forced = os.environ.get("LOGITSCOPE_PROGRESS")
    if forced is not None:
        return forced == "1"
    return bool(getattr(stream, "isatty", lambda: False)())


class _Progress:
    """Prints ``label ...`` on stderr if a step takes longer than ``delay`` seconds.

    Only when stderr is a terminal (or ``LOGITSCOPE_PROGRESS=1``), so logs and
    error output stay one line per problem; a failed step prints no "done" line.
    """

    def __init__(self, label: str, delay: float = 1.0, stream: Any = None) -> None:
        self.label = label
        self.delay = delay
        self.stream = stream or sys.stderr
        self.enabled = _progress_wanted(self.stream)
        self._done = threading.Event()
        self._shown = False
        self._start = 0.0

    def _watch(self) -> None:
        if not self._done.wait(self.delay):
            self._shown = True
            print(f"logitscope: {self.label} ...", file=self.stream, flush=True)

    def run(self, fn: Callable[[], T]) -> T:
        if not self.enabled:
            return fn()
        self._start = time.perf_counter()
        watcher = threading.Thread(target=self._watch, daemon=True)
        watcher.start()
        try:
            result = fn()
        finally:
            self._done.set()
            watcher.join()
        if self._shown:
            took = time.perf_counter() - self._start
            print(f"logitscope: {self.label} done in {took:.1f} s", file=self.stream, flush=True)
        return result


def _fmt(v: Any) -> str:
    if isinstance(v, float):
        return "n/a" if math.isnan(v) else f"{v:.4f}"
    return str(v)


def format_summary(summary: dict[str, Any]) -> str:
    """Render a summary dict as an aligned, readable table.

    Examples
    --------
    >>> print(format_summary({"n_samples": 3, "accuracy": 0.5, "top_k_accuracy": {"2": 1.0}}))
    n_samples       3
    accuracy        0.5000
    top-2 accuracy  1.0000
    """
    rows: list[tuple[str, str]] = []
    for key, value in summary.items():
        if key == "top_k_accuracy":
            rows += [(f"top-{k} accuracy", _fmt(v)) for k, v in value.items()]
        elif key == "threshold":
            if value["feasible"]:
                lo, hi = value["interval"]
                rows.append(("threshold", _fmt(value["value"])))
                rows.append(("  coverage", _fmt(value["coverage"])))
                rows.append(("  accuracy", f"{_fmt(value['accuracy'])}  "
                             f"[{lo:.4f}, {hi:.4f}] {value['level']:.0%} {value['interval_method']}"))  # fmt: skip
                rows.append(("  sent for review", str(value["n_review"])))
            else:
                rows.append(("threshold", f"none reaches accuracy {value['target_accuracy']}"))
        elif key == "caution":
            continue
        else:
            rows.append((key, _fmt(value)))
    width = max(len(k) for k, _ in rows) + 2
    text = "\n".join(f"{k:<{width}}{v}" for k, v in rows)
    if "caution" in summary:
        text += "\n\nCaution: " + summary["caution"]
    return text


def _parse_costs(text: str) -> tuple[float, float]:
    try:
        a, b = (float(x) for x in text.split(","))
    except ValueError as exc:
        raise argparse.ArgumentTypeError(f"--costs takes ERROR,REVIEW as two numbers, got {text!r}") from exc
    return a, b


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="logitscope", description="Inspect a classifier's logits.")
    sub = p.add_subparsers(dest="command", required=True)

    s = sub.add_parser("summary", help="print set-level numbers of a .npz or .parquet file, or of a chunked store")
    s.add_argument("file", help=".npz, .parquet; or read in chunks: a .zarr store, a folder of .parquet files, .npy")
    s.add_argument("--scheduler", metavar="ADDRESS", help="dask.distributed scheduler for a chunked store "
                   "(default: $LOGITSCOPE_SCHEDULER, else in process); the cluster keeps running")  # fmt: skip
    g = s.add_mutually_exclusive_group()
    g.add_argument("--temperature", type=float)
    g.add_argument("--fit-temperature", action="store_true")
    s.add_argument("--target-accuracy", type=float)
    s.add_argument("--interval", choices=["wilson", "clopper-pearson"], default="wilson")
    s.add_argument("--json", action="store_true", help="print one JSON object")

    d = sub.add_parser("demo-data", help="write a bundled demo frame to PATH (.npz or .parquet)")
    d.add_argument("path")
    d.add_argument("--name", choices=["mailroom", "helpdesk"], default="mailroom")

    r = sub.add_parser("report", help="write a self-contained HTML report")
    r.add_argument("file")
    r.add_argument("-o", "--output", required=True)
    g = r.add_mutually_exclusive_group()
    g.add_argument("--temperature", type=float)
    g.add_argument("--fit-temperature", action="store_true")
    g2 = r.add_mutually_exclusive_group()
    g2.add_argument("--target-accuracy", type=float)
    g2.add_argument("--costs", type=_parse_costs, metavar="ERROR,REVIEW")
    r.add_argument("--title")
    return p


def _cmd_summary(args: argparse.Namespace) -> int:
    from .chunked.frame import is_chunked_source
    from .frame import LogitFrame

    if is_chunked_source(args.file):
        from .chunked.cli import chunked_summary

        summary = _Progress("computing the summary over chunks").run(lambda: chunked_summary(args))
    else:
        frame = _Progress(f"reading {args.file}").run(lambda: LogitFrame.read(args.file))
        summary = _Progress("computing scores").run(
            lambda: frame.summary(
                temperature=args.temperature,
                fit_temperature=args.fit_temperature,
                target_accuracy=args.target_accuracy,
                interval=args.interval,
            )
        )
    if args.json:
        print(json.dumps(summary, allow_nan=False, default=_json_default))
    else:
        print(format_summary(summary))
    return 0


def _json_default(v: Any) -> Any:
    import numpy as np

    if isinstance(v, np.generic):
        return v.item()
    raise TypeError(f"not JSON serialisable: {type(v).__name__}")


def _cmd_demo(args: argparse.Namespace) -> int:
    from .demo import load_demo

    frame = load_demo(args.name)
    frame.write(args.path)
    print(f"wrote {frame.n_samples} samples x {frame.n_classes} classes ({args.name}) to {args.path}")
    return 0


def _cmd_report(args: argparse.Namespace) -> int:
    from .frame import LogitFrame
    from .report import write_report

    frame = _Progress(f"reading {args.file}").run(lambda: LogitFrame.read(args.file))
    options: dict[str, Any] = {"fit_temperature": args.fit_temperature}
    if args.temperature is not None:
        options["temperature"] = args.temperature
    if args.target_accuracy is not None:
        options["target_accuracy"] = args.target_accuracy
    if args.costs is not None:
        options["costs"] = args.costs
    if args.title:
        options["title"] = args.title
    _Progress("writing the report").run(lambda: write_report(frame, args.output, **options))
    print(f"wrote {Path(args.output)}")
    return 0


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``logitscope`` command."""
    args = _parser().parse_args(argv)
    handlers = {"summary": _cmd_summary, "demo-data": _cmd_demo, "report": _cmd_report}
    try:
        return handlers[args.command](args)
    except (LogitscopeError, TypeError) as exc:
        name = type(exc).__name__
        print(f"logitscope: error: {exc} ({name})", file=sys.stderr)
        return 2
    except OSError as exc:
        print(f"logitscope: error: {exc}", file=sys.stderr)
        return 2


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
