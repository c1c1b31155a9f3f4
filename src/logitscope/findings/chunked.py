"""The findings of a report for a batch read in chunks: the same :class:`Findings` as in memory.

:func:`collect_chunked` computes, from passes over the chunks of a
:class:`~logitscope.chunked.ChunkedFrame`, the :class:`~logitscope.findings.Findings`
that :func:`logitscope.findings.collect` computes for the same rows in memory:
counts equal, sums equal up to the order of float64 additions, the report's own
held-out split the same rows (by row hash). No step holds the logit matrix; the
largest arrays held are the wrong samples' confidences (16 bytes per wrong sample).

What differs, and why:

- the drawn risk-coverage curve (:attr:`ThresholdDecision.curve`) comes from a
  fine histogram of the confidence (thresholds every ``2**-12`` relative, stated
  on the page); the threshold, its readouts and the AURC are exact;
- per-row arrays are not kept: ``CalibrationSummary.bins.bin_of`` is empty,
  ``rows`` and ``Findings.split`` are None (the split is described by its
  rule, ``HeldOutCheck.description``);
- equal-mass bins and a split of the user's need a global order or a row list
  and are offered in memory only (a :class:`~logitscope.errors.ParameterError` says so).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from .. import analysis as an
from ..errors import LabelError, ParameterError
from .calibration import CalibrationSummary, PredictionSummary
from .choices import Binning, Choices, ThresholdRule
from .collect import MIN_ROWS_FOR_SPLIT, N_PAIRS, N_SUSPECTS, Findings, TemperatureContext, resolve_choices
from .confusion import ConfusionSummary
from .held_out import HeldOutCheck
from .histogram import ConfidenceHistogram
from .suspects import SuspectLabels
from .sweep import SweepFinding, sweep_grid
from .threshold import ThresholdDecision

if TYPE_CHECKING:
    from ..chunked.frame import ChunkedFrame

__all__ = ["collect_chunked", "resolve_chunked"]

#: Bins of the report's confidence histogram (as :func:`.histogram.confidence_histogram`'s default).
HISTOGRAM_BINS = 20


def resolve_chunked(cf: ChunkedFrame, **options: Any) -> tuple[Choices, TemperatureContext]:
    """:func:`resolve_choices` for a chunked batch; refuses what needs the rows in memory.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope.chunked import ChunkedFrame
    >>> cf = ChunkedFrame.from_dask(np.array([[2.0, 0.0], [0.0, 1.0], [1.0, 0.0]]), labels=np.array([0, 1, 1]))
    >>> choices, temps = resolve_chunked(cf, target_accuracy=0.9)
    >>> choices.rule.kind, round(temps.fitted.temperature, 4)
    ('accuracy', 1.3222)
    """
    if options.get("strategy", "uniform") != "uniform":
        raise ParameterError("equal-mass bins need the global order of the confidences; a chunked batch uses "
                             "equal-width bins (read the file in memory for equal-mass ones)")  # fmt: skip
    if options.get("split") is not None:
        raise ParameterError("a split of your own needs the rows in memory; a chunked batch gets the report's own "
                             "split by row hash")  # fmt: skip
    return resolve_choices(cf, **options)


def _summary(stats: dict[str, Any], part: str, t: float, b: Binning, ks: tuple[int, ...], aurc: float) -> Any:
    n = int(stats[f"{part}/n"])
    count = np.asarray(stats[f"{part}/bin_count"]).astype(np.int64)
    edges = np.linspace(0.0, 1.0, b.n_bins + 1)
    with np.errstate(invalid="ignore", divide="ignore"):
        acc = stats[f"{part}/bin_hits"] / count
        conf = stats[f"{part}/bin_confidence"] / count
    bins = an.ReliabilityBins(edges[:-1], edges[1:], count, acc, conf, np.zeros(0, dtype=np.int64), "uniform")
    top = stats[f"{part}/top_k"]
    return CalibrationSummary(
        temperature=t,
        binning=b,
        n=n,
        accuracy=float(stats[f"{part}/correct"] / n),
        top_k={int(k): float(int(v) / n) for k, v in zip(ks, top, strict=True)},
        nll=float(-stats[f"{part}/log_probability"] / n),
        brier=float(stats[f"{part}/brier"] / n),
        ece=bins.ece,
        mce=bins.mce,
        aurc=float(aurc),
        mean_confidence=float(stats[f"{part}/confidence"] / n),
        mean_entropy=float(stats[f"{part}/entropy"] / n),
        bins=bins,
        rows=None,
        n_unlabelled=0,
    )


class _Plan:
    """What each temperature's two passes must gather."""

    def __init__(self) -> None:
        self.parts: dict[float, list[str]] = {}
        self.groupings: dict[float, list[str]] = {}

    def need(self, t: float, part: str, grouping: str | None = None) -> None:
        ps = self.parts.setdefault(t, [])
        if part not in ps:
            ps.append(part)
        gs = self.groupings.setdefault(t, [])
        for g in (part, grouping):
            if g is not None and g not in gs:
                gs.append(g)


def _pending_for(order: Any, rule: ThresholdRule, part: str, cls: int = -1) -> Any:
    from ..chunked.parts import Pending, pick_threshold

    if rule.kind == "fixed":
        return None
    if order is None:  # a class never predicted in this part
        return Pending(0, 0, 0, "", feasible=False)
    return pick_threshold(
        order, rule.kind, target=rule.target_accuracy, level=rule.level, method=rule.interval,
        use_lower_bound=rule.use_lower_bound, error_cost=rule.error_cost, review_cost=rule.review_cost,
        part=part, cls=cls,
    )  # fmt: skip


def collect_chunked(
    cf: ChunkedFrame,
    choices: Choices,
    temperatures: TemperatureContext,
    *,
    own_split: bool = True,
    n_suspects: int = N_SUSPECTS,
    n_pairs: int = N_PAIRS,
) -> Findings:
    """The :class:`Findings` of a chunked batch for ``choices`` (as :func:`logitscope.findings.collect`).

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> from logitscope.chunked import ChunkedFrame
    >>> from logitscope.findings import collect, resolve_choices
    >>> z, y = np.array([[2.0, 0.0], [0.0, 1.0], [1.0, 0.0]]), np.array([0, 1, 1])
    >>> f = collect_chunked(ChunkedFrame.from_dask(z, labels=y), *resolve_chunked(
    ...     ChunkedFrame.from_dask(z, labels=y), target_accuracy=0.9))
    >>> g = collect(LogitFrame(z, labels=y), *resolve_choices(LogitFrame(z, labels=y), target_accuracy=0.9))
    >>> f.before.accuracy == g.before.accuracy, f.threshold.threshold == g.threshold.threshold
    (True, True)
    """
    from ..chunked import parts as P
    from ..chunked.analysis import _CLThresholds, _Confusion, _require_labels, _run, _Totals, cl_thresholds

    if choices.binning.strategy != "uniform":
        raise ParameterError("equal-mass bins need the global order of the confidences; use equal-width bins")
    if choices.split is not None:
        raise ParameterError("a split of your own needs the rows in memory; a chunked batch gets the own split")
    t = choices.temperature
    k = cf.n_classes
    lo = 1.0 / k if k > 1 else 0.0
    edges = np.linspace(lo, 1.0, HISTOGRAM_BINS + 1)
    if not cf.has_labels:
        if choices.rule is not None:
            raise LabelError("a threshold rule needs labels; this store has none")
        totals, conf_part, hist = _run(cf, t, [_Totals(()), _Confusion(k), P.ConfidenceCounts(edges)])
        n = int(totals["n"])
        preds = PredictionSummary(t, n, totals["confidence"] / n, totals["entropy"] / n, conf_part["predicted"])
        histogram = ConfidenceHistogram(t, edges, hist["total"], n=n)
        return Findings(choices, temperatures, preds, histogram=histogram)
    _require_labels(cf, "the report")
    b = choices.binning
    rule = choices.rule
    ks = an.default_ks(k)
    n = cf.n_samples
    use_split = own_split and n >= MIN_ROWS_FOR_SPLIT
    n_parts = {"all": n}
    if use_split:
        n_parts["fit"] = P.part_size("fit", n)
        n_parts["held"] = n - n_parts["fit"]
        use_split = n_parts["fit"] > 0 and n_parts["held"] > 0
    # the temperatures and what each needs
    plan = _Plan()
    for temp in {temperatures.base, t, *([] if temperatures.compare is None else [temperatures.compare])}:
        plan.need(temp, "all")
    per_class = rule is not None and rule.per_class
    if per_class:
        plan.need(t, "all", "class")
    fit_fit = None
    columns: list[tuple[str, float, str]] = []
    if use_split:
        fit_fit = P.fit_temperature_on_part(cf, "fit")
        columns = [("given", cf.temperature, "as given"), ("fitted", fit_fit.temperature, "fitted on the fit part")]
        if not any(math.isclose(t, c, rel_tol=1e-9) for _, c, _ in columns):
            columns.append(("decision", t, "decision temperature"))
        for _, temp, _ in columns:
            plan.need(temp, "fit")
            plan.need(temp, "held")
        if per_class:
            plan.need(t, "fit", "fitclass")
    assert temperatures.fitted is not None
    grid = sweep_grid([temperatures.base, t, temperatures.fitted.temperature])
    # pass 1 and 2 at each temperature: sums, bins, the wrong samples; then the right ones among them
    stats: dict[float, dict[str, Any]] = {}
    orders: dict[float, dict[str, list[Any]]] = {}
    extra: dict[str, Any] = {}
    for temp in sorted(plan.parts):
        collectors: list[Any] = [P.PartStats(plan.parts[temp], ks, b.n_bins), P.ErrorRecords()]
        at_t = temp == t
        if at_t:
            collectors += [_Confusion(k), P.ConfidenceCounts(edges), P.SweepCollector(1.0 / grid, b.n_bins),
                           _CLThresholds(k, 1.0 / t)]  # fmt: skip
            if rule is not None:
                collectors.append(P.PartRCHistogram("all"))
                if use_split:
                    collectors.append(P.PartRCHistogram("fit"))
        out = _run(cf, temp, collectors)
        stats[temp] = out[0]
        records = out[1]
        if at_t:
            extra = {"confusion": out[2], "hist": out[3], "sweep": out[4], "cl": cl_thresholds(out[5], out[2]),
                     "curves": out[6:]}  # fmt: skip
        sizes: dict[str, np.ndarray] = {}
        for g in plan.groupings[temp]:
            if g in ("class", "fitclass"):
                sizes[g] = np.asarray(stats[temp][f"{'all' if g == 'class' else 'fit'}/predicted"])
            else:
                sizes[g] = np.array([stats[temp][f"{g}/n"]])
        orders[temp] = P.grouped_orders(cf, temp, records, plan.groupings[temp], sizes)

    def summary(temp: float, part: str) -> CalibrationSummary:
        order = orders[temp][part][0]
        return _summary(stats[temp], part, temp, b, ks, 0.0 if order is None else order.aurc())

    made = {temp: summary(temp, "all") for temp in plan.parts if "all" in plan.parts[temp]}
    before = made[temperatures.base]
    after = None if temperatures.compare is None else made[temperatures.compare]
    decision = made[t]
    s_t = stats[t]
    preds = PredictionSummary(t, n, s_t["all/confidence"] / n, s_t["all/entropy"] / n, s_t["all/predicted"])
    h = extra["hist"]
    histogram = ConfidenceHistogram(t, edges, h["total"], h["right"], h["wrong"], n=n)
    sums = extra["sweep"]
    sw = an.temperature.sweep_from_sums(grid, sums)
    sweep = SweepFinding(
        temperature=sw.temperature, nll=sw.nll, ece=sw.ece, brier=sw.brier, mean_confidence=sw.mean_confidence,
        fitted=temperatures.fitted, binning=b, n=n, rows=None,
    )  # fmt: skip
    conf = extra["confusion"]
    matrix = np.asarray(conf["matrix"]).reshape(k, k)
    counts = np.asarray(conf["labels"])
    confusion = ConfusionSummary(
        temperature=t, k=1, matrix=matrix, top_k_matrix=matrix, class_counts=counts,
        pairs=tuple(an.largest_confusions(matrix, n=n_pairs, class_counts=counts)), n=n,
    )  # fmt: skip
    # thresholds: picked on the exact orders, their values in one pass, their counts per class in one more
    threshold = None
    held: HeldOutCheck | None = None
    fit_sum: dict[str, CalibrationSummary] = {}
    held_sum: dict[str, CalibrationSummary] = {}
    if use_split:
        fit_sum = {key: summary(temp, "fit") for key, temp, _ in columns}
        held_sum = {key: summary(temp, "held") for key, temp, _ in columns}
    if rule is not None:
        threshold, judged, on_fit = _thresholds(cf, rule, t, s_t, orders[t], extra["curves"], n_parts, use_split)
        if use_split:
            held = _held_out(fit_fit, columns, fit_sum, held_sum, n_parts, t, on_fit, judged)
    if use_split and held is None:
        held = _held_out(fit_fit, columns, fit_sum, held_sum, n_parts, t, None, None)
    suspects = _suspects(cf, t, n_suspects, extra["cl"])
    return Findings(
        choices=choices,
        temperatures=temperatures,
        predictions=preds,
        before=before,
        after=after,
        decision=decision,
        sweep=sweep,
        threshold=threshold,
        held_out=held,
        confusion=confusion,
        suspects=suspects,
        split=None,
        histogram=histogram,
    )


def _held_out(
    fit_fit: Any,
    columns: list[tuple[str, float, str]],
    fit_sum: dict[str, CalibrationSummary],
    held_sum: dict[str, CalibrationSummary],
    n_parts: dict[str, int],
    t: float,
    on_fit: ThresholdDecision | None,
    judged: an.ThresholdChoice | None,
) -> HeldOutCheck:
    from ..analysis.split import hash_split

    how = f"split by row hash, seed 0, {0.5:.0%} held out"
    assert how == hash_split(2, 0.5, 0).description  # one wording with the in-memory split
    return HeldOutCheck(
        description=how, n_fit=n_parts["fit"], n_held=n_parts["held"], fitted=fit_fit, columns=tuple(columns),
        fit=fit_sum, held=held_sum, decision_temperature=t, decision_on_fit=on_fit, judged_on_held=judged,
    )  # fmt: skip


def _thresholds(
    cf: ChunkedFrame,
    rule: ThresholdRule,
    t: float,
    stats: dict[str, Any],
    orders: dict[str, list[Any]],
    curves: Sequence[Any],
    n_parts: dict[str, int],
    use_split: bool,
) -> tuple[ThresholdDecision, an.ThresholdChoice | None, ThresholdDecision | None]:
    """The decision on all rows, and with a split the decision on the fit part judged on the held-out part."""
    from ..chunked import parts as P
    from ..chunked.analysis import _run

    k = cf.n_classes
    where = ["all", "fit"] if use_split else ["all"]
    cls_of = {"all": "class", "fit": "fitclass"}
    pending: list[Any] = []
    slots: dict[tuple[str, int], int] = {}
    for part in where:
        p = _pending_for(orders[part][0], rule, part)
        if p is not None:
            slots[(part, -1)] = len(pending)
            pending.append(p)
        if rule.per_class:
            for c, order in enumerate(orders[cls_of[part]]):
                slots[(part, c)] = len(pending)
                pending.append(_pending_for(order, rule, part, c))
    values = P.gap_minima(cf, t, pending)
    main: dict[str, float] = {}
    own_limits: dict[str, np.ndarray] = {}
    for part in where:
        if rule.kind == "fixed":
            assert rule.threshold is not None
            main[part] = float(rule.threshold)
        else:
            main[part] = values[slots[(part, -1)]]
        if rule.per_class:
            lim = np.full(k, np.inf)
            for c in range(k):
                i = slots[(part, c)]
                if pending[i].feasible and pending[i].n_total:
                    lim[c] = values[i]
            own_limits[part] = lim
    queries: list[tuple[str, np.ndarray]] = []
    index: dict[tuple[str, str], int] = {}
    for part in where:
        index[(part, "main")] = len(queries)
        queries.append((part, np.full(k, main[part])))
        if rule.per_class:
            index[(part, "own")] = len(queries)
            queries.append((part, own_limits[part]))
    if use_split:
        index[("held", "main")] = len(queries)
        queries.append(("held", np.full(k, main["fit"])))
    (at,) = _run(cf, t, [P.AtThresholds(queries)])
    lv, method = rule.level, rule.interval

    def counts(part: str, what: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        i = index[(part, what)]
        return at[f"{i}/accepted"], at[f"{i}/errors"], at[f"{i}/total"]

    def fixed(th: float, n_acc: int, n_err: int, n_tot: int) -> an.ThresholdChoice:
        return P.Pending(n_acc, n_err, n_tot, f"fixed at {th:g}").choice(lv, method, th)

    def decide(part: str, curve_part: dict[str, Any]) -> ThresholdDecision:
        n = n_parts[part]
        acc, err, tot = counts(part, "main")
        th = main[part]
        if rule.kind == "fixed":
            choice = fixed(th, int(acc.sum()), int(err.sum()), n)
        else:
            choice = pending[slots[(part, -1)]].choice(lv, method, th)
        by_class = tuple(fixed(th, int(acc[c]), int(err[c]), int(tot[c])) if tot[c] else None for c in range(k))
        own = combined = None
        if rule.per_class:
            own_list = []
            for c in range(k):
                p = pending[slots[(part, c)]]
                own_list.append(None if p.n_total == 0 else p.choice(lv, method, values[slots[(part, c)]]))
            own = tuple(own_list)
            oa, oe, _ = counts(part, "own")
            n_acc, n_right = int(oa.sum()), int(oa.sum() - oe.sum())
            combined = an.ThresholdChoice(
                threshold=float("nan"), coverage=n_acc / n, accuracy=n_right / n_acc if n_acc else float("nan"),
                n_accepted=n_acc, n_review=int(n - n_acc), n_total=int(n),
                interval=an.binomial_interval(n_right, n_acc, lv, method), interval_method=method, level=lv,
                rule="one threshold per predicted class",
            )  # fmt: skip
        order = orders[part][0]
        n_wrong = int(order.n_errors)
        accept_all = review_all = None
        if rule.kind == "cost":
            assert rule.error_cost is not None and rule.review_cost is not None
            accept_all = rule.error_cost * float(n_wrong) / n
            review_all = float(rule.review_cost)
        return ThresholdDecision(
            rule=rule, temperature=t, choice=choice, curve=P.binned_curve(curve_part, n), aurc=order.aurc(),
            accuracy_all=float((n - n_wrong) / n), by_class=by_class, own=own, own_combined=combined,
            accept_all_cost=accept_all, review_all_cost=review_all, rows=None,
        )  # fmt: skip

    decision = decide("all", curves[0])
    on_fit = judged = None
    if use_split:
        on_fit = decide("fit", curves[1])
        ha, he, _ = counts("held", "main")
        judged = fixed(main["fit"], int(ha.sum()), int(he.sum()), n_parts["held"])
    return decision, judged, on_fit


def _suspects(cf: ChunkedFrame, t: float, top: int, class_thresholds: np.ndarray) -> SuspectLabels:
    """Confident learning's flagged rows over the chunks (two passes), the first ``top`` with their probabilities."""
    from ..chunked.analysis import compute, rank_doubtful_labels

    ranking, n_flagged = rank_doubtful_labels(
        cf, "confident_learning", t, top=top, count=True, class_thresholds=class_thresholds
    )
    rows = np.asarray(ranking.index, dtype=np.int64)
    assert cf.labels is not None
    if rows.size:
        order = np.argsort(rows)
        z_sorted, y_sorted = compute(cf.logits[rows[order]], cf.labels[rows[order]])
        back = np.empty_like(order)
        back[order] = np.arange(order.size)
        z, given = np.asarray(z_sorted)[back], np.asarray(y_sorted, dtype=np.int64)[back]
        with an.assume_valid():
            probs = an.softmax(z, temperature=t)
    else:
        given, probs = np.zeros(0, dtype=np.int64), np.zeros((0, 1))
    idx = np.arange(rows.size)
    suggested = np.asarray(ranking.suggested, dtype=np.int64)
    return SuspectLabels(
        method=ranking.method, temperature=t, rows=rows, score=np.asarray(ranking.score), given=given,
        suggested=suggested,
        p_given=probs[idx, given].astype(np.float64) if rows.size else np.zeros(0),
        p_suggested=probs[idx, suggested].astype(np.float64) if rows.size else np.zeros(0),
        n_flagged=int(n_flagged),
    )  # fmt: skip
