"""Command line: ``logitscope summary | demo-data | report | compare | demo``.

Errors in the input end with exit code 2 and one readable line on stderr;
warnings are one line on stderr each (``logitscope: warning: ...``).
Progress of steps longer than a second goes to stderr, never to stdout.
``summary --json`` writes a value that is not a finite number (NaN or
infinite, which JSON cannot hold) as ``null`` and says why under the key
``null_reasons``. An unexpected failure (a bug) is one line with exit code 1;
set ``LOGITSCOPE_TRACEBACK=1`` to see its traceback.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
import threading
import time
import warnings
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any, Literal, TypeVar

from . import __version__
from .errors import InputTypeError, LogitscopeError, ParameterError, ShapeError

T = TypeVar("T")

__all__ = ["format_comparison", "format_summary", "main"]


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


_FILE_HELP = "a frame as .npz or .parquet (layouts in the README)"
_TEMPERATURE_HELP = "softmax temperature T > 0 to evaluate at (default 1)"
_FIT_HELP = "fit the temperature that minimises the NLL first, and evaluate at it"


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="logitscope", description="Inspect a classifier's logits.")
    p.add_argument("--version", action="version", version=f"%(prog)s {__version__}")
    sub = p.add_subparsers(dest="command", required=True, metavar="COMMAND")

    s = sub.add_parser("summary", help="print set-level numbers of a .npz or .parquet file, or of a chunked store")
    s.add_argument("file", help=".npz, .parquet; or read in chunks: a .zarr store, a folder of .parquet files, .npy")
    s.add_argument("--scheduler", metavar="ADDRESS", help="dask.distributed scheduler for a chunked store "
                   "(default: $LOGITSCOPE_SCHEDULER, else in process); the cluster keeps running")  # fmt: skip
    g = s.add_mutually_exclusive_group()
    g.add_argument("--temperature", type=float, metavar="T", help=_TEMPERATURE_HELP)
    g.add_argument("--fit-temperature", action="store_true", help=_FIT_HELP)
    s.add_argument(
        "--target-accuracy", type=float, metavar="A",
        help="also choose the lowest confidence threshold whose accepted samples reach accuracy A",
    )  # fmt: skip
    s.add_argument(
        "--interval", choices=["wilson", "clopper-pearson"], default="wilson",
        help="binomial interval of the threshold's accuracy (default: wilson)",
    )  # fmt: skip
    s.add_argument("--json", action="store_true", help="print one JSON object instead of a table")

    d = sub.add_parser("demo-data", help="write a bundled demo frame to PATH (.npz or .parquet)")
    d.add_argument("path", help="where to write it; the suffix (.npz or .parquet) picks the format")
    d.add_argument(
        "--name", choices=["mailroom", "helpdesk"], default="mailroom",
        help="mailroom: handwritten postcode digits; helpdesk: support tickets (default: mailroom)",
    )  # fmt: skip

    r = sub.add_parser("report", help="write a self-contained HTML report")
    r.add_argument("file", help=_FILE_HELP + "; or read in chunks: a .zarr store, a folder of .parquet files, .npy")
    r.add_argument("-o", "--output", required=True, metavar="HTML", help="the report file to write")
    r.add_argument("--scheduler", metavar="ADDRESS", help="dask.distributed scheduler for a chunked store "
                   "(default: $LOGITSCOPE_SCHEDULER, else in process); the cluster keeps running")  # fmt: skip
    g = r.add_mutually_exclusive_group()
    g.add_argument("--temperature", type=float, metavar="T", help=_TEMPERATURE_HELP)
    g.add_argument("--fit-temperature", action="store_true", help=_FIT_HELP)
    g2 = r.add_mutually_exclusive_group()
    g2.add_argument(
        "--target-accuracy", type=float, metavar="A",
        help="choose the threshold as the lowest confidence whose accepted samples reach accuracy A",
    )  # fmt: skip
    g2.add_argument(
        "--costs", type=_parse_costs, metavar="ERROR,REVIEW",
        help="choose the threshold by cost: of an accepted error and of a sample sent for review",
    )  # fmt: skip
    r.add_argument(
        "--per-class", action="store_true", help="with --target-accuracy: one threshold per predicted class too"
    )
    r.add_argument("--relabel", metavar="FILE.json", help="a relabel list whose marks and notes the report lists")
    r.add_argument("--compare", metavar="B", help="another checkpoint's file of the same samples: a comparison section")
    r.add_argument("--drop-missing", action="store_true", help="with --compare: compare the shared ids only")
    r.add_argument("--title", help="the title at the top of the report")
    _add_compare_parser(sub)
    _add_demo_parser(sub)
    return p


def _add_compare_parser(sub: Any) -> None:
    c = sub.add_parser("compare", help="compare two checkpoints' files of the same samples (matched by id)")
    c.add_argument("file_a", metavar="A", help="the first checkpoint's frame (.npz or .parquet)")
    c.add_argument("file_b", metavar="B", help="the second checkpoint's frame, the same samples in any order")
    c.add_argument("--drop-missing", action="store_true", help="compare the shared ids when the files differ")
    c.add_argument("--json", action="store_true", help="print one JSON object")


def _add_demo_parser(sub: Any) -> None:
    from .launch import DEFAULT_FOLDER, DEMO_NOTEBOOKS

    j = sub.add_parser(
        "demo",
        help="open a demo notebook in JupyterLab (a working copy, so the bundled one stays clean)",
        description="Copy the example notebooks into a working folder (an edited copy is kept) and start "
        "JupyterLab on one of them; adds --allow-root when run as root.",
    )
    j.add_argument("name", nargs="?", choices=list(DEMO_NOTEBOOKS), default="mailroom", help="which demo to open")
    j.add_argument("--dir", default=DEFAULT_FOLDER, help=f"working folder for the copies (default ./{DEFAULT_FOLDER})")
    j.add_argument("--port", type=int, help="port for JupyterLab (default: its own, 8888 or the next free one)")
    j.add_argument("--no-browser", action="store_true", help="do not open a web browser; open the printed address")
    j.add_argument("--reset", action="store_true", help="replace edited copies (each is kept as a backup beside it)")
    j.add_argument("--print-command", action="store_true", help="prepare the copies and print the command, not run it")


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
        reasons: dict[str, str] = {}
        clean = _finite_or_null(summary, "", reasons)
        if reasons:
            clean["null_reasons"] = reasons
        print(json.dumps(clean, allow_nan=False, default=_json_default))
    else:
        print(format_summary(summary))
    return 0


def _finite_or_null(value: Any, key: str, reasons: dict[str, str]) -> Any:
    """``value`` with every NaN or infinite number replaced by None; ``reasons`` gets why, by key path."""
    import numpy as np

    if isinstance(value, dict):
        return {k: _finite_or_null(v, f"{key}.{k}" if key else str(k), reasons) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_finite_or_null(v, f"{key}[{i}]", reasons) for i, v in enumerate(value)]
    if isinstance(value, float | np.floating) and not math.isfinite(float(value)):
        reasons[key] = f"the value is {float(value)!r}, not a finite number (JSON cannot hold it)"
        return None
    return value


def _one_line_warning(
    message: Warning | str, category: type[Warning], filename: str, lineno: int, file: Any = None, line: Any = None
) -> None:
    """Print a warning as one line on stderr (no source line), as the CLI promises."""
    text = " ".join(str(message).split())
    print(f"logitscope: warning: {text} ({category.__name__})", file=file or sys.stderr)


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
    from .chunked.frame import is_chunked_source
    from .frame import LogitFrame
    from .report import write_report

    chunked = is_chunked_source(args.file)
    if chunked and args.relabel:
        raise ParameterError("--relabel needs the file read in memory (.npz or .parquet), not a chunked store")
    if chunked and args.compare:
        raise ParameterError("--compare needs the file read in memory (.npz or .parquet), not a chunked store")
    if args.drop_missing and not args.compare:
        raise ParameterError("--drop-missing goes with --compare")
    options: dict[str, Any] = {"fit_temperature": args.fit_temperature}
    if args.temperature is not None:
        options["temperature"] = args.temperature
    if args.target_accuracy is not None:
        options["target_accuracy"] = args.target_accuracy
    if args.costs is not None:
        options["costs"] = args.costs
    if args.per_class:
        options["per_class"] = True
    if args.relabel:
        options["relabel"] = args.relabel
    if args.title:
        options["title"] = args.title
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        if chunked:
            from .chunked.cli import chunked_report

            _Progress("writing the report over chunks").run(lambda: chunked_report(args, options))
        else:
            frame = _Progress(f"reading {args.file}").run(lambda: LogitFrame.read(args.file))
            if args.compare:
                options["compare"] = _Progress(f"reading {args.compare}").run(lambda: LogitFrame.read(args.compare))
                options["compare_missing"] = "drop" if args.drop_missing else "raise"
                options["compare_name"] = Path(args.compare).name
            try:
                _Progress("writing the report").run(lambda: write_report(frame, args.output, **options))
            except ShapeError as exc:
                raise ShapeError(str(exc).replace("Pass missing='drop'", "Pass --drop-missing")) from exc
    for w in caught:  # one line per problem, as every message of the command line
        print(f"logitscope: warning: {' '.join(str(w.message).split())}", file=sys.stderr)
    print(f"wrote {Path(args.output)}")
    return 0


def _cmd_launch(args: argparse.Namespace) -> int:
    from .launch import run_demo

    return run_demo(
        args.name, args.dir, port=args.port, no_browser=args.no_browser, reset=args.reset,
        print_command=args.print_command,
    )  # fmt: skip


def format_comparison(result: dict[str, Any]) -> str:
    """Render :meth:`logitscope.checkpoints.FrameComparison.to_dict` as readable text.

    Examples
    --------
    >>> print(format_comparison({"names": ["a.npz", "b.npz"], "n_samples": 4, "n_only_in_a": 0, "n_only_in_b": 0,
    ...                          "labelled": False, "agreement": 0.75, "n_changed": 1}))
    samples compared  4
    agreement         0.7500
    changed           1
    """
    from .analysis import FLIP_CELLS, FLIP_DESCRIPTIONS

    rows: list[tuple[str, str]] = [("samples compared", str(result["n_samples"]))]
    name_a, name_b = result["names"]
    for key, name in (("n_only_in_a", name_a), ("n_only_in_b", name_b)):
        if result[key]:
            rows.append((f"left out, only in {name}", str(result[key])))
    if result["labelled"]:
        rows += [
            (f"accuracy A ({name_a})", _fmt(result["accuracy_a"])),
            (f"accuracy B ({name_b})", _fmt(result["accuracy_b"])),
            ("change", f"{result['accuracy_change']:+.4f}"),
        ]
    rows += [("agreement", _fmt(result["agreement"])), ("changed", str(result["n_changed"]))]
    if result["labelled"]:
        cells = result["flips"]["cells"]
        rows += [(FLIP_DESCRIPTIONS[c], f"{cells[c]['count']}  ({cells[c]['share']:.1%})") for c in FLIP_CELLS]
        rows.append(("McNemar exact p", f"{result['mcnemar_p']:.4g}"))
    width = max(len(k) for k, _ in rows) + 2
    text = "\n".join(f"{k:<{width}}{v}" for k, v in rows)
    if result["labelled"]:
        text += "\n\nper class\n" + _per_class_table(result["per_class"])
    return text


def _per_class_table(per_class: list[dict[str, Any]]) -> str:
    def signed(v: float | None) -> str:
        return "n/a" if v is None else f"{v:+.4f}"

    def p_value(v: float | None) -> str:
        return "n/a" if v is None else f"{v:.4g}"

    table = [("class", "n", "acc A", "acc B", "change", "fixed", "broken", "p (Holm)")]
    for r in per_class:
        accuracies = (_fmt(r["accuracy_a"]), _fmt(r["accuracy_b"]), signed(r["change"]))
        counts = (str(r["fixed"]), str(r["broken"]), p_value(r["mcnemar_p_holm"]))
        table.append((str(r["class"]), str(r["support"]), *accuracies, *counts))
    widths = [max(len(line[i]) for line in table) for i in range(len(table[0]))]
    lines = []
    for line in table:
        cells = [line[0].ljust(widths[0])] + [v.rjust(w) for v, w in zip(line[1:], widths[1:], strict=True)]
        lines.append("  ".join(cells).rstrip())
    return "\n".join(lines)


def _cmd_compare(args: argparse.Namespace) -> int:
    from .checkpoints import compare_frames
    from .frame import LogitFrame

    a = _Progress(f"reading {args.file_a}").run(lambda: LogitFrame.read(args.file_a))
    b = _Progress(f"reading {args.file_b}").run(lambda: LogitFrame.read(args.file_b))
    missing: Literal["raise", "drop"] = "drop" if args.drop_missing else "raise"
    names = (Path(args.file_a).name, Path(args.file_b).name)
    try:
        result = _Progress("comparing").run(lambda: compare_frames(a, b, missing=missing, names=names)).to_dict()
    except ShapeError as exc:
        raise ShapeError(str(exc).replace("Pass missing='drop'", "Pass --drop-missing")) from exc
    if args.json:
        print(json.dumps(result, allow_nan=False, default=_json_default))
    else:
        print(format_comparison(result))
    return 0


def _one_line(exc: BaseException) -> str:
    return " ".join(str(exc).split())


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``logitscope`` command."""
    args = _parser().parse_args(argv)
    handlers = {
        "summary": _cmd_summary,
        "demo-data": _cmd_demo,
        "report": _cmd_report,
        "compare": _cmd_compare,
        "demo": _cmd_launch,
    }
    with warnings.catch_warnings():
        warnings.showwarning = _one_line_warning  # restored when the block ends
        try:
            return handlers[args.command](args)
        except (LogitscopeError, InputTypeError) as exc:
            print(f"logitscope: error: {_one_line(exc)} ({type(exc).__name__})", file=sys.stderr)
            return 2
        except OSError as exc:
            print(f"logitscope: error: {_one_line(exc)}", file=sys.stderr)
            return 2
        except MemoryError:
            print("logitscope: error: not enough memory for this file", file=sys.stderr)
            return 2
        except (TypeError, ValueError) as exc:  # a problem with the data that was not named by our own checks
            print(f"logitscope: error: {_one_line(exc)} ({type(exc).__name__})", file=sys.stderr)
            return 2
        except Exception as exc:
            if os.environ.get("LOGITSCOPE_TRACEBACK") == "1":
                raise
            print(
                f"logitscope: internal error: {_one_line(exc)} ({type(exc).__name__}); please report it "
                "(LOGITSCOPE_TRACEBACK=1 shows where)",
                file=sys.stderr,
            )
            return 1


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
