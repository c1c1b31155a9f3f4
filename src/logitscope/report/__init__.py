"""A self-contained HTML report for teammates: one file, inline SVG plots, viewable offline.

``logitscope report FILE -o report.html``, :meth:`LogitFrame.report` and the
"write report" button of the calibration panel all call :func:`write_report`.
It settles the choices (:func:`logitscope.findings.resolve_choices`),
computes the findings once (:func:`logitscope.findings.collect`) and renders
them (:func:`.html.build_report`); the report computes no number itself.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

from .._atomic import atomic_write
from ..analysis.selective import IntervalMethod
from ..analysis.split import Split
from ..errors import FileFormatError, InputTypeError, ParameterError
from ..findings import Choices, Findings, collect, resolve_choices, temperature_context
from .html import build_report

if TYPE_CHECKING:
    from ..chunked.frame import ChunkedFrame
    from ..frame import LogitFrame
    from ..relabel_store import RelabelStore

__all__ = ["build_report", "write_chunked_report", "write_report"]

#: The options that settle the choices, with their defaults (they cannot be combined with ``findings``/``choices``).
_OPTION_DEFAULTS: dict[str, Any] = {
    "temperature": None,
    "fit_temperature": False,
    "target_accuracy": None,
    "costs": None,
    "threshold": None,
    "use_lower_bound": False,
    "per_class": False,
    "interval": "wilson",
    "level": 0.95,
    "n_bins": 15,
    "strategy": "uniform",
    "split": None,
    "temperature_how": None,
}


def _open_marks(frame: LogitFrame, relabel: Any) -> tuple[list[dict[str, Any]], str]:
    """The marks of a RelabelStore or of a relabel file (read through the store's public API)."""
    from ..relabel_store import RelabelStore

    if isinstance(relabel, RelabelStore):
        store = relabel
    elif isinstance(relabel, str | os.PathLike):
        if not os.path.isfile(relabel):
            raise FileFormatError(f"relabel list {os.fspath(relabel)!r} does not exist or is not a file")
        store = RelabelStore(relabel, frame)
    else:
        raise InputTypeError(f"relabel must be a RelabelStore or a path, got {type(relabel).__name__}")
    table = store.to_frame().astype(object)
    records = table.where(table.notna(), None).to_dict("records")
    return records, os.fspath(store.path)


def write_report(
    frame: LogitFrame,
    path: str | os.PathLike[str],
    temperature: float | None = None,
    fit_temperature: bool = False,
    target_accuracy: float | None = None,
    costs: Sequence[float] | None = None,
    title: str | None = None,
    *,
    threshold: float | None = None,
    use_lower_bound: bool = False,
    per_class: bool = False,
    interval: IntervalMethod = "wilson",
    level: float = 0.95,
    n_bins: int = 15,
    strategy: str = "uniform",
    split: Split | None = None,
    temperature_how: str | None = None,
    findings: Findings | None = None,
    choices: Choices | None = None,
    relabel: RelabelStore | str | os.PathLike[str] | None = None,
    compare: LogitFrame | None = None,
    compare_missing: str = "raise",
    compare_name: str = "the other checkpoint",
) -> None:
    """Write one self-contained HTML report about ``frame`` to ``path`` (atomically).

    The report holds the summary table, the reliability diagram before and
    after temperature scaling, the temperature sweep, the accuracy-coverage
    curve with the chosen threshold and its readouts (overall and by
    predicted class), a held-out check of the temperature and threshold,
    where the model mixes classes up, the doubtful labels, the user's own
    relabel list when given, and the caution beside every threshold. A
    frame without labels gets what needs no labels and a list of what does.

    Parameters
    ----------
    frame : LogitFrame
    path : str or path-like
        Output file; written through a temporary file and renamed, so a
        reader never sees half a report.
    temperature : float, optional
        Decision temperature (default: the frame's own).
    fit_temperature : bool
        Use the temperature that minimises the NLL (needs labels).
    target_accuracy : float, optional
        Choose the lowest confidence threshold whose accepted predictions reach this accuracy.
    costs : (error_cost, review_cost), optional
        Choose the threshold with the least expected cost instead.
    title : str, optional
        Page title (escaped).
    threshold : float, optional
        A fixed confidence threshold instead of a rule.
    use_lower_bound : bool
        With ``target_accuracy``: require the interval's lower bound to reach the target.
    per_class : bool
        With ``target_accuracy``: add one threshold per predicted class for the same target.
    interval : {"wilson", "clopper-pearson"}
        Binomial confidence interval for the accuracy of accepted predictions.
    level : float
        Confidence level of the interval.
    n_bins : int
        Bins of the reliability diagram and every ECE.
    strategy : {"uniform", "quantile"}
        Equal-width or equal-mass bins.
    split : Split, optional
        Fit/held-out rows for the held-out check (default: a half split by row hash, seed 0:
        :func:`logitscope.analysis.hash_split`).
    temperature_how : str, optional
        How the temperature was chosen, in words for the page (escaped); default from the options.
    findings : Findings, optional
        Findings already computed for ``frame`` (the calibration panel's); rendered as they are.
    choices : Choices, optional
        Choices already settled (instead of the options above); the findings are computed for them.
    relabel : RelabelStore or path, optional
        The user's relabel list; its marks and notes get a section of their own.
    compare : LogitFrame, optional
        Another checkpoint's frame of the same samples (matched by id, in any order): a section compares
        this frame (A) with it (B): flip table, exact McNemar test, per-class accuracy change.
    compare_missing : {"raise", "drop"}
        Ids held by one frame only: a ShapeError naming them, or left out and counted in the section.
    compare_name : str
        What the section calls the other frame (escaped; the CLI gives its file name).

    Raises
    ------
    ParameterError
        Conflicting or out-of-range options, or options given together with ``findings``/``choices``.
    LabelError
        An option that needs labels on a frame without them.
    FileFormatError
        A relabel path that does not exist or cannot be read.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from logitscope import load_demo
    >>> out = pathlib.Path(tempfile.mkdtemp()) / "report.html"
    >>> write_report(load_demo("helpdesk"), out, fit_temperature=True, target_accuracy=0.95)
    >>> "Review threshold" in out.read_text()
    True
    """
    from ..frame import LogitFrame

    if not isinstance(frame, LogitFrame):
        raise InputTypeError(f"write_report needs a LogitFrame, got {type(frame).__name__}")
    if split is not None and not isinstance(split, Split):
        raise InputTypeError(f"split must be a logitscope.analysis.split.Split, got {type(split).__name__}")
    options = {
        "temperature": temperature,
        "fit_temperature": fit_temperature,
        "target_accuracy": target_accuracy,
        "costs": costs,
        "threshold": threshold,
        "use_lower_bound": use_lower_bound,
        "per_class": per_class,
        "interval": interval,
        "level": level,
        "n_bins": n_bins,
        "strategy": strategy,
        "split": split,
        "temperature_how": temperature_how,
    }
    if findings is not None or choices is not None:
        if findings is not None and choices is not None:
            raise ParameterError("give findings or choices, not both")
        changed = [k for k, v in options.items() if v is not _OPTION_DEFAULTS[k] and v != _OPTION_DEFAULTS[k]]
        if changed:
            raise ParameterError(
                f"{'findings' if findings is not None else 'choices'} already settle the choices; "
                f"do not give {', '.join(changed)} as well"
            )
    if findings is not None:
        if not isinstance(findings, Findings):
            raise InputTypeError(f"findings must be a logitscope.findings.Findings, got {type(findings).__name__}")
        p = findings.predictions
        if (
            p.n != frame.n_samples
            or p.predicted_counts.size != frame.n_classes
            or findings.labelled != frame.has_labels
        ):
            raise ParameterError(
                f"these findings were computed for another frame ({p.n} rows, {p.predicted_counts.size} classes); "
                f"this frame has {frame.n_samples} rows and {frame.n_classes} classes"
            )
        found = findings
    elif choices is not None:
        if not isinstance(choices, Choices):
            raise InputTypeError(f"choices must be a logitscope.findings.Choices, got {type(choices).__name__}")
        found = collect(frame, choices, temperature_context(frame, choices.temperature, choices.temperature_how))
    else:
        found = collect(frame, *resolve_choices(frame, **options))  # type: ignore[arg-type]
    marks, source = (None, "") if relabel is None else _open_marks(frame, relabel)
    comparison = None
    if compare is not None:
        from ..checkpoints import compare_frames

        if not isinstance(compare, LogitFrame):
            raise InputTypeError(f"compare must be a LogitFrame, got {type(compare).__name__}")
        if compare_missing not in ("raise", "drop"):
            raise ParameterError(f"compare_missing must be 'raise' or 'drop', got {compare_missing!r}")
        names = ("this batch", str(compare_name))
        comparison = compare_frames(frame, compare, missing=compare_missing, names=names)  # type: ignore[arg-type]
    page = build_report(frame, found, title=title, marks=marks, marks_source=source, comparison=comparison)
    with atomic_write(path, "w") as fh:
        fh.write(page)


class _ChunkedPage:
    """What the page reads of a chunked batch: names, counts and the ids of the rows it lists (read by row)."""

    payload = None
    read_in_chunks = True

    def __init__(self, cf: ChunkedFrame, rows: Any) -> None:
        import numpy as np

        from ..chunked.analysis import compute

        self.classes = cf.classes
        self.source = cf.source
        self.n_samples = cf.n_samples
        self.n_classes = cf.n_classes
        self.n_labelled = cf.n_samples if cf.has_labels else 0
        r = np.unique(np.asarray(rows, dtype=np.int64))
        (found,) = compute(cf.ids[r]) if r.size else (np.zeros(0),)
        self.ids = {int(i): v.item() if hasattr(v, "item") else v for i, v in zip(r.tolist(), found, strict=True)}


def write_chunked_report(
    cf: ChunkedFrame,
    path: str | os.PathLike[str],
    temperature: float | None = None,
    fit_temperature: bool = False,
    target_accuracy: float | None = None,
    costs: Sequence[float] | None = None,
    title: str | None = None,
    *,
    threshold: float | None = None,
    use_lower_bound: bool = False,
    per_class: bool = False,
    interval: IntervalMethod = "wilson",
    level: float = 0.95,
    n_bins: int = 15,
    temperature_how: str | None = None,
) -> Findings:
    """:func:`write_report` for a batch read in chunks (a :class:`~logitscope.chunked.ChunkedFrame`).

    Returns the findings rendered.

    The findings come from passes over the chunks (:func:`logitscope.findings.collect_chunked`), on dask's
    threaded scheduler or on the dask.distributed cluster of the active client; the page is the one
    :func:`write_report` writes for the same rows in memory. It states where a chunked number has a
    resolution (the drawn risk-coverage curve). Equal-width bins only; no relabel list, no split of your own.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from logitscope import load_demo
    >>> from logitscope.chunked import open_chunked, write_zarr
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> write_zarr(load_demo("helpdesk"), folder / "tickets.zarr", chunk_rows=400, drop_extras=True)
    >>> f = write_chunked_report(open_chunked(folder / "tickets.zarr"), folder / "r.html", target_accuracy=0.95)
    >>> f.threshold.choice.n_total, "histogram of the confidence" in (folder / "r.html").read_text()
    (1200, True)
    """
    from ..chunked.frame import ChunkedFrame
    from ..findings.chunked import collect_chunked, resolve_chunked

    if not isinstance(cf, ChunkedFrame):
        raise InputTypeError(f"write_chunked_report needs a ChunkedFrame, got {type(cf).__name__}")
    options = {
        "temperature": temperature, "fit_temperature": fit_temperature, "target_accuracy": target_accuracy,
        "costs": costs, "threshold": threshold, "use_lower_bound": use_lower_bound, "per_class": per_class,
        "interval": interval, "level": level, "n_bins": n_bins, "temperature_how": temperature_how,
    }  # fmt: skip
    found = collect_chunked(cf, *resolve_chunked(cf, **options))
    rows: Any = [] if found.suspects is None else found.suspects.rows
    page = build_report(_ChunkedPage(cf, rows), found, title=title)
    with atomic_write(path, "w") as fh:
        fh.write(page)
    return found
