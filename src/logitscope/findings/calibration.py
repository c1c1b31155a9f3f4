"""Calibration findings: the numbers of one set of rows at one temperature with one binning.

:class:`CalibrationSummary` holds accuracy, top-k accuracy, NLL, Brier score,
ECE and MCE with the reliability bins they come from, AURC, mean confidence
and mean entropy. The summary table, the reliability diagram, the report's
reliability section and the CLI all read these, so they cannot disagree.
:class:`PredictionSummary` is the part that needs no labels.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from .. import analysis as an
from ..errors import LabelError, ParameterError
from ..rows import as_rows
from .choices import Binning

if TYPE_CHECKING:
    from ..frame import LogitFrame

__all__ = [
    "CalibrationSummary",
    "PredictionSummary",
    "SelectionCount",
    "calibration_summary",
    "count_selection",
    "prediction_summary",
]


def _rows(frame: LogitFrame, rows: Any) -> np.ndarray | None:
    """``None`` for all rows, else sorted unique int64 positions (at least one)."""
    if rows is None:
        return None
    r = as_rows(rows, frame.n_samples)
    if r.size == 0:
        raise ParameterError("a finding needs at least one row")
    return None if r.size == frame.n_samples else r


def _label_rows(frame: LogitFrame, rows: Any, what: str) -> np.ndarray | None:
    """The labelled rows among ``rows`` (None: every row, all labelled); a label-based finding uses only these."""
    if not frame.has_labels:
        raise LabelError(f"{what} needs labels; this frame has none (use with_labels)")
    r = _rows(frame, rows)
    if r is None or not frame.fully_labelled:  # every row labelled: the rows as they are (no copy)
        r = frame.labelled_rows(r)
    if r is not None and r.size == 0:
        raise LabelError(f"{what} needs labelled rows; none of the {_count(frame, rows):,} rows given has a label")
    return r


def _count(frame: LogitFrame, rows: Any) -> int:
    return frame.n_samples if rows is None else int(as_rows(rows, frame.n_samples).size)


def _take(a: np.ndarray, rows: np.ndarray | None) -> np.ndarray:
    return a if rows is None else a[rows]


def bin_range_label(lower: float, upper: float) -> str:
    """A bin named by its confidence range, ``"0.80–0.87"``.

    Examples
    --------
    >>> bin_range_label(0.8, 0.8667)
    '0.80–0.87'
    """
    if not (np.isfinite(lower) and np.isfinite(upper)):
        return "empty"
    return f"{lower:.2f}–{upper:.2f}"


@dataclass(frozen=True)
class PredictionSummary:
    """What needs no labels: how many rows, mean confidence and entropy, predicted class counts."""

    temperature: float
    n: int
    mean_confidence: float
    mean_entropy: float
    predicted_counts: np.ndarray = field(repr=False)

    @property
    def predicted_share(self) -> np.ndarray:
        """``predicted_counts`` as shares of ``n``."""
        return self.predicted_counts / max(self.n, 1)

    def to_dict(self) -> dict[str, Any]:
        return {
            "n": self.n,
            "temperature": self.temperature,
            "mean_confidence": self.mean_confidence,
            "mean_entropy": self.mean_entropy,
        }


def prediction_summary(frame: LogitFrame, temperature: float | None = None, rows: Any = None) -> PredictionSummary:
    """Label-free numbers of ``rows`` (default all) at ``temperature`` (default the frame's).

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> p = prediction_summary(LogitFrame(np.array([[2.0, 0.0], [0.0, 1.0]])))
    >>> p.n, p.predicted_counts.tolist()
    (2, [1, 1])
    """
    t = frame.temperature if temperature is None else an.check_temperature(temperature)
    r = _rows(frame, rows)
    s = frame.sample_scores(t)
    pred = _take(s.predicted, r)
    return PredictionSummary(
        temperature=t,
        n=int(pred.size),
        mean_confidence=float(np.mean(_take(s.confidence, r))),
        mean_entropy=float(np.mean(_take(s.entropy, r))),
        predicted_counts=np.bincount(pred, minlength=frame.n_classes),
    )


@dataclass(frozen=True)
class CalibrationSummary:
    """Calibration numbers of some rows of a frame at one temperature and one binning.

    ``rows`` is None when the summary covers every row. Only labelled rows
    count: ``n`` is their number, ``n_unlabelled`` the number of rows asked
    for that have no label (a partly labelled batch). ``bins.bin_of`` maps
    each covered row (in the order of ``rows``) to its bin. ``top_k`` maps k
    to top-k accuracy for the k of :func:`logitscope.analysis.default_ks`.
    """

    temperature: float
    binning: Binning
    n: int
    accuracy: float
    top_k: dict[int, float]
    nll: float
    brier: float
    ece: float
    mce: float
    aurc: float
    mean_confidence: float
    mean_entropy: float
    bins: an.ReliabilityBins = field(repr=False)
    rows: np.ndarray | None = field(default=None, repr=False)
    n_unlabelled: int = 0

    def bin_label(self, b: int) -> str:
        """Bin ``b`` named by its confidence range (``"0.80–0.87"``)."""
        return bin_range_label(float(self.bins.lower[b]), float(self.bins.upper[b]))

    def rows_of_bin(self, b: int) -> np.ndarray:
        """Frame rows (positions) whose confidence falls in bin ``b``."""
        hit = np.flatnonzero(self.bins.bin_of == int(b))
        return hit if self.rows is None else self.rows[hit]

    def bin_of_rows(self, n_samples: int) -> np.ndarray:
        """For every frame row, the bin it falls in (``-1`` for rows this summary does not cover)."""
        out = np.full(n_samples, -1, dtype=np.int64)
        if self.rows is None:
            out[:] = self.bins.bin_of
        else:
            out[self.rows] = self.bins.bin_of
        return out

    def to_dict(self) -> dict[str, Any]:
        """The scalar numbers as a JSON-ready dict (top-k keyed by k as a string)."""
        return {
            "n": self.n,
            "n_unlabelled": self.n_unlabelled,
            "temperature": self.temperature,
            "accuracy": self.accuracy,
            "top_k_accuracy": {str(k): v for k, v in self.top_k.items()},
            "nll": self.nll,
            "brier": self.brier,
            "ece": self.ece,
            "mce": self.mce,
            "aurc": self.aurc,
            "mean_confidence": self.mean_confidence,
            "mean_entropy": self.mean_entropy,
            "bins": self.binning.describe(),
        }


def calibration_summary(
    frame: LogitFrame,
    temperature: float | None = None,
    rows: Any = None,
    binning: Binning | None = None,
) -> CalibrationSummary:
    """Calibration numbers of ``rows`` (default all) of a labelled frame.

    Parameters
    ----------
    frame : LogitFrame
        Needs labels.
    temperature : float, optional
        Default the frame's own.
    rows : array_like, optional
        Row positions or a boolean mask; default every row.
    binning : Binning, optional
        Default ``Binning()`` (15 equal-width bins, as Guo et al. 2017).

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> frame = LogitFrame(np.log([[0.9, 0.1], [0.9, 0.1], [0.6, 0.4], [0.6, 0.4]]), labels=[0, 0, 0, 1])
    >>> c = calibration_summary(frame, binning=Binning(10))
    >>> round(c.ece, 6), c.accuracy, c.bin_label(5)
    (0.1, 0.75, '0.50–0.60')
    """
    r = _label_rows(frame, rows, "calibration numbers")
    t = frame.temperature if temperature is None else an.check_temperature(temperature)
    b = Binning() if binning is None else binning
    s = frame.sample_scores(t)
    assert s.correct is not None and s.true_rank is not None
    assert s.true_log_probability is not None and s.brier is not None
    conf, ok = _take(s.confidence, r), _take(s.correct, r)
    bins = an.reliability_bins(conf, ok, b.n_bins, b.strategy)
    ks = an.default_ks(frame.n_classes)
    return CalibrationSummary(
        temperature=t,
        binning=b,
        n=int(conf.size),
        accuracy=float(np.mean(ok)),
        top_k=dict(an.top_k_accuracies(_take(s.true_rank, r), ks)),
        nll=float(-np.mean(_take(s.true_log_probability, r))),
        brier=float(np.mean(_take(s.brier, r))),
        ece=bins.ece,
        mce=bins.mce,
        aurc=an.selective.aurc_of_curve(frame._risk_coverage(t, r, conf, ok)),
        mean_confidence=float(np.mean(conf)),
        mean_entropy=float(np.mean(_take(s.entropy, r))),
        bins=bins,
        rows=r,
        n_unlabelled=_count(frame, rows) - int(conf.size),
    )


@dataclass(frozen=True)
class SelectionCount:
    """How many rows a selection holds, how many have labels, and how many of those are misclassified."""

    n: int
    n_wrong: int | None
    n_labelled: int = 0

    @property
    def wrong_share(self) -> float | None:
        """Share of the labelled selected rows that are misclassified (None without labelled rows)."""
        return None if self.n_wrong is None or self.n_labelled == 0 else self.n_wrong / self.n_labelled


def count_selection(frame: LogitFrame, rows: Any, temperature: float | None = None) -> SelectionCount:
    """Count the rows of a selection and the misclassified ones among them (O(selected rows)).

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> count_selection(LogitFrame(np.array([[2.0, 0.0], [0.0, 1.0]]), labels=[0, 0]), [0, 1])
    SelectionCount(n=2, n_wrong=1, n_labelled=2)
    """
    r = as_rows(rows, frame.n_samples)
    s = frame.sample_scores(frame.temperature if temperature is None else an.check_temperature(temperature))
    if s.correct is None:
        return SelectionCount(int(r.size), None, 0)
    labelled = frame.labelled_rows(r)
    assert labelled is not None
    wrong = int(labelled.size - np.count_nonzero(s.correct[labelled]))
    return SelectionCount(int(r.size), wrong, int(labelled.size))
