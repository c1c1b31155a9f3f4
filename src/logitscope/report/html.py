"""Lay out the report: a :class:`~logitscope.findings.Findings` in, one HTML document out.

The page is rendered by Jinja2 templates (``templates/``) with autoescaping
on, so every string that comes from the data (class names, ids, texts,
notes, the title, the source path) is escaped by construction; the figures
(:mod:`.figures`) arrive as :class:`markupsafe.Markup` built from escaped
parts. No number is computed here: every value shown is a field of a
finding, so the report says what the calibration panel says for the same
choices.

The page loads nothing: styles are inline (``report.css``, allowed by its
hash in the Content-Security-Policy), plots are inline SVG, sample
thumbnails are ``data:`` PNGs, and the policy forbids scripts and every
network request. Each number carries its full-precision value in a
``data-value`` attribute and a stable ``id`` (for example
``summary-ece-after``, ``threshold-coverage``, ``bin-after-3``), so tests and
scripts can read the report back. Element ids of the figures come from one
counter per page, so the same input gives the same page apart from the
time stamp (``<time id="written">``).
"""

from __future__ import annotations

import base64
import datetime as _dt
import hashlib
import math
from collections.abc import Iterable, Mapping
from importlib import resources
from typing import TYPE_CHECKING, Any, Protocol

import numpy as np
from jinja2 import Environment, FileSystemBytecodeCache, PackageLoader, StrictUndefined
from markupsafe import Markup

from .. import __version__
from .. import analysis as an
from ..findings import INTERVAL_NAMES, CalibrationSummary, Findings
from ..thumbnails import ThumbnailCache, snippet
from . import figures as fig
from .svg import IdSource
from .text import fmt_value, hover, raw_value, short, temp_label

if TYPE_CHECKING:
    from ..checkpoints import FrameComparison

__all__ = ["CSP", "CSS", "ReportFrame", "build_report", "mark_rows"]


class ReportFrame(Protocol):
    """What the page reads of the data besides the findings: a :class:`~logitscope.LogitFrame`, or for a batch
    read in chunks the few ids and names the page shows (:func:`logitscope.report.write_chunked_report`)."""

    @property
    def payload(self) -> Any: ...
    @property
    def ids(self) -> Any: ...
    @property
    def classes(self) -> tuple[str, ...]: ...
    @property
    def source(self) -> str: ...
    @property
    def n_samples(self) -> int: ...
    @property
    def n_labelled(self) -> int: ...
    @property
    def n_classes(self) -> int: ...


#: Long side of a sample thumbnail in the report, in pixels.
THUMBNAIL_SIZE = 48
#: Characters of a text sample shown in a table cell.
SNIPPET_LIMIT = 140
#: Beyond this many classes the per-class tables start folded.
MANY_CLASSES = 30

CSS = resources.files(__package__).joinpath("report.css").read_text(encoding="utf-8")
_CSS_HASH = base64.b64encode(hashlib.sha256(CSS.encode("utf-8")).digest()).decode("ascii")
#: The page's Content-Security-Policy: nothing from anywhere, the one style block by its hash, data: images.
CSP = f"default-src 'none'; style-src 'sha256-{_CSS_HASH}'; img-src data:; base-uri 'none'; form-action 'none'"


def _is_finite(v: Any) -> bool:
    try:
        return v is not None and math.isfinite(float(v))
    except (TypeError, ValueError):
        return False


def _bytecode_cache() -> FileSystemBytecodeCache | None:
    """Jinja2's cache of compiled templates in the user's own temporary folder (compiling them takes longer
    than rendering a report); None where that folder cannot be made safely."""
    try:
        return FileSystemBytecodeCache()
    except (OSError, RuntimeError):
        return None


_ENV = Environment(
    loader=PackageLoader("logitscope.report", "templates"),
    bytecode_cache=_bytecode_cache(),
    autoescape=True,
    undefined=StrictUndefined,
    trim_blocks=True,
    lstrip_blocks=True,
    keep_trailing_newline=True,
)
_ENV.filters.update(fmt=fmt_value, raw=raw_value, short=short, hover=hover, temp=temp_label)
_ENV.tests["finite_number"] = _is_finite


# --------------------------------------------------------------------------- previews


def _preview(frame: ReportFrame, row: int | None, cache: ThumbnailCache) -> dict[str, Any]:
    """What the sample cell shows: a data: PNG for images, an escaped snippet for texts, or nothing."""
    p = frame.payload
    if p is None or row is None:
        return {"kind": "none"}
    if p.kind == "texts":
        full = str(p.data[row])
        text = snippet(full, SNIPPET_LIMIT)
        return {"kind": "text", "text": text, "full": full, "cut": text != full}
    thumb = cache.get(row)
    if thumb is None:
        return {"kind": "none"}
    if thumb.png is None:
        message = thumb.error or "the image could not be read"
        return {"kind": "error", "text": short(message, 60), "full": message}
    uri = "data:image/png;base64," + base64.b64encode(thumb.png).decode("ascii")
    return {
        "kind": "image",
        "src": uri,
        "width": thumb.width,
        "height": thumb.height,
        "alt": f"sample {frame.ids[row]}",
    }


# --------------------------------------------------------------------------- another checkpoint


def comparison_context(c: FrameComparison) -> dict[str, Any]:
    """What the comparison section shows, read from the comparison (no number is computed here)."""
    cmp = c.comparison
    out: dict[str, Any] = {
        "other": str(c.aligned.names[1]),
        "n": cmp.n_samples,
        "only_a": int(c.only_in_a.size),
        "only_b": int(c.only_in_b.size),
        "t_a": c.a.temperature,
        "t_b": c.b.temperature,
        "agreement": cmp.agreement,
        "confidence_change": cmp.mean_abs_confidence_change,
        "accuracy_a": cmp.accuracy_a,
        "accuracy_b": cmp.accuracy_b,
        "mcnemar_p": cmp.mcnemar_p,
        "flips": None,
        "classes": [],
    }
    if c.flips is not None:
        table = c.flips.to_frame()
        out["flips"] = [
            {"key": key, "description": row["description"], "count": int(row["count"]), "share": float(row["share"])}
            for key, (_, row) in zip(an.FLIP_CELLS, table.iterrows(), strict=True)
        ]
    if c.per_class is not None:
        per = c.per_class_frame()
        out["classes"] = [
            {"name": name, "support": int(r["support"]), "accuracy_a": _nan_none(r["accuracy_a"]),
             "accuracy_b": _nan_none(r["accuracy_b"]), "change": _nan_none(r["change"]), "fixed": int(r["fixed"]),
             "broken": int(r["broken"]), "p_holm": _nan_none(r["mcnemar_p_holm"])}
            for name, r in per.iterrows()
        ]  # fmt: skip
    return out


def _nan_none(v: Any) -> float | None:
    v = float(v)
    return None if math.isnan(v) else v


# --------------------------------------------------------------------------- relabel marks


def _plain_id(value: Any) -> Any:
    return value.item() if isinstance(value, np.generic) else value


def mark_rows(frame: ReportFrame, marks: Iterable[Mapping[str, Any]]) -> list[dict[str, Any]]:
    """The relabel marks as table rows; ``row`` is None for a mark whose id is not at its row in ``frame``.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> frame = LogitFrame(np.zeros((2, 2)), ids=["T-1", "T-2"], classes=["billing", "shipping"])
    >>> rows = mark_rows(frame, [{"id": "T-2", "row": 1, "suggested_label": "billing"}, {"id": "T-9", "row": 0}])
    >>> [(r["id"], r["row"]) for r in rows]
    [('T-2', 1), ('T-9', None)]
    """
    out = []
    for mk in marks:
        mid = _plain_id(mk.get("id"))
        row = mk.get("row")
        ok, r = False, -1
        if row is not None and not (isinstance(row, float) and math.isnan(row)):
            try:
                r = int(row)
            except (TypeError, ValueError):
                r = -1
            if 0 <= r < frame.n_samples:
                have = _plain_id(frame.ids[r])
                ok = have == mid or str(have) == str(mid)
        out.append(
            {
                "id": "" if mid is None else str(mid),
                "row": r if ok else None,
                "given": "" if mk.get("given_label") is None else str(mk.get("given_label")),
                "suggested": "" if mk.get("suggested_label") is None else str(mk.get("suggested_label")),
                "note": "" if mk.get("note") is None else str(mk.get("note")),
                "marked_at": "" if mk.get("marked_at") is None else str(mk.get("marked_at")),
            }
        )
    return out


# --------------------------------------------------------------------------- the page


def _summary_table(f: Findings) -> dict[str, Any]:
    assert f.before is not None
    t = f.temperatures
    cols = [("before", f.before, ["as given", temp_label(t.base)])]
    if f.after is not None:
        cols.append(
            ("after", f.after, ["temperature-scaled", f"{temp_label(t.compare or 1.0)}, {short(t.compare_how, 80)}"])
        )
    names: list[tuple[str, str, Any]] = [("accuracy", "accuracy", lambda s: s.accuracy)]
    for k in f.before.top_k:
        names.append((f"top_k_accuracy-{k}", f"top-{k} accuracy", lambda s, k=k: s.top_k.get(k)))
    names += [
        ("nll", "negative log-likelihood (NLL)", lambda s: s.nll),
        ("brier", "Brier score", lambda s: s.brier),
        ("ece", f"expected calibration error (ECE, {f.choices.binning.describe()})", lambda s: s.ece),
        ("mce", "maximum calibration error (MCE)", lambda s: s.mce),
        ("aurc", "area under the risk-coverage curve (AURC)", lambda s: s.aurc),
        ("mean_confidence", "mean confidence", lambda s: s.mean_confidence),
        ("mean_entropy", "mean entropy (nats)", lambda s: s.mean_entropy),
    ]
    rows = [
        {"label": label, "cells": [(get(s), f"summary-{key}-{which}") for which, s, _ in cols]}
        for key, label, get in names
    ]
    return {"columns": [c[2] for c in cols], "rows": rows}


def _passes(fit: an.TemperatureFit | None) -> int | None:
    """Passes over the data a temperature fit made.

    ``TemperatureFit.iterations`` counts passes over all rows (see
    :func:`logitscope.analysis.fit_temperature`); a ``passes`` field, where the
    fit carries one, is read first.
    """
    if fit is None:
        return None
    return int(getattr(fit, "passes", fit.iterations))


def _labelled_context(frame: ReportFrame, f: Findings, ids: IdSource, cache: ThumbnailCache) -> dict[str, Any]:
    assert f.before is not None and f.sweep is not None and f.suspects is not None and f.histogram is not None
    t = f.temperatures
    reliability = [
        {
            "key": "before",
            "label": "as given",
            "summary": f.before,
            "figure": fig.reliability_figure(f.before, f"As given, {temp_label(t.base)}", "before", ids),
        }
    ]
    if f.after is not None:
        reliability.append(
            {
                "key": "after",
                "label": "after temperature scaling",
                "summary": f.after,
                "figure": fig.reliability_figure(
                    f.after, f"After temperature scaling, {temp_label(f.after.temperature)}", "after", ids
                ),
            }
        )
    for panel in reliability:
        summary = panel["summary"]
        assert isinstance(summary, CalibrationSummary)
        panel["bins"] = np.flatnonzero(summary.bins.count > 0).tolist()
    marks = [(t.base, "rule given", "as given")]
    if t.fitted is not None:
        marks.append((t.fitted.temperature, "rule fitted", "fitted"))
    if not any(math.isclose(t.decision, m[0], rel_tol=1e-9) for m in marks):
        marks.append((t.decision, "rule decision", "decision"))
    chosen = None if f.threshold is None else f.threshold.threshold
    figures = {"histogram": fig.histogram_figure(f.histogram, chosen, ids)}
    if f.threshold is not None:
        figures["coverage"] = fig.coverage_figure(f.threshold, ids)
    s = f.suspects
    doubts = [
        {
            "row": int(r),
            "id": frame.ids[int(r)],
            "given": int(s.given[i]),
            "suggested": int(s.suggested[i]),
            "p_given": float(s.p_given[i]),
            "p_suggested": float(s.p_suggested[i]),
            "preview": _preview(frame, int(r), cache),
        }
        for i, r in enumerate(s.rows.tolist())
    ]
    binning = f.choices.binning
    return {
        "summary": _summary_table(f),
        "fit_passes": _passes(t.fitted),
        "held_passes": _passes(None if f.held_out is None else f.held_out.fitted),
        "reliability": reliability,
        "intro_reliability": (
            f"Samples are grouped into {binning.describe()} by confidence. Each dot is one bin, placed at its mean "
            "confidence (across) and its accuracy (up); its area grows with the bin's samples, which the strip "
            "below counts. A calibrated model's dots lie on the reference line. The thin line from a dot to the "
            "reference is the bin's gap: amber where the model is more confident than right, slate where less."
        ),
        "sweep_figures": fig.sweep_figures(f.sweep, marks, ids),
        "figures": figures,
        "doubts": doubts,
    }


def build_report(
    frame: ReportFrame,
    findings: Findings,
    title: str | None = None,
    marks: Iterable[Mapping[str, Any]] | None = None,
    marks_source: str = "",
    written: _dt.datetime | None = None,
    comparison: FrameComparison | None = None,
) -> str:
    """The report of ``findings`` (computed for ``frame``) as one HTML document.

    Parameters
    ----------
    frame : LogitFrame
        Gives the class names, sample ids and the payload for previews.
    findings : Findings
        Every number shown (:func:`logitscope.findings.collect`).
    title : str, optional
    marks : iterable of dict, optional
        Relabel marks (the records of a :class:`logitscope.relabel_store.RelabelStore`); a section lists them.
    marks_source : str
        Where the marks come from (shown).
    written : datetime, optional
        The time stamp (default now).
    comparison : FrameComparison, optional
        This frame (A) against another checkpoint's (B) (:func:`logitscope.checkpoints.compare_frames`);
        a section renders its flip table, McNemar test and per-class change.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> from logitscope.findings import collect, resolve_choices
    >>> frame = LogitFrame(np.array([[2.0, 0.0], [0.0, 1.0], [1.0, 0.0]]), labels=[0, 1, 1])
    >>> page = build_report(frame, collect(frame, *resolve_choices(frame, target_accuracy=0.9)), title="<b>t</b>")
    >>> page.startswith("<!DOCTYPE html>"), "&lt;b&gt;t&lt;/b&gt;" in page, "<script" in page
    (True, True, False)
    """
    ids = IdSource()
    cache = ThumbnailCache(frame.payload, size=THUMBNAIL_SIZE, max_items=64)
    when = (written or _dt.datetime.now()).astimezone()
    mark_list = None if marks is None else mark_rows(frame, marks)
    nav = [("summary", "Summary")]
    if findings.labelled:
        nav += [("calibration", "Reliability"), ("sweep", "Temperature"), ("threshold", "Review threshold")]
        if findings.held_out is not None:
            nav.append(("held-out", "Held-out check"))
        nav += [("mixups", "Mix-ups"), ("doubtful", "Doubtful labels")]
        context = _labelled_context(frame, findings, ids, cache)
    else:
        nav += [("predictions", "Predictions"), ("needs-labels", "What needs labels")]
        assert findings.histogram is not None
        context = {
            "figures": {
                "histogram": fig.histogram_figure(findings.histogram, None, ids),
                "classes": fig.class_bars_figure(frame.classes, findings.predictions.predicted_counts, ids),
            }
        }
    if mark_list is not None:
        nav.append(("marks", "Your relabel list"))
        marked = {r["row"] for r in mark_list if r["row"] is not None}
        for d in context.get("doubts", []):
            d["marked"] = d["row"] in marked
        for r in mark_list:
            r["preview"] = _preview(frame, r["row"], cache)
    if comparison is not None:
        nav.append(("comparison", "Against another checkpoint"))
    marks_context = None
    if mark_list is not None:
        unmatched = sum(r["row"] is None for r in mark_list)
        marks_context = {"rows": mark_list, "path": marks_source, "n_unmatched": unmatched}
    template = _ENV.get_template("report.html.j2")
    return template.render(
        f=findings,
        title=str(title or "Classifier report"),
        version=__version__,
        css=Markup(CSS),
        csp=CSP,
        written=when.strftime("%Y-%m-%d %H:%M %Z"),
        written_iso=when.isoformat(timespec="seconds"),
        source=str(frame.source or ""),
        n_samples=frame.n_samples,
        n_labelled=frame.n_labelled,
        n_classes=frame.n_classes,
        classes=frame.classes,
        caution=an.CAUTION,
        interval_names=INTERVAL_NAMES,
        share_bar=fig.share_bar,
        nav=nav,
        many_classes=MANY_CLASSES,
        read_in_chunks=bool(getattr(frame, "read_in_chunks", False)),
        marks=marks_context,
        cmp=None if comparison is None else comparison_context(comparison),
        **context,
    )
