"""The report's figures, drawn from findings: each function turns a finding's arrays into one inline SVG.

No number is computed here; the functions only place a finding's values on
a chart (scales, radii, which label fits). Colours and line styles come from
report.css.

- :func:`reliability_figure`: a dot per bin at (mean confidence, accuracy),
  its area growing with the bin's samples, a thin line from the dot to the
  reference line (the bin's gap), and a strip of counts below;
- :func:`sweep_figures`: NLL, ECE and Brier score against the temperature;
- :func:`coverage_figure`: accuracy of the accepted predictions against coverage;
- :func:`histogram_figure`: the confidences, right and wrong predictions apart;
- :func:`class_bars_figure`: predicted class counts (frames without labels);
- :func:`share_bar`: a small bar for a table cell.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from markupsafe import Markup

from ..findings import CalibrationSummary, ConfidenceHistogram, SweepFinding, ThresholdDecision
from .svg import Chart, IdSource
from .text import hover, short

__all__ = [
    "class_bars_figure",
    "coverage_figure",
    "histogram_figure",
    "reliability_figure",
    "share_bar",
    "sweep_figures",
]

#: Radii (pixels) of the smallest and the largest bin dot.
DOT_MIN, DOT_MAX = 2.5, 9.0


def reliability_figure(summary: CalibrationSummary, title: str, key: str, ids: IdSource) -> Markup:
    """A reliability diagram of ``summary``'s bins, with the counts strip under it.

    Every non-empty bin gets a dot with id ``bin-<key>-<b>`` carrying its
    range, count, accuracy and mean confidence in ``data-*`` attributes.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> from logitscope.findings import Binning, calibration_summary
    >>> frame = LogitFrame(np.log([[0.9, 0.1], [0.9, 0.1], [0.6, 0.4], [0.6, 0.4]]), labels=[0, 0, 0, 1])
    >>> svg = reliability_figure(calibration_summary(frame, binning=Binning(10)), "As given", "before", IdSource())
    >>> svg.count('class="bin-dot"'), 'id="bin-before-5"' in svg
    (2, True)
    """
    bins = summary.bins
    ch = Chart(
        x_domain=(0.0, 1.0),
        y_domain=(0.0, 1.0),
        width=400,
        height=300,
        title=title,
        y_label="accuracy",
        css_class="reliability",
        margin=(32, 14, 22, 56),
        ids=ids,
    )
    ch.line([0.0, 1.0], [0.0, 1.0], cls="reference")
    used = np.flatnonzero(bins.count > 0)
    most = float(bins.count.max()) if used.size else 1.0
    dots = []
    for b in used.tolist():
        c = int(bins.count[b])
        acc, conf = float(bins.accuracy[b]), float(bins.confidence[b])
        gap = float(bins.gap[b])
        side = "over" if gap < 0 else "under"
        words = "more confident than right" if gap < 0 else "less confident than right" if gap > 0 else "on the line"
        ch.segment(conf, conf, conf, acc, cls=f"gap {side}", tooltip=f"gap {gap:+.3f}: {words}")
        label = summary.bin_label(b)
        dots.append(
            (
                conf,
                acc,
                DOT_MIN + (DOT_MAX - DOT_MIN) * math.sqrt(c / most),
                {
                    "id": f"bin-{key}-{b}",
                    "data-bin": b,
                    "data-range": label,
                    "data-lower": float(bins.lower[b]),
                    "data-upper": float(bins.upper[b]),
                    "data-count": c,
                    "data-accuracy": acc,
                    "data-confidence": conf,
                },
                f"confidence {label}: {c:,} samples, accuracy {acc:.3f}, mean confidence {conf:.3f}",
            )
        )
    for conf, acc, r, data, tip in dots:  # dots over every gap line, whole even at accuracy 1
        ch.point(conf, acc, r=r, cls="bin-dot", data=data, tooltip=tip, clip=False)
    # bottom right: high confidence with low accuracy, where a bin hardly ever lies
    ch.legend(
        [
            ("bin-dot", "a bin (area: its samples)", "dot"),
            ("gap over", "more confident than right", "line"),
            ("gap under", "less confident than right", "line"),
            ("reference", "calibrated", "line"),
        ],
        "bottom-right",
    )
    counts = bins.count
    strip = Chart(
        x_domain=(0.0, 1.0),
        y_domain=(0.0, max(1.0, most) * 1.35),
        width=400,
        height=96,
        x_label="confidence (mean within each bin)",
        y_label="samples",
        margin=(6, 14, 40, 56),
        y_ticks=[0.0, most] if used.size else [],
        css_class="count-strip",
        ids=ids,
    )
    for b in used.tolist():
        lo, hi = float(bins.lower[b]), float(bins.upper[b])
        pad = (hi - lo) * 0.08
        n = int(counts[b])
        strip.rect(lo + pad, hi - pad, 0.0, float(n), cls="bar count", tooltip=f"{summary.bin_label(b)}: {n:,} samples")
        if (strip.sx(hi) - strip.sx(lo)) >= 5.0 * len(str(n)):  # the label fits over its bar
            strip.text((lo + hi) / 2, float(n), str(n), cls="count-label", dy=-3)
    return Markup("<div class='figure'>{}{}</div>").format(ch.to_svg(), strip.to_svg())


def sweep_figures(sweep: SweepFinding, marks: Sequence[tuple[float, str, str]], ids: IdSource) -> list[Markup]:
    """Three small plots (NLL, ECE, Brier against T on a log axis) with rules at the marked temperatures.

    ``marks`` are ``(temperature, css class, label)``; labels are written on the first plot only.
    """
    t = sweep.temperature
    out = []
    for i, (name, label) in enumerate((("nll", "NLL"), ("ece", "ECE"), ("brier", "Brier score"))):
        values = getattr(sweep, name)
        lo, hi = float(np.nanmin(values)), float(np.nanmax(values))
        span = hi - lo or max(abs(hi), 1e-3)
        ch = Chart(
            x_domain=(float(t.min()), float(t.max())),
            y_domain=(max(0.0, lo - 0.08 * span), hi + 0.08 * span),
            x_log=True,
            width=330,
            height=230,
            title=f"{label} against temperature",
            x_label="temperature T (log scale)",
            css_class=f"sweep sweep-{name}",
            margin=(30, 12, 42, 56),
            ids=ids,
        )
        for x, cls, lab in marks:
            ch.vline(x, cls=cls, label=lab if i == 0 else "")
        ch.line(t, values, cls=f"series {name}")
        best = sweep.best(name)
        ch.point(float(t[best]), float(values[best]), r=3.5, cls="minimum", tooltip=f"least {label} on the grid")
        out.append(ch.to_svg())
    return out


def coverage_figure(decision: ThresholdDecision, ids: IdSource) -> Markup:
    """Accuracy of the accepted predictions against coverage (the curve thinned by the findings' rule)."""
    cov, acc = decision.curve_points("accuracy")
    rule, choice = decision.rule, decision.choice
    target = rule.target_accuracy if rule.kind == "accuracy" else None
    low = min(float(np.nanmin(acc)) if acc.size else 1.0, 1.0 if target is None else target, decision.accuracy_all)
    y0 = max(0.0, math.floor((low - 0.02) * 20) / 20)
    ch = Chart(
        x_domain=(0.0, 1.0),
        y_domain=(y0, 1.0),
        width=440,
        height=320,
        title="Accuracy of accepted predictions",
        x_label="coverage (share accepted without review)",
        y_label="accuracy of accepted",
        css_class="coverage",
        ids=ids,
    )
    if acc.size:
        ch.line(np.r_[0.0, cov], np.r_[acc[0], acc], cls="series accuracy-curve")
    key = [("series accuracy-curve", "accuracy of accepted", "line"), ("chosen", "chosen threshold", "line")]
    if target is not None:
        ch.hline(target, cls="target")
        key.append(("target", f"target accuracy {target:g}", "line"))
    if choice.n_accepted > 0:
        ch.vline(choice.coverage, cls="chosen", label=f"threshold {choice.threshold:.4g}")
        ch.point(choice.coverage, choice.accuracy, r=5, cls="chosen-point", data={"id": "coverage-chosen-point"})
    ch.legend(key, "bottom-left")
    return ch.to_svg()


def histogram_figure(hist: ConfidenceHistogram, threshold: float | None, ids: IdSource) -> Markup:
    """The confidence histogram; right and wrong bars side by side when the frame has labels.

    When one bin dwarfs the others the count axis is logarithmic, so the few
    wrong predictions stay visible next to the many right ones.
    """
    edges = hist.edges
    if hist.right is None or hist.wrong is None:
        parts = [("bar all", hist.total, "all predictions")]
    else:
        parts = [("bar right", hist.right, "right"), ("bar wrong", hist.wrong, "wrong")]
    counts = np.concatenate([p[1] for p in parts])
    top = float(max(1, int(counts.max())))
    nonzero = counts[counts > 0]
    use_log = nonzero.size > 0 and top > 20 * float(np.median(nonzero))
    y_domain = (0.7, top * 1.8) if use_log else (0.0, top * 1.08)
    lo = float(edges[0])
    ch = Chart(
        x_domain=(lo, 1.0),
        y_domain=y_domain,
        y_log=use_log,
        width=440,
        height=320,
        title="Confidence of the predictions",
        x_label="confidence",
        y_label="samples" + (" (log scale)" if use_log else ""),
        css_class="confidence-histogram",
        ids=ids,
    )
    width = (float(edges[1]) - lo) / len(parts)
    for j, (cls, c, label) in enumerate(parts):
        for b in np.flatnonzero(c).tolist():
            x0 = float(edges[b]) + j * width
            tip = f"{label}, confidence {edges[b]:.2f}–{edges[b + 1]:.2f}: {int(c[b]):,}"
            data = {"data-part": cls.split()[-1], "data-bin": b, "data-count": int(c[b])}
            ch.rect(x0 + width * 0.08, x0 + width * 0.92, y_domain[0], float(c[b]), cls=cls, data=data, tooltip=tip)
    if threshold is not None and math.isfinite(threshold):
        ch.vline(min(max(threshold, lo), 1.0), cls="chosen", label=f"threshold {threshold:.4g}")
    ch.legend([(cls, label) for cls, _, label in parts])
    return ch.to_svg()


def class_bars_figure(classes: Sequence[str], counts: np.ndarray, ids: IdSource) -> Markup:
    """One bar per class (names cut to 10 characters below the bars, in full on hover; none past 36 classes)."""
    n = len(classes)
    named = n <= 36
    ch = Chart(
        x_domain=(0.0, float(n)),
        y_domain=(0.0, max(1.0, float(np.max(counts)) if n else 1.0) * 1.1),
        width=max(440, min(30 * n + 80, 1100)),
        height=300,
        title="Predicted classes",
        y_label="samples",
        x_ticks=[i + 0.5 for i in range(n)] if named else [],
        x_tick_labels=[short(c, 10) for c in classes] if named else [],
        x_label="" if named else f"{n:,} classes, in order (hover a bar for its name)",
        css_class="bars",
        ids=ids,
    )
    for i, (name, v) in enumerate(zip(classes, counts.tolist(), strict=True)):
        ch.rect(i + 0.15, i + 0.85, 0.0, float(v), cls="bar all", tooltip=f"{hover(name)}: {int(v):,}")
    return ch.to_svg()


def share_bar(value: float, most: float, width: int = 120) -> Markup:
    """A small horizontal bar for a table cell: ``value`` against the column's largest, ``most``."""
    frac = float(value) / float(most) if most and math.isfinite(float(most)) and math.isfinite(float(value)) else 0.0
    w = max(0.0, min(1.0, frac)) * width
    return Markup(
        '<svg class="share-bar" width="{0}" height="10" viewBox="0 0 {0} 10" aria-hidden="true">'
        '<rect class="share-track" x="0" y="1" width="{0}" height="8"/>'
        '<rect class="share-fill" x="0" y="1" width="{1}" height="8"/></svg>'
    ).format(width, f"{w:.1f}")
