"""The review-threshold finding: the rule's threshold, its coverage and accuracy with an interval, per class.

A :class:`ThresholdDecision` is what the threshold picker shows and what the
report prints: the chosen threshold with its readouts, the accuracy-coverage
curve it sits on (thinned by one rule for drawing), the same threshold
judged within each predicted class, optionally one threshold per predicted
class for the same target, and the caution that goes with every threshold.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from .. import analysis as an
from .calibration import _label_rows, _take
from .choices import ThresholdRule

if TYPE_CHECKING:
    from ..frame import LogitFrame

__all__ = ["MAX_CURVE_POINTS", "ThresholdDecision", "thin_indices", "threshold_decision"]

#: Most points drawn for one curve; the numbers use every row.
MAX_CURVE_POINTS = 600


def thin_indices(n: int, most: int = MAX_CURVE_POINTS, keep: tuple[int, ...] = ()) -> np.ndarray:
    """Indices of at most ``most`` (plus ``keep``) evenly spread points of an ``n``-point curve, ends included.

    The one thinning rule for every drawn curve (widgets and report).

    Examples
    --------
    >>> thin_indices(10, 4).tolist()
    [0, 3, 6, 9]
    >>> thin_indices(10, 4, keep=(5,)).tolist()
    [0, 3, 5, 6, 9]
    """
    if n <= most:
        idx = np.arange(n)
    else:
        idx = np.linspace(0, n - 1, most).round().astype(np.int64)
    extra = [k for k in keep if 0 <= k < n]
    return np.unique(np.r_[idx, np.asarray(extra, dtype=np.int64)])


@dataclass(frozen=True)
class ThresholdDecision:
    """A threshold chosen by a rule on some rows at one temperature, and what it does.

    Attributes
    ----------
    rule : ThresholdRule
    temperature : float
    choice : ThresholdChoice
        Threshold, coverage, accuracy of the accepted rows with its interval,
        counts, expected cost (cost rule).
    curve : RiskCoverage
        At every distinct confidence, most confident first (tied confidences
        stand or fall together).
    aurc : float
    accuracy_all : float
        Accuracy when everything is accepted.
    by_class : tuple of (ThresholdChoice or None)
        The one threshold judged within each predicted class (None: never predicted).
    own : tuple of (ThresholdChoice or None) or None
        With ``rule.per_class``: one threshold per predicted class for the same target.
    own_combined : ThresholdChoice or None
        What the per-class thresholds do together.
    accept_all_cost, review_all_cost : float or None
        For the cost rule: the cost per sample of accepting everything and of reviewing everything.
    caution : str
    """

    rule: ThresholdRule
    temperature: float
    choice: an.ThresholdChoice
    curve: an.RiskCoverage = field(repr=False)
    aurc: float
    accuracy_all: float
    by_class: tuple[an.ThresholdChoice | None, ...] = field(repr=False)
    own: tuple[an.ThresholdChoice | None, ...] | None = field(default=None, repr=False)
    own_combined: an.ThresholdChoice | None = None
    accept_all_cost: float | None = None
    review_all_cost: float | None = None
    caution: str = an.CAUTION
    rows: np.ndarray | None = field(default=None, repr=False)

    @property
    def threshold(self) -> float:
        return self.choice.threshold

    @property
    def chosen_index(self) -> int | None:
        """Index of the chosen threshold on ``curve`` (None when nothing is accepted)."""
        if self.choice.n_accepted == 0:
            return None
        hit = np.flatnonzero(self.curve.n_accepted == self.choice.n_accepted)
        return int(hit[0]) if hit.size else None

    def curve_points(self, y: str = "accuracy", most: int = MAX_CURVE_POINTS) -> tuple[np.ndarray, np.ndarray]:
        """``(coverage, accuracy or risk)`` of the curve, thinned by :func:`thin_indices`, chosen point kept."""
        c = self.chosen_index
        idx = thin_indices(self.curve.threshold.size, most, keep=() if c is None else (c,))
        values = self.curve.accuracy if y == "accuracy" else self.curve.risk
        return self.curve.coverage[idx], values[idx]

    def class_table(self, classes: tuple[str, ...]) -> pd.DataFrame:
        """The per-class readouts as a DataFrame, one row per predicted class that occurs."""
        records = []
        for k, c in enumerate(self.by_class):
            if c is None:
                continue
            rec: dict[str, Any] = {
                "class": classes[k],
                "predicted": c.n_total,
                "accepted": c.n_accepted,
                "review": c.n_review,
                "coverage": c.coverage,
                "accuracy": c.accuracy,
                "low": c.interval[0],
                "high": c.interval[1],
            }
            if self.own is not None:
                o = self.own[k]
                rec["own_threshold"] = None if o is None or not math.isfinite(o.threshold) else o.threshold
                rec["own_coverage"] = None if o is None else o.coverage
                rec["own_accuracy"] = None if o is None else o.accuracy
            records.append(rec)
        return pd.DataFrame.from_records(records)

    def to_dict(self) -> dict[str, Any]:
        out = self.choice.to_dict()
        out["temperature"] = self.temperature
        out["rule_description"] = self.rule.describe()
        if self.rule.kind == "accuracy":
            out["target_accuracy"] = self.rule.target_accuracy
        return out


def threshold_decision(
    frame: LogitFrame, rule: ThresholdRule, temperature: float | None = None, rows: Any = None
) -> ThresholdDecision:
    """Apply ``rule`` to ``rows`` (default all) of a labelled frame at ``temperature``.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> z = np.log([[0.95, 0.05], [0.9, 0.1], [0.8, 0.2], [0.7, 0.3], [0.6, 0.4]])
    >>> frame = LogitFrame(z, labels=[0, 0, 0, 1, 0])
    >>> d = threshold_decision(frame, ThresholdRule("accuracy", target_accuracy=0.75))
    >>> round(d.threshold, 2), d.choice.coverage, d.choice.accuracy
    (0.6, 1.0, 0.8)
    """
    r = _label_rows(frame, rows, "a review threshold")
    t = frame.temperature if temperature is None else an.check_temperature(temperature)
    s = frame.sample_scores(t)
    assert s.correct is not None
    conf, ok, pred = _take(s.confidence, r), _take(s.correct, r), _take(s.predicted, r)
    curve = frame._risk_coverage(t, r, conf, ok)  # sorted once: the rule, the curve and the AURC read it
    choice = rule.choose(conf, ok, curve)
    by_class: list[an.ThresholdChoice | None] = []
    # a stable sort of small integers is a radix sort: the same order, several times faster
    order = np.argsort(pred.astype(np.int16) if frame.n_classes <= np.iinfo(np.int16).max else pred, kind="stable")
    bounds = np.searchsorted(pred[order], np.arange(frame.n_classes + 1))
    for k in range(frame.n_classes):
        idx = order[bounds[k] : bounds[k + 1]]
        by_class.append(rule.judge(conf[idx], ok[idx], choice.threshold) if idx.size else None)
    own = combined = None
    if rule.per_class:
        assert rule.target_accuracy is not None
        own_list = an.per_class_thresholds(
            conf, ok, pred, rule.target_accuracy, frame.n_classes, rule.level, rule.interval, rule.use_lower_bound
        )
        own = tuple(own_list)
        limits = np.array([np.inf if c is None else c.threshold for c in own_list])
        accepted = conf >= limits[pred]
        n_acc, n_right = int(accepted.sum()), int((accepted & ok).sum())
        combined = an.ThresholdChoice(
            threshold=float("nan"),
            coverage=n_acc / conf.size,
            accuracy=n_right / n_acc if n_acc else float("nan"),
            n_accepted=n_acc,
            n_review=int(conf.size - n_acc),
            n_total=int(conf.size),
            interval=an.binomial_interval(n_right, n_acc, rule.level, rule.interval),
            interval_method=rule.interval,
            level=rule.level,
            rule="one threshold per predicted class",
        )
    accept_all = review_all = None
    if rule.kind == "cost":
        assert rule.error_cost is not None and rule.review_cost is not None
        accept_all = rule.error_cost * float(np.sum(~ok)) / conf.size
        review_all = float(rule.review_cost)
    return ThresholdDecision(
        rule=rule,
        temperature=t,
        choice=choice,
        curve=curve,
        aurc=an.selective.aurc_of_curve(curve),
        accuracy_all=float(np.mean(ok)),
        by_class=tuple(by_class),
        own=own,
        own_combined=combined,
        accept_all_cost=accept_all,
        review_all_cost=review_all,
        rows=r,
    )
