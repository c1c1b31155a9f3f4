"""Build the self-contained HTML report: numbers from the analysis layer, plots from :mod:`.svg`.

The page loads nothing: styles are inline, plots are inline SVG, sample
thumbnails are ``data:`` PNGs, and a Content-Security-Policy forbids scripts
and every network request. Every string that comes from the data (class
names, ids, texts, metadata values, the title, the source path) is escaped
with :func:`html.escape`.

Each number carries its full-precision value in a ``data-value`` attribute
and a stable ``id`` (for example ``summary-ece-after``, ``threshold-coverage``,
``bin-after-3``), so tests and scripts can read the report back.
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
import io
import math
import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from importlib import resources
from typing import TYPE_CHECKING, Any, Literal

import numpy as np

from .. import __version__
from .. import analysis as an
from ..analysis.split import Split, random_split
from ..errors import LabelError, ParameterError
from .svg import Chart, attrs

if TYPE_CHECKING:
    from ..frame import LogitFrame

__all__ = ["ReportChoices", "build_report", "resolve_choices"]

IntervalMethod = Literal["wilson", "clopper-pearson"]

#: Rows shown in the relabelling table and the confused-pairs table.
N_CANDIDATES = 20
N_PAIRS = 10
#: Most points drawn for one curve (the numbers use every row).
MAX_CURVE_POINTS = 600
#: Fewest labelled rows for the held-out check.
MIN_ROWS_FOR_SPLIT = 20

esc = html.escape


# --------------------------------------------------------------------------- choices


@dataclass(frozen=True)
class ReportChoices:
    """The decisions a report is written for, resolved from the options.

    ``temperature`` is the decision temperature (the threshold and the
    relabelling candidates use it); ``compare_temperature`` is the one shown
    as "after temperature scaling" (the decision temperature when it differs
    from the frame's own, else the fitted one).
    """

    base_temperature: float
    temperature: float
    temperature_how: str
    fitted: an.TemperatureFit | None
    compare_temperature: float | None
    compare_how: str
    rule: str | None  # "accuracy", "cost", "fixed" or None
    target_accuracy: float | None
    costs: tuple[float, float] | None
    threshold: float | None
    use_lower_bound: bool
    per_class: bool
    interval: IntervalMethod
    level: float
    n_bins: int
    strategy: an.calibration.Strategy


def _positive(name: str, v: Any) -> float:
    try:
        f = float(v)
    except (TypeError, ValueError) as exc:
        raise ParameterError(f"{name} must be a number, got {v!r}") from exc
    return f


def resolve_choices(
    frame: LogitFrame,
    temperature: float | None = None,
    fit_temperature: bool = False,
    target_accuracy: float | None = None,
    costs: Sequence[float] | None = None,
    threshold: float | None = None,
    use_lower_bound: bool = False,
    per_class: bool = False,
    interval: IntervalMethod = "wilson",
    level: float = 0.95,
    n_bins: int = 15,
    strategy: an.calibration.Strategy = "uniform",
    temperature_how: str | None = None,
) -> ReportChoices:
    """Check the report options and settle the temperatures and the threshold rule.

    Raises
    ------
    ParameterError
        Conflicting or out-of-range options.
    LabelError
        An option that needs labels on a frame without them.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> frame = LogitFrame(np.array([[2.0, 0.0], [0.0, 1.0], [1.0, 0.0]]), labels=[0, 1, 1])
    >>> c = resolve_choices(frame, temperature=2.0, target_accuracy=0.9)
    >>> c.temperature, c.rule
    (2.0, 'accuracy')
    """
    if temperature is not None and fit_temperature:
        raise ParameterError("give either a temperature or fit_temperature=True, not both")
    rules = [r for r, v in (("accuracy", target_accuracy), ("cost", costs), ("fixed", threshold)) if v is not None]
    if len(rules) > 1:
        raise ParameterError(f"choose one threshold rule, got {' and '.join(rules)}")
    if interval not in ("wilson", "clopper-pearson"):
        raise ParameterError(f"interval must be 'wilson' or 'clopper-pearson', got {interval!r}")
    if not 0 < level < 1:
        raise ParameterError(f"level must lie in (0, 1), got {level!r}")
    if isinstance(n_bins, bool) or not isinstance(n_bins, int | np.integer) or n_bins < 1:
        raise ParameterError(f"n_bins must be a positive integer, got {n_bins!r}")
    if strategy not in ("uniform", "quantile"):
        raise ParameterError(f"strategy must be 'uniform' or 'quantile', got {strategy!r}")
    if target_accuracy is not None:
        target_accuracy = _positive("target_accuracy", target_accuracy)
        if not 0 < target_accuracy <= 1:
            raise ParameterError(f"target accuracy must lie in (0, 1], got {target_accuracy!r}")
    cost_pair: tuple[float, float] | None = None
    if costs is not None:
        try:
            e, r = (float(c) for c in costs)
        except (TypeError, ValueError) as exc:
            raise ParameterError(f"costs must be two numbers (error cost, review cost), got {costs!r}") from exc
        if not (math.isfinite(e) and math.isfinite(r)) or e < 0 or r < 0:
            raise ParameterError(f"costs must be non-negative numbers, got {e!r} and {r!r}")
        cost_pair = (e, r)
    if threshold is not None:
        threshold = _positive("threshold", threshold)
        if not 0 <= threshold <= 1:
            raise ParameterError(f"threshold must lie in [0, 1], got {threshold!r}")
    if not frame.has_labels:
        asked = [
            n
            for n, v in (
                ("fit_temperature", fit_temperature),
                ("target_accuracy", target_accuracy is not None),
                ("costs", cost_pair is not None),
                ("threshold", threshold is not None),
            )
            if v
        ]
        if asked:
            raise LabelError(f"{', '.join(asked)} needs labels; this frame has none (use with_labels)")
    base = frame.temperature
    fitted = None
    if frame.has_labels:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # a bound hit is reported in the page
            fitted = frame.fit_temperature()
    if temperature is not None:
        t = an.check_temperature(temperature)
        how = "set by hand"
        if fitted is not None and math.isclose(t, fitted.temperature, rel_tol=1e-9):
            how = "set by hand, equal to the fitted temperature"
    elif fit_temperature:
        assert fitted is not None
        t, how = fitted.temperature, "fitted: minimum NLL on all labelled rows"
    else:
        t, how = base, "as given"
    if temperature_how:
        how = str(temperature_how)
    if fitted is None:
        compare, compare_how = None, ""
    elif not math.isclose(t, base, rel_tol=1e-12):
        compare, compare_how = t, how
    else:
        compare, compare_how = fitted.temperature, "fitted, for comparison: the decisions below do not use it"
    return ReportChoices(
        base_temperature=base,
        temperature=t,
        temperature_how=how,
        fitted=fitted,
        compare_temperature=compare,
        compare_how=compare_how,
        rule=rules[0] if rules else None,
        target_accuracy=target_accuracy,
        costs=cost_pair,
        threshold=threshold,
        use_lower_bound=bool(use_lower_bound),
        per_class=bool(per_class),
        interval=interval,
        level=float(level),
        n_bins=int(n_bins),
        strategy=strategy,
    )


# --------------------------------------------------------------------------- small HTML pieces


def _fmt(v: Any, digits: int = 4, pct: bool = False) -> str:
    if v is None:
        return "n/a"
    if isinstance(v, bool | np.bool_):
        return "yes" if v else "no"
    if isinstance(v, int | np.integer):
        return f"{int(v):,}"
    f = float(v)
    if math.isnan(f):
        return "n/a"
    if math.isinf(f):
        return "∞" if f > 0 else "-∞"
    if pct:
        return f"{100 * f:.{max(digits - 2, 1)}f}%"
    return f"{f:.{digits}f}"


def _raw(v: Any) -> str:
    """The exact value for a ``data-value`` attribute."""
    if v is None:
        return ""
    if isinstance(v, bool | np.bool_):
        return "true" if v else "false"
    if isinstance(v, int | np.integer):
        return str(int(v))
    f = float(v)
    if math.isnan(f):
        return "nan"
    if math.isinf(f):
        return "inf" if f > 0 else "-inf"
    return repr(f)


def num(v: Any, id: str | None = None, tag: str = "td", digits: int = 4, pct: bool = False, cls: str = "num") -> str:
    """A cell holding a number: shown rounded, exact in ``data-value``."""
    return f"<{tag} {attrs({'id': id, 'class': cls, 'data-value': _raw(v)})}>{esc(_fmt(v, digits, pct))}</{tag}>"


def txt(s: Any, tag: str = "td", id: str | None = None, cls: str | None = None) -> str:
    """A cell holding text from anywhere (escaped)."""
    return f"<{tag} {attrs({'id': id, 'class': cls})}>{esc(str(s))}</{tag}>"


def _table(head: Sequence[str], rows: Sequence[str], id: str | None = None, cls: str = "data") -> str:
    """A table; a header text may hold a newline, shown as a line break (both lines escaped)."""
    th = "".join(f"<th>{'<br>'.join(esc(part) for part in h.split(chr(10)))}</th>" for h in head)
    return (
        f"<table {attrs({'id': id, 'class': cls})}><thead><tr>{th}</tr></thead><tbody>{''.join(rows)}</tbody></table>"
    )


def _section(id: str, title: str, body: str, intro: str = "") -> str:
    p = f"<p class='intro'>{intro}</p>" if intro else ""
    return f"<section {attrs({'id': id})}><h2>{esc(title)}</h2>{p}{body}</section>"


def _temp_label(t: float) -> str:
    return f"T = {t:.4g}"


# --------------------------------------------------------------------------- plots


def reliability_svg(bins: an.ReliabilityBins, title: str, key: str) -> str:
    """A reliability diagram with the gap to the diagonal shaded and a strip of bin counts below it."""
    ch = Chart(
        x_domain=(0.0, 1.0),
        y_domain=(0.0, 1.0),
        width=400,
        height=290,
        title=title,
        y_label="accuracy",
        css_class="reliability",
        margin=(32, 14, 22, 56),
    )
    ch.line([0, 1], [0, 1], cls="diagonal")
    hatch = ch.hatch("hatch-line")
    for b in range(bins.count.size):
        c = int(bins.count[b])
        if c == 0:
            continue
        lo, hi = float(bins.lower[b]), float(bins.upper[b])
        acc, conf = float(bins.accuracy[b]), float(bins.confidence[b])
        data = {
            "id": f"bin-{key}-{b}",
            "data-bin": b,
            "data-lower": lo,
            "data-upper": hi,
            "data-count": c,
            "data-accuracy": acc,
            "data-confidence": conf,
        }
        tip = f"confidence {lo:.3f} – {hi:.3f}: {c:,} samples, accuracy {acc:.3f}, mean confidence {conf:.3f}"
        pad = (hi - lo) * 0.06
        ch.rect(lo + pad, hi - pad, 0.0, acc, cls="bar accuracy", data=data, tooltip=tip)
        ch.rect(
            lo + pad,
            hi - pad,
            min(acc, conf),
            max(acc, conf),
            cls="gap",
            data={"fill": hatch},
            tooltip=f"gap {acc - conf:+.3f}",
        )
        ch.line([lo + pad, hi - pad], [conf, conf], cls="mean-confidence")
    ch.legend(
        [
            ("bar accuracy", "accuracy per bin"),
            ("gap", "gap to the diagonal", "box", hatch),
            ("mean-confidence", "mean confidence", "line"),
        ]
    )
    # the count strip under the diagram, on its own scale, with the shared x axis
    counts = bins.count.astype(float)
    strip = Chart(
        x_domain=(0.0, 1.0),
        y_domain=(0.0, max(1.0, float(counts.max())) * 1.3),
        width=400,
        height=96,
        x_label="confidence (maximum probability)",
        y_label="samples",
        margin=(4, 14, 40, 56),
        y_ticks=[],
        css_class="count-strip",
    )
    for b in range(counts.size):
        if counts[b] == 0:
            continue
        lo, hi = float(bins.lower[b]), float(bins.upper[b])
        pad = (hi - lo) * 0.06
        strip.rect(lo + pad, hi - pad, 0.0, counts[b], cls="bar count", tooltip=f"{int(counts[b]):,} samples")
        strip.text((lo + hi) / 2, counts[b], f"{int(counts[b])}", cls="count-label", dy=-3)
    return f"<div class='figure'>{ch.to_svg()}{strip.to_svg()}</div>"


def _thin(n: int, most: int = MAX_CURVE_POINTS) -> np.ndarray:
    """Indices of at most ``most`` points spread over ``n``, always keeping the first and last."""
    if n <= most:
        return np.arange(n)
    return np.unique(np.linspace(0, n - 1, most).round().astype(np.int64))


def sweep_svgs(sweep: an.TemperatureSweep, marks: Sequence[tuple[float, str, str]]) -> str:
    """Three small plots (NLL, ECE, Brier against T on a log axis) with rules at the marked temperatures."""
    t = sweep.temperature
    out = []
    for name, values, label in (
        ("nll", sweep.nll, "NLL"),
        ("ece", sweep.ece, "ECE"),
        ("brier", sweep.brier, "Brier score"),
    ):
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
        )
        for x, cls, lab in marks:
            ch.vline(x, cls=cls, label=lab if name == "nll" else "")
        ch.line(t, values, cls=f"series {name}")
        i = int(np.nanargmin(values))
        ch.point(float(t[i]), float(values[i]), r=3.5, cls="minimum")
        out.append(ch.to_svg())
    return "<div class='figure-row'>" + "".join(out) + "</div>"


def coverage_svg(
    rc: an.RiskCoverage, choice: an.ThresholdChoice | None, target: float | None, overall_accuracy: float
) -> str:
    """Accuracy of the accepted predictions against coverage, with the chosen point marked."""
    idx = _thin(rc.threshold.size)
    cov, acc = rc.coverage[idx], rc.accuracy[idx]
    lo = min(float(np.min(rc.accuracy)), target if target is not None else 1.0, overall_accuracy)
    y0 = max(0.0, math.floor((lo - 0.02) * 20) / 20)
    ch = Chart(
        x_domain=(0.0, 1.0),
        y_domain=(y0, 1.0),
        width=440,
        height=320,
        title="Accuracy of accepted predictions",
        x_label="coverage (share accepted without review)",
        y_label="accuracy of accepted",
        css_class="coverage",
    )
    ch.line(np.r_[0.0, cov], np.r_[acc[0], acc], cls="series accuracy-curve")
    if target is not None:
        side = "left" if choice is not None and choice.coverage > 0.6 else "right"
        ch.hline(target, cls="target", label=f"target {target:g}", label_side=side)
    if choice is not None and choice.n_accepted > 0:
        ch.vline(choice.coverage, cls="chosen", label=f"threshold {choice.threshold:.4g}")
        ch.point(choice.coverage, choice.accuracy, r=5, cls="chosen-point", data={"id": "coverage-chosen-point"})
    ch.legend(
        [("series accuracy-curve", "accuracy of accepted", "line"), ("chosen", "chosen threshold", "line")],
        "bottom-left",
    )
    return ch.to_svg()


def confidence_histogram_svg(
    confidence: np.ndarray, correct: np.ndarray | None, n_classes: int, threshold: float | None
) -> str:
    """Histogram of confidence (right and wrong predictions side by side when labels exist), threshold marked.

    When one bin dwarfs the others the count axis is logarithmic, so the few wrong
    predictions stay visible next to the many right ones.
    """
    lo = 1.0 / n_classes
    edges = np.linspace(lo, 1.0, 21)
    if correct is None:
        parts = [("bar all", np.histogram(confidence, edges)[0], "all predictions")]
    else:
        parts = [
            ("bar right", np.histogram(confidence[correct], edges)[0], "right"),
            ("bar wrong", np.histogram(confidence[~correct], edges)[0], "wrong"),
        ]
    counts = np.concatenate([p[1] for p in parts])
    top = float(max(1, int(counts.max())))
    nonzero = counts[counts > 0]
    use_log = nonzero.size > 0 and top > 20 * float(np.median(nonzero))
    y_domain = (0.7, top * 1.8) if use_log else (0.0, top * 1.08)
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
    )
    width = (edges[1] - edges[0]) / len(parts)
    for j, (cls, c, label) in enumerate(parts):
        for b in range(c.size):
            if c[b]:
                x0 = edges[b] + j * width
                ch.rect(
                    x0 + width * 0.08,
                    x0 + width * 0.92,
                    y_domain[0],
                    float(c[b]),
                    cls=cls,
                    tooltip=f"{label}: {int(c[b]):,}",
                )
    if threshold is not None and math.isfinite(threshold):
        ch.vline(min(max(threshold, lo), 1.0), cls="chosen", label=f"threshold {threshold:.4g}")
    ch.legend([(cls, label) for cls, _, label in parts])
    return ch.to_svg()


def _bar_svg(labels: Sequence[str], values: Sequence[float], title: str, y_label: str) -> str:
    n = len(labels)
    width = max(440, 30 * n + 80)
    ch = Chart(
        x_domain=(0.0, float(n)),
        y_domain=(0.0, max(1.0, float(max(values))) * 1.1),
        width=width,
        height=300,
        title=title,
        y_label=y_label,
        x_ticks=[i + 0.5 for i in range(n)],
        x_tick_labels=[lab if len(lab) <= 10 else lab[:9] + "…" for lab in labels],
        css_class="bars",
    )
    for i, (lab, v) in enumerate(zip(labels, values, strict=True)):
        ch.rect(i + 0.15, i + 0.85, 0.0, float(v), cls="bar all", tooltip=f"{lab}: {v:,.0f}")
    return ch.to_svg()


# --------------------------------------------------------------------------- thumbnails


def _thumbnail(frame: LogitFrame, row: int) -> str:
    """A cell showing the sample: a data: PNG for images, a short escaped snippet for texts."""
    p = frame.payload
    if p is None:
        return "<td></td>"
    if p.kind == "texts":
        t = str(p.data[row])
        return f"<td class='snippet'>{esc(t if len(t) <= 140 else t[:139] + '…')}</td>"
    if p.kind == "image_paths":
        return f"<td class='snippet'>{esc(str(p.data[row]))}</td>"
    try:
        from PIL import Image
    except ImportError:  # pragma: no cover - pillow is a dependency
        return "<td></td>"
    img = np.asarray(p.data[row])
    if img.dtype != np.uint8:
        lo, hi = float(np.min(img)), float(np.max(img))
        img = ((img - lo) / (hi - lo or 1.0) * 255).round().astype(np.uint8)
    if img.ndim == 3 and img.shape[2] == 1:
        img = img[:, :, 0]
    pil = Image.fromarray(img)
    scale = max(1, 48 // max(pil.size))
    pil = pil.resize((pil.size[0] * scale, pil.size[1] * scale), Image.Resampling.NEAREST)
    if max(pil.size) > 64:
        pil.thumbnail((64, 64))
    buf = io.BytesIO()
    pil.save(buf, format="PNG")
    uri = "data:image/png;base64," + base64.b64encode(buf.getvalue()).decode("ascii")
    return f"<td><img {attrs({'src': uri, 'alt': f'sample {frame.ids[row]}', 'class': 'thumb'})}></td>"


# --------------------------------------------------------------------------- sections


def _summary_section(frame: LogitFrame, ch: ReportChoices) -> str:
    from ..summary import summarize

    before = summarize(frame, temperature=ch.base_temperature, n_bins=ch.n_bins)
    cols = [("before", before, f"as given\n{_temp_label(ch.base_temperature)}")]
    if ch.compare_temperature is not None:
        after = summarize(frame, temperature=ch.compare_temperature, n_bins=ch.n_bins)
        cols.append(("after", after, f"temperature-scaled\n{_temp_label(ch.compare_temperature)}, {ch.compare_how}"))
    names = [
        ("accuracy", "accuracy"),
        *[(f"top_k_accuracy.{k}", f"top-{k} accuracy") for k in before.get("top_k_accuracy", {})],
        ("nll", "negative log-likelihood (NLL)"),
        ("brier", "Brier score"),
        ("ece", f"expected calibration error (ECE, {ch.n_bins} equal-width bins)"),
        ("mce", "maximum calibration error (MCE)"),
        ("aurc", "area under the risk-coverage curve (AURC)"),
        ("mean_confidence", "mean confidence"),
        ("mean_entropy", "mean entropy (nats)"),
    ]

    def get(d: Mapping[str, Any], key: str) -> Any:
        if "." in key:
            a, b = key.split(".")
            return d.get(a, {}).get(b)
        return d.get(key)

    rows = []
    for key, label in names:
        if get(before, key) is None:
            continue
        cells = "".join(num(get(d, key), id=f"summary-{key.replace('.', '-')}-{which}") for which, d, _ in cols)
        rows.append(f"<tr><th scope='row'>{esc(label)}</th>{cells}</tr>")
    head = ["", *[c[2] for c in cols]]
    counts = (
        f"<p class='counts'><span id='n-samples' data-value='{frame.n_samples}'>{frame.n_samples:,} samples</span>, "
        f"<span id='n-classes' data-value='{frame.n_classes}'>{frame.n_classes} classes</span>"
        f"{', labelled' if frame.has_labels else ', <strong>no labels</strong>'}.</p>"
    )
    fit_note = ""
    if ch.fitted is not None:
        f = ch.fitted
        bound = " It reached its bound: the NLL keeps falling towards it; treat it with care." if f.at_bound else ""
        fit_note = (
            f"<p>Temperature fitted by minimum NLL: "
            f"<span id='fitted-temperature' class='num' data-value='{_raw(f.temperature)}'>{f.temperature:.4f}</span> "
            f"(NLL {f.nll_before:.4f} at T = 1 → {f.nll_after:.4f}; {f.iterations} Newton steps).{bound}</p>"
        )
    used = (
        f"<p class='decision-t'>Threshold and relabelling candidates below use "
        f"<span id='decision-temperature' class='num' data-value='{_raw(ch.temperature)}'>"
        f"{_temp_label(ch.temperature)}</span> (<span id='decision-how'>{esc(ch.temperature_how)}</span>).</p>"
    )
    return _section("summary", "Summary", counts + _table(head, rows, id="summary-table") + fit_note + used)


def _calibration_section(frame: LogitFrame, ch: ReportChoices) -> str:
    figs = []
    temps = [("before", ch.base_temperature, "as given")]
    if ch.compare_temperature is not None:
        temps.append(("after", ch.compare_temperature, "after temperature scaling"))
    tables = []
    for key, t, label in temps:
        s = frame.sample_scores(t)
        assert s.correct is not None and s.true_log_probability is not None and s.brier is not None
        bins = an.reliability_bins(s.confidence, s.correct, ch.n_bins, ch.strategy)
        nll = float(-np.mean(s.true_log_probability))
        bri = float(np.mean(s.brier))
        numbers = (
            "<dl class='readout'>"
            f"<dt>ECE</dt><dd>{num(bins.ece, id=f'reliability-{key}-ece', tag='span')}</dd>"
            f"<dt>MCE</dt><dd>{num(bins.mce, id=f'reliability-{key}-mce', tag='span')}</dd>"
            f"<dt>NLL</dt><dd>{num(nll, id=f'reliability-{key}-nll', tag='span')}</dd>"
            f"<dt>Brier</dt><dd>{num(bri, id=f'reliability-{key}-brier', tag='span')}</dd>"
            "</dl>"
        )
        svg = reliability_svg(bins, f"{label.capitalize()}, {_temp_label(t)}", key)
        figs.append(f"<div class='panel'>{svg}{numbers}</div>")
        rows = [
            "<tr>"
            + txt(b)
            + txt(f"{bins.lower[b]:.3f} – {bins.upper[b]:.3f}")
            + num(int(bins.count[b]))
            + num(bins.accuracy[b])
            + num(bins.confidence[b])
            + num(bins.gap[b])
            + "</tr>"
            for b in range(bins.count.size)
        ]
        tables.append(
            f"<details><summary>Bins, {esc(label)} ({esc(_temp_label(t))})</summary>"
            + _table(
                ["bin", "confidence range", "samples", "accuracy", "mean confidence", "gap"], rows, id=f"bins-{key}"
            )
            + "</details>"
        )
    kind = "equal-width" if ch.strategy == "uniform" else "equal-mass"
    intro = (
        f"Samples are grouped into {ch.n_bins} {kind} bins by confidence. A calibrated model's bars meet the "
        "diagonal; shading above a bar means the model is more confident than it is right (over-confident), "
        "shading inside it means it is under-confident."
    )
    return _section(
        "calibration", "Reliability", "<div class='figure-row'>" + "".join(figs) + "</div>" + "".join(tables), intro
    )


def _sweep_grid(ch: ReportChoices) -> np.ndarray:
    marks = [ch.base_temperature, ch.temperature]
    if ch.fitted is not None:
        marks.append(ch.fitted.temperature)
    t_lo, t_hi = an.temperature.T_MIN, an.temperature.T_MAX  # the accepted range of a temperature
    lo = max(t_lo, min(0.25, *(m / 2 for m in marks)))
    hi = min(t_hi, max(4.0, *(m * 2 for m in marks)))
    return np.unique(np.r_[np.geomspace(lo, hi, 41), marks])


def _sweep_section(frame: LogitFrame, ch: ReportChoices) -> str:
    grid = _sweep_grid(ch)
    assert frame.labels is not None
    with an.assume_valid():
        sweep = an.temperature_sweep(frame.logits, frame.labels, grid, ch.n_bins, ch.strategy)
    marks = [(ch.base_temperature, "rule given", "as given")]
    if ch.fitted is not None:
        marks.append((ch.fitted.temperature, "rule fitted", "fitted"))
    if not any(math.isclose(ch.temperature, m[0]) for m in marks):
        marks.append((ch.temperature, "rule used", "used"))
    rows = [
        "<tr>"
        + num(t, id=f"sweep-t-{i}")
        + num(sweep.nll[i], id=f"sweep-nll-{i}")
        + num(sweep.ece[i], id=f"sweep-ece-{i}")
        + num(sweep.brier[i], id=f"sweep-brier-{i}")
        + num(sweep.mean_confidence[i])
        + "</tr>"
        for i, t in enumerate(sweep.temperature)
    ]
    table = (
        "<details><summary>Sweep values</summary>"
        + _table(["T", "NLL", "ECE", "Brier", "mean confidence"], rows, id="sweep-table")
        + "</details>"
    )
    intro = (
        "Dividing every logit by one temperature T changes the confidences but never the predicted class. "
        "The fitted T minimises the NLL; the dot on each curve marks its minimum over the grid."
    )
    return _section("sweep", "Temperature sweep", sweep_svgs(sweep, marks) + table, intro)


def _choose(
    conf: np.ndarray, ok: np.ndarray, ch: ReportChoices, target: float | None = None
) -> an.ThresholdChoice | None:
    if ch.rule == "accuracy":
        assert ch.target_accuracy is not None
        return an.threshold_for_accuracy(
            conf, ok, ch.target_accuracy, use_lower_bound=ch.use_lower_bound, level=ch.level, method=ch.interval
        )
    if ch.rule == "cost":
        assert ch.costs is not None
        return an.threshold_for_cost(conf, ok, ch.costs[0], ch.costs[1], level=ch.level, method=ch.interval)
    if ch.rule == "fixed":
        assert ch.threshold is not None
        return an.evaluate_threshold(conf, ok, ch.threshold, level=ch.level, method=ch.interval)
    return None


def _readout_rows(choice: an.ThresholdChoice, prefix: str) -> list[str]:
    lo, hi = choice.interval
    method = "Wilson score" if choice.interval_method == "wilson" else "Clopper-Pearson (exact)"
    rows = [
        ("rule", txt(choice.rule, id=f"{prefix}-rule")),
        (
            "confidence threshold",
            num(choice.threshold if math.isfinite(choice.threshold) else None, id=f"{prefix}-value"),
        ),
        ("coverage (accepted without review)", num(choice.coverage, id=f"{prefix}-coverage", pct=True, digits=4)),
        ("accepted", num(choice.n_accepted, id=f"{prefix}-accepted")),
        ("sent for review", num(choice.n_review, id=f"{prefix}-review")),
        ("accuracy of accepted", num(choice.accuracy, id=f"{prefix}-accuracy")),
        (
            f"{choice.level:.0%} interval ({method})",
            f"<td class='num'>[{num(lo, id=f'{prefix}-ci-low', tag='span')}, "
            f"{num(hi, id=f'{prefix}-ci-high', tag='span')}]</td>",
        ),
    ]
    if choice.expected_cost is not None:
        rows.append(("expected cost per sample", num(choice.expected_cost, id=f"{prefix}-cost")))
    if not choice.feasible:
        rows.append(
            ("note", txt("no threshold reaches the target; everything goes to review", id=f"{prefix}-infeasible"))
        )
    return [f"<tr><th scope='row'>{esc(a)}</th>{b}</tr>" for a, b in rows]


def _threshold_section(frame: LogitFrame, ch: ReportChoices) -> str:
    s = frame.sample_scores(ch.temperature)
    assert s.correct is not None
    conf, ok, pred = s.confidence, s.correct, s.predicted
    rc = an.risk_coverage_curve(conf, ok)
    choice = _choose(conf, ok, ch)
    target = ch.target_accuracy if ch.rule == "accuracy" else None
    chosen_t = choice.threshold if choice else None
    figs = (
        "<div class='figure-row'>"
        + f"<div class='panel'>{coverage_svg(rc, choice, target, float(np.mean(ok)))}</div>"
        + f"<div class='panel'>{confidence_histogram_svg(conf, ok, frame.n_classes, chosen_t)}</div>"
        + "</div>"
    )
    caution = f"<aside class='caution' id='caution'><strong>Caution.</strong> {esc(an.CAUTION)}</aside>"
    aurc = an.aurc(conf, ok)
    aurc_p = f"<p>AURC at {_temp_label(ch.temperature)}: {num(aurc, id='threshold-aurc', tag='span')}.</p>"
    if choice is None:
        body = (
            figs + aurc_p + "<p id='threshold-none'>No threshold rule was given. Pass a target accuracy "
            "(<code>--target-accuracy 0.98</code>) or the costs of an error and of a review "
            "(<code>--costs 10,1</code>) to choose one.</p>" + caution
        )
        return _section("threshold", "Review threshold", body)
    readout = _table(["", ""], _readout_rows(choice, "threshold"), id="threshold-readout", cls="readout-table")
    extra = ""
    if ch.rule == "cost" and ch.costs is not None:
        e, r = ch.costs
        n = conf.size
        all_in = e * float(np.sum(~ok)) / n
        extra = (
            "<p>For comparison: accepting everything costs "
            f"{num(all_in, id='cost-accept-all', tag='span')} per sample, "
            f"reviewing everything {num(r, id='cost-review-all', tag='span')}.</p>"
        )
    # per predicted class, at the one threshold
    rows = []
    for k in range(frame.n_classes):
        m = pred == k
        if not m.any():
            continue
        c = an.evaluate_threshold(conf[m], ok[m], choice.threshold, ch.level, ch.interval)
        lo, hi = c.interval
        rows.append(
            f"<tr {attrs({'data-class': k})}>"
            + txt(frame.classes[k], cls="class-name")
            + num(int(m.sum()))
            + num(c.n_accepted, id=f"class-{k}-accepted")
            + num(c.n_review, id=f"class-{k}-review")
            + num(c.coverage, id=f"class-{k}-coverage", pct=True)
            + num(c.accuracy, id=f"class-{k}-accuracy")
            + num(lo, id=f"class-{k}-ci-low")
            + num(hi, id=f"class-{k}-ci-high")
            + "</tr>"
        )
    per_class = "<h3>By predicted class, at this threshold</h3>" + _table(
        ["predicted class", "predicted", "accepted", "to review", "coverage", "accuracy", "low", "high"],
        rows,
        id="threshold-per-class",
    )
    own = ""
    if ch.rule == "accuracy" and ch.target_accuracy is not None:
        pcs = an.per_class_thresholds(
            conf, ok, pred, ch.target_accuracy, frame.n_classes, ch.level, ch.interval, ch.use_lower_bound
        )
        rows = []
        for k, pc in enumerate(pcs):
            if pc is None:
                continue
            rows.append(
                f"<tr {attrs({'data-class': k})}>"
                + txt(frame.classes[k], cls="class-name")
                + num(pc.threshold if math.isfinite(pc.threshold) else None, id=f"own-{k}-value")
                + num(pc.coverage, id=f"own-{k}-coverage", pct=True)
                + num(pc.accuracy, id=f"own-{k}-accuracy")
                + num(pc.interval[0], id=f"own-{k}-ci-low")
                + num(pc.interval[1], id=f"own-{k}-ci-high")
                + "</tr>"
            )
        own = (
            "<details><summary>One threshold per predicted class (same target)</summary>"
            + _table(
                ["predicted class", "threshold", "coverage", "accuracy", "low", "high"], rows, id="threshold-own-class"
            )
            + "<p>Classes with few samples get wide intervals; prefer one shared threshold unless each class has "
            "enough samples.</p></details>"
        )
    side = f"<div class='decision'>{readout}{extra}{caution}</div>"
    body = figs + "<div class='decision-row'>" + side + "</div>" + aurc_p + per_class + own
    intro = (
        "Predictions with confidence at or above the threshold are accepted; the rest go to a person. "
        f"Numbers at {_temp_label(ch.temperature)}, on the rows of this file."
    )
    return _section("threshold", "Review threshold", body, intro)


def _held_out_section(frame: LogitFrame, ch: ReportChoices, split: Split | None) -> str:
    assert frame.labels is not None
    if split is None:
        if frame.n_samples < MIN_ROWS_FOR_SPLIT:
            return ""
        split = random_split(frame.n_samples, 0.5, seed=0, stratify=frame.labels)
    fit_part, held = frame.subset(split.fit), frame.subset(split.held_out)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        t_fit = fit_part.fit_temperature().temperature
    rows = []
    for key, part, label in (("fit", fit_part, "fit part"), ("held", held, "held-out part")):
        s0, s1 = part.sample_scores(ch.base_temperature), part.sample_scores(t_fit)
        assert s0.correct is not None and s1.correct is not None
        assert s0.true_log_probability is not None and s1.true_log_probability is not None
        e0 = an.reliability_bins(s0.confidence, s0.correct, ch.n_bins, ch.strategy).ece
        e1 = an.reliability_bins(s1.confidence, s1.correct, ch.n_bins, ch.strategy).ece
        rows.append(
            f"<tr><th scope='row'>{esc(label)}</th>"
            + num(part.n_samples, id=f"split-{key}-n")
            + num(float(-np.mean(s0.true_log_probability)), id=f"split-{key}-nll-before")
            + num(float(-np.mean(s1.true_log_probability)), id=f"split-{key}-nll-after")
            + num(e0, id=f"split-{key}-ece-before")
            + num(e1, id=f"split-{key}-ece-after")
            + "</tr>"
        )
    head = [
        "",
        "samples",
        f"NLL, {_temp_label(ch.base_temperature)}",
        f"NLL, {_temp_label(t_fit)}",
        f"ECE, {_temp_label(ch.base_temperature)}",
        f"ECE, {_temp_label(t_fit)}",
    ]
    desc = split.description or "given split"
    body = (
        f"<p>{esc(desc[:1].upper() + desc[1:])}: {len(split.fit):,} rows to fit, {len(split.held_out):,} "
        f"held out. Temperature fitted on the fit part: "
        f"<span id='split-fitted-temperature' class='num' data-value='{_raw(t_fit)}'>{t_fit:.4f}</span>.</p>"
        + _table(head, rows, id="split-table")
    )
    if ch.rule is not None:
        s_fit, s_held = fit_part.sample_scores(ch.temperature), held.sample_scores(ch.temperature)
        assert s_fit.correct is not None and s_held.correct is not None
        chosen = _choose(s_fit.confidence, s_fit.correct, ch)
        assert chosen is not None
        judged = an.evaluate_threshold(s_held.confidence, s_held.correct, chosen.threshold, ch.level, ch.interval)
        lo, hi = judged.interval
        body += (
            f"<p>The threshold rule applied to the fit part gives "
            f"{num(chosen.threshold if math.isfinite(chosen.threshold) else None, id='split-threshold', tag='span')} "
            f"(accuracy {num(chosen.accuracy, id='split-threshold-fit-accuracy', tag='span')} there). "
            f"On the held-out part it accepts {num(judged.coverage, id='split-held-coverage', tag='span', pct=True)} "
            f"with accuracy {num(judged.accuracy, id='split-held-accuracy', tag='span')} "
            f"[{num(lo, id='split-held-ci-low', tag='span')}, {num(hi, id='split-held-ci-high', tag='span')}].</p>"
        )
    intro = (
        "A temperature or threshold judged on the rows it was fitted on looks better than it is. "
        "Here both are fitted on one part and judged on the other."
    )
    return _section("held-out", "Held-out check", body, intro)


def _confusion_section(frame: LogitFrame, ch: ReportChoices) -> str:
    assert frame.labels is not None
    s = frame.sample_scores(ch.temperature)
    m = an.confusion_matrix(frame.labels, s.predicted, frame.n_classes)
    pairs = an.most_confused_pairs(m, n=N_PAIRS)
    if not pairs:
        return _section("confused", "Most confused pairs", "<p id='confused-none'>No sample is misclassified.</p>")
    top = max(p.count for p in pairs)
    rows = []
    for i, p in enumerate(pairs):
        bar = f"<span class='inline-bar' style='width:{100 * p.count / top:.1f}%'></span>"
        rows.append(
            f"<tr {attrs({'id': f'pair-{i}', 'data-true': p.true, 'data-predicted': p.other})}>"
            + txt(frame.classes[p.true], cls="class-name")
            + txt(frame.classes[p.other], cls="class-name")
            + num(p.count, id=f"pair-{i}-count")
            + num(p.rate, id=f"pair-{i}-rate", pct=True)
            + f"<td class='bar-cell'>{bar}</td></tr>"
        )
    intro = "The largest off-diagonal cells of the confusion matrix; the share is of the true class's samples."
    table = _table(["true class", "predicted as", "samples", "share of true class", ""], rows, id="confused-pairs")
    return _section("confused", "Most confused pairs", table, intro)


def _candidates_section(frame: LogitFrame, ch: ReportChoices) -> str:
    assert frame.labels is not None
    with an.assume_valid():
        ranking = an.rank_label_issues(frame.logits, frame.labels, "confident_learning", temperature=ch.temperature)
    top = ranking.top(N_CANDIDATES)
    if len(top) == 0:
        return _section(
            "relabel",
            "Candidates for relabelling",
            "<p id='relabel-none'>No sample is flagged by confident learning.</p>",
        )
    rows_idx = top.index
    with an.assume_valid():
        probs = an.softmax(np.asarray(frame.logits[rows_idx]), temperature=ch.temperature)
    given = frame.labels[rows_idx]
    rows = []
    for i, r in enumerate(rows_idx):
        g, sug = int(given[i]), int(top.suggested[i])
        rows.append(
            f"<tr {attrs({'id': f'candidate-{i}', 'data-row': int(r), 'data-given': g, 'data-suggested': sug})}>"
            + num(i + 1)
            + _thumbnail(frame, int(r))
            + txt(frame.ids[r], cls="sample-id")
            + txt(frame.classes[g], cls="class-name")
            + txt(frame.classes[sug], cls="class-name")
            + num(float(probs[i, g]), id=f"candidate-{i}-p-given")
            + num(float(probs[i, sug]), id=f"candidate-{i}-p-suggested")
            + "</tr>"
        )
    head = ["rank", "sample", "id", "given label", "suggested label", "p(given)", "p(suggested)"]
    intro = (
        f"<span id='relabel-flagged' data-value='{len(ranking)}'>{len(ranking):,}</span> samples are flagged by "
        "confident learning (Northcutt, Jiang and Chuang 2021); the most suspect are listed first. The ranking is "
        "only as good as the logits: it needs out-of-sample (cross-validated) predictions."
    )
    return _section("relabel", "Candidates for relabelling", _table(head, rows, id="relabel-table"), intro)


def _unlabelled_sections(frame: LogitFrame, ch: ReportChoices) -> str:
    s = frame.sample_scores(ch.temperature)
    counts = np.bincount(s.predicted, minlength=frame.n_classes)
    rows = [
        "<tr><th scope='row'>mean confidence</th>"
        + num(float(np.mean(s.confidence)), id="summary-mean_confidence-before")
        + "</tr>",
        "<tr><th scope='row'>mean entropy (nats)</th>"
        + num(float(np.mean(s.entropy)), id="summary-mean_entropy-before")
        + "</tr>",
    ]
    head = (
        f"<p class='counts'><span id='n-samples' data-value='{frame.n_samples}'>{frame.n_samples:,} samples</span>, "
        f"<span id='n-classes' data-value='{frame.n_classes}'>{frame.n_classes} classes</span>, "
        f"<strong>no labels</strong>. Numbers at {_temp_label(ch.temperature)}.</p>"
    )
    summary = _section(
        "summary", "Summary", head + _table(["", f"as given, {_temp_label(ch.temperature)}"], rows, id="summary-table")
    )
    crow = [
        f"<tr {attrs({'data-class': k})}>"
        + txt(frame.classes[k], cls="class-name")
        + num(int(counts[k]), id=f"predicted-{k}-count")
        + num(counts[k] / frame.n_samples, pct=True)
        + "</tr>"
        for k in range(frame.n_classes)
    ]
    figs = (
        "<div class='figure-row'>"
        f"<div class='panel'>{confidence_histogram_svg(s.confidence, None, frame.n_classes, None)}</div>"
        f"<div class='panel'>{_bar_svg(list(frame.classes), counts.tolist(), 'Predicted classes', 'samples')}</div>"
        "</div>"
    )
    predictions = _section(
        "predictions",
        "Predictions",
        figs + _table(["predicted class", "samples", "share"], crow, id="predicted-counts"),
    )
    needs = _section(
        "needs-labels",
        "What needs labels",
        "<p id='needs-labels-list'>This file has no labels, so the report cannot show: accuracy, NLL, Brier score, "
        "calibration errors and the reliability diagram; the temperature fit and sweep; the accuracy-coverage "
        "curve and a review threshold; the most confused pairs; the candidates for relabelling. Add labels "
        "(<code>frame.with_labels(...)</code>) to get them.</p>",
    )
    return summary + predictions + needs


# --------------------------------------------------------------------------- page

_CSS = resources.files(__package__).joinpath("report.css").read_text(encoding="utf-8")

_CSP = "default-src 'none'; style-src 'unsafe-inline'; img-src data:; base-uri 'none'; form-action 'none'"


def build_report(
    frame: LogitFrame,
    choices: ReportChoices,
    title: str | None = None,
    split: Split | None = None,
) -> str:
    """The report as one HTML document (a string).

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> frame = LogitFrame(np.array([[2.0, 0.0], [0.0, 1.0], [1.0, 0.0]]), labels=[0, 1, 1])
    >>> page = build_report(frame, resolve_choices(frame, target_accuracy=0.9), title="<b>t</b>")
    >>> page.startswith("<!DOCTYPE html>"), "&lt;b&gt;t&lt;/b&gt;" in page, "<script" in page
    (True, True, False)
    """
    title = title or "Classifier report"
    when = _dt.datetime.now().astimezone().strftime("%Y-%m-%d %H:%M %Z")
    if frame.has_labels:
        body = (
            _summary_section(frame, choices)
            + _calibration_section(frame, choices)
            + _sweep_section(frame, choices)
            + _threshold_section(frame, choices)
            + _held_out_section(frame, choices, split)
            + _confusion_section(frame, choices)
            + _candidates_section(frame, choices)
        )
    else:
        body = _unlabelled_sections(frame, choices)
    source = f" · source {frame.source}" if frame.source else ""
    return (
        "<!DOCTYPE html>\n<html lang='en'><head><meta charset='utf-8'>"
        f"<meta http-equiv='Content-Security-Policy' content=\"{_CSP}\">"
        "<meta name='viewport' content='width=device-width, initial-scale=1'>"
        f"<meta name='generator' content='logitscope {esc(__version__)}'>"
        f"<title>{esc(title)}</title><style>{_CSS}</style></head><body>"
        f"<header><h1 id='report-title'>{esc(title)}</h1>"
        f"<p>{frame.n_samples:,} samples × {frame.n_classes} classes{esc(source)} · written {esc(when)} "
        f"by logitscope {esc(__version__)}</p></header>"
        f"<main>{body}</main>"
        "<footer>Self-contained report: no scripts, nothing loaded from the network.</footer>"
        "</body></html>\n"
    )
