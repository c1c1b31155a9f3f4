"""Comparing two checkpoints on the same samples.

Whether checkpoint B is better than A on one labelled batch is a paired
question: McNemar's test (McNemar 1947, "Note on the sampling error of the
difference between correlated proportions") looks only at the samples on
which exactly one of them is right. Under "no difference" those discordant
samples split between the two as a fair coin would, so the exact p-value is
a two-sided binomial test with p = 1/2 on the discordant counts.

The flip table (:func:`flip_table`) splits the labelled samples five ways:
right under both, fixed (wrong under A, right under B), broken (the
reverse), wrong under both with the same predicted class, and wrong under
both with different ones, keeping each cell's row indices.
:func:`per_class_accuracy_change` gives each true class's accuracy under
both, with a per-class McNemar test corrected for testing many classes
(Holm 1979). Across a sequence of checkpoints, :func:`rank_forgetting` ranks
samples by forgetting events (Toneva et al. 2019).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike
from scipy import stats

from ..errors import InputTypeError, LabelError, ParameterError, ShapeError, describe_rows
from ._validation import assume_valid, check_labels, check_logits
from .scores import sample_scores

__all__ = [
    "FLIP_CELLS",
    "FLIP_DESCRIPTIONS",
    "CheckpointComparison",
    "ClassAccuracyChange",
    "FlipTable",
    "ForgettingRanking",
    "compare_checkpoints",
    "flip_table",
    "holm_adjust",
    "mcnemar_exact",
    "per_class_accuracy_change",
    "rank_forgetting",
]


def _mcnemar_many(only_a_right: np.ndarray, only_b_right: np.ndarray) -> np.ndarray:
    """Exact two-sided McNemar p-values, elementwise: ``min(1, 2 P(X <= min(b, c)))``, X ~ Binomial(b + c, 1/2).

    With p = 1/2 the binomial is symmetric, so the two-sided tail is twice the
    smaller one (and 1 for an even split); 1 where there are no discordant samples.
    """
    b = np.asarray(only_a_right, dtype=np.int64)
    c = np.asarray(only_b_right, dtype=np.int64)
    n = b + c
    with np.errstate(invalid="ignore"):
        p = np.minimum(1.0, 2.0 * stats.binom.cdf(np.minimum(b, c), n, 0.5))
    return np.where(n == 0, 1.0, p)


def mcnemar_exact(only_a_right: int, only_b_right: int) -> float:
    """Exact two-sided McNemar p-value from the two discordant counts.

    Examples
    --------
    >>> round(mcnemar_exact(2, 10), 4)  # binomial(12, 1/2): P(X <= 2) * 2
    0.0386
    """
    return float(_mcnemar_many(np.array([int(only_a_right)]), np.array([int(only_b_right)]))[0])


@dataclass(frozen=True)
class CheckpointComparison:
    """How two checkpoints differ on one batch (A = the first, B = the second).

    With labels, ``flips`` holds the five-cell flip table (with the row
    indices of each cell) and ``per_class`` the accuracy change of each true
    class; without labels both are None.
    """

    n_samples: int
    accuracy_a: float | None
    accuracy_b: float | None
    agreement: float
    both_right: int | None
    only_a_right: int | None
    only_b_right: int | None
    both_wrong: int | None
    mcnemar_p: float | None
    changed_rows: np.ndarray
    fixed_rows: np.ndarray | None
    broken_rows: np.ndarray | None
    mean_abs_confidence_change: float
    flips: FlipTable | None = None
    per_class: ClassAccuracyChange | None = None

    @property
    def accuracy_change(self) -> float | None:
        """Accuracy under B less accuracy under A (None without labels)."""
        if self.accuracy_a is None or self.accuracy_b is None:
            return None
        return self.accuracy_b - self.accuracy_a

    def to_dict(self, classes: Sequence[str] | None = None) -> dict[str, object]:
        """Counts and rates as a JSON-ready dict (row arrays as counts; ``classes`` names the per-class rows)."""
        nested = ("flips", "per_class")
        out = {
            k: v
            for k, v in self.__dict__.items()
            if not isinstance(v, np.ndarray) and v is not None and k not in nested
        }
        out["n_changed"] = int(self.changed_rows.size)
        if self.fixed_rows is not None and self.broken_rows is not None:
            out["n_fixed"] = int(self.fixed_rows.size)
            out["n_broken"] = int(self.broken_rows.size)
            out["accuracy_change"] = self.accuracy_change
        if self.flips is not None:
            out["flips"] = self.flips.to_dict()
        if self.per_class is not None:
            out["per_class"] = self.per_class.to_dict(classes)
        return out


def compare_checkpoints(
    logits_a: ArrayLike,
    logits_b: ArrayLike,
    labels: ArrayLike | None = None,
    temperature_a: float = 1.0,
    temperature_b: float = 1.0,
) -> CheckpointComparison:
    """Compare two checkpoints' logits on the same samples, in the same row order.

    Without labels only the agreement and the changed rows are reported.
    ``fixed_rows`` are samples B gets right and A wrong; ``broken_rows`` the
    reverse. With labels the result also holds the flip table and the
    per-class accuracy change (predictions do not depend on the temperature).

    Examples
    --------
    >>> import numpy as np
    >>> a = np.array([[2.0, 0.0], [0.0, 2.0], [2.0, 0.0], [2.0, 0.0]])
    >>> b = np.array([[2.0, 0.0], [2.0, 0.0], [0.0, 2.0], [2.0, 0.0]])
    >>> c = compare_checkpoints(a, b, labels=[0, 0, 1, 1])
    >>> c.agreement, c.only_a_right, c.only_b_right, c.fixed_rows.tolist()
    (0.5, 0, 2, [1, 2])
    >>> c.flips.counts["wrong_same"], c.per_class.change.tolist()
    (1, [0.5, 0.5])
    """
    za = check_logits(logits_a, what="logits_a")
    zb = check_logits(logits_b, what="logits_b")
    if za.shape != zb.shape:
        raise ShapeError(f"both checkpoints must score the same samples and classes: {za.shape} vs {zb.shape}")
    y = None if labels is None else check_labels(labels, *za.shape)
    with assume_valid():
        sa = sample_scores(za, y, temperature=temperature_a)
        sb = sample_scores(zb, y, temperature=temperature_b)
    changed = np.flatnonzero(sa.predicted != sb.predicted)
    n_samples = int(za.shape[0])
    agreement = float(1.0 - changed.size / za.shape[0])
    mean_abs_confidence_change = float(np.mean(np.abs(sa.confidence - sb.confidence)))
    if y is None:
        return CheckpointComparison(
            accuracy_a=None, accuracy_b=None, both_right=None, only_a_right=None, only_b_right=None,
            both_wrong=None, mcnemar_p=None, fixed_rows=None, broken_rows=None, n_samples=n_samples,
            agreement=agreement, changed_rows=changed, mean_abs_confidence_change=mean_abs_confidence_change,
        )  # fmt: skip
    ra, rb = sa.correct, sb.correct
    assert ra is not None and rb is not None
    flips = _flips(sa.predicted, sb.predicted, y)
    return CheckpointComparison(
        accuracy_a=float(ra.mean()),
        accuracy_b=float(rb.mean()),
        both_right=flips.count("right_both"),
        only_a_right=flips.count("broken"),
        only_b_right=flips.count("fixed"),
        both_wrong=flips.count("wrong_same") + flips.count("wrong_different"),
        mcnemar_p=flips.mcnemar_p,
        fixed_rows=flips.fixed,
        broken_rows=flips.broken,
        n_samples=n_samples,
        agreement=agreement,
        changed_rows=changed,
        mean_abs_confidence_change=mean_abs_confidence_change,
        flips=flips,
        per_class=_per_class(sa.predicted, sb.predicted, y, int(za.shape[1])),
    )


# --------------------------------------------------------------------------- flip table

#: The five cells of the flip table, in display order.
FLIP_CELLS: tuple[str, ...] = ("right_both", "fixed", "broken", "wrong_same", "wrong_different")

#: A plain description of each cell (A = the first checkpoint, B = the second).
FLIP_DESCRIPTIONS: dict[str, str] = {
    "right_both": "right in both",
    "fixed": "fixed (wrong under A, right under B)",
    "broken": "broken (right under A, wrong under B)",
    "wrong_same": "wrong in both, same class",
    "wrong_different": "wrong in both, different classes",
}


@dataclass(frozen=True)
class FlipTable:
    """Where each labelled sample goes between checkpoint A and checkpoint B.

    Every sample falls in exactly one of the five cells (:data:`FLIP_CELLS`);
    each field holds the row indices of its cell, in increasing order, so a
    view can select them. ``mcnemar_p`` is the exact McNemar test on the
    discordant cells (``fixed`` against ``broken``).

    Examples
    --------
    >>> t = flip_table([0, 1, 1, 2], [0, 0, 2, 1], labels=[0, 0, 0, 0])
    >>> t.counts
    {'right_both': 1, 'fixed': 1, 'broken': 0, 'wrong_same': 0, 'wrong_different': 2}
    >>> t.rows("wrong_different").tolist(), t.contingency.tolist()
    ([2, 3], [[1, 0], [1, 2]])
    """

    right_both: np.ndarray
    fixed: np.ndarray
    broken: np.ndarray
    wrong_same: np.ndarray
    wrong_different: np.ndarray
    n_samples: int
    mcnemar_p: float

    def rows(self, cell: str) -> np.ndarray:
        """Row indices of one cell (a name from :data:`FLIP_CELLS`)."""
        if cell not in FLIP_CELLS:
            raise ParameterError(f"unknown flip-table cell {cell!r}; the cells are {', '.join(FLIP_CELLS)}")
        rows: np.ndarray = getattr(self, cell)
        return rows

    def count(self, cell: str) -> int:
        """How many samples are in one cell."""
        return int(self.rows(cell).size)

    @property
    def counts(self) -> dict[str, int]:
        """Samples per cell, in :data:`FLIP_CELLS` order."""
        return {c: self.count(c) for c in FLIP_CELLS}

    @property
    def contingency(self) -> np.ndarray:
        """McNemar's 2 x 2 table: rows A right / A wrong, columns B right / B wrong."""
        wrong_both = self.count("wrong_same") + self.count("wrong_different")
        return np.array([[self.count("right_both"), self.count("broken")], [self.count("fixed"), wrong_both]])

    @property
    def cells(self) -> np.ndarray:
        """Each sample's cell as an index into :data:`FLIP_CELLS` (int8, one per row)."""
        out = np.empty(self.n_samples, dtype=np.int8)
        for code, cell in enumerate(FLIP_CELLS):
            out[self.rows(cell)] = code
        return out

    def to_frame(self) -> Any:
        """The table as a pandas DataFrame: one row per cell with its description, count and share.

        Examples
        --------
        >>> flip_table([0, 1], [0, 0], labels=[0, 0]).to_frame()["count"].tolist()
        [1, 1, 0, 0, 0]
        """
        import pandas as pd

        counts = self.counts
        return pd.DataFrame(
            {
                "description": [FLIP_DESCRIPTIONS[c] for c in FLIP_CELLS],
                "a_right": [c in ("right_both", "broken") for c in FLIP_CELLS],
                "b_right": [c in ("right_both", "fixed") for c in FLIP_CELLS],
                "count": [counts[c] for c in FLIP_CELLS],
                "share": [counts[c] / self.n_samples for c in FLIP_CELLS],
            },
            index=pd.Index(list(FLIP_CELLS), name="cell"),
        )

    def to_dict(self) -> dict[str, object]:
        """Counts, shares and the p-value as a JSON-ready dict."""
        counts = self.counts
        return {
            "n_samples": self.n_samples,
            "cells": {c: {"count": counts[c], "share": counts[c] / self.n_samples} for c in FLIP_CELLS},
            "mcnemar_p": self.mcnemar_p,
        }


def _check_classes_1d(x: ArrayLike, what: str, n: int | None) -> np.ndarray:
    arr = np.asarray(x)
    if arr.ndim != 1 or arr.shape[0] == 0 or (n is not None and arr.shape[0] != n):
        want = "a non-empty 1-D array" if n is None else f"1-D of length {n}"
        raise ShapeError(f"{what} must be {want}, got shape {arr.shape}")
    if arr.dtype.kind not in "iu":
        raise InputTypeError(f"{what} must be integer class indices, got dtype {arr.dtype}")
    neg = np.flatnonzero(arr < 0)
    if neg.size:
        raise LabelError(f"{what} must be class indices >= 0; negative at {describe_rows(neg)}")
    return arr.astype(np.int64, copy=False)


def _flips(pa: np.ndarray, pb: np.ndarray, y: np.ndarray) -> FlipTable:
    ra, rb = pa == y, pb == y
    wrong = ~ra & ~rb
    same = pa == pb
    fixed, broken = np.flatnonzero(~ra & rb), np.flatnonzero(ra & ~rb)
    return FlipTable(
        right_both=np.flatnonzero(ra & rb),
        fixed=fixed,
        broken=broken,
        wrong_same=np.flatnonzero(wrong & same),
        wrong_different=np.flatnonzero(wrong & ~same),
        n_samples=int(y.shape[0]),
        mcnemar_p=mcnemar_exact(broken.size, fixed.size),
    )


def flip_table(predicted_a: ArrayLike, predicted_b: ArrayLike, labels: ArrayLike) -> FlipTable:
    """Sort labelled samples into the five cells of the flip table from two checkpoints' predictions.

    Parameters
    ----------
    predicted_a, predicted_b : array_like of int, shape (N,)
        Predicted class indices under checkpoint A and checkpoint B, same rows.
    labels : array_like of int, shape (N,)
        True class indices.

    Examples
    --------
    >>> t = flip_table([3, 3, 5, 7], [3, 8, 5, 2], labels=[3, 3, 1, 1])
    >>> t.counts["right_both"], t.broken.tolist(), t.wrong_same.tolist(), t.wrong_different.tolist()
    (1, [1], [2], [3])
    """
    y = _check_classes_1d(labels, "labels", None)
    pa = _check_classes_1d(predicted_a, "predicted_a", y.shape[0])
    pb = _check_classes_1d(predicted_b, "predicted_b", y.shape[0])
    return _flips(pa, pb, y)


# --------------------------------------------------------------------------- per class


def holm_adjust(p_values: ArrayLike) -> np.ndarray:
    """Holm's step-down adjusted p-values (Holm 1979, "A simple sequentially rejective multiple test procedure").

    With the m p-values sorted, ``p_(1) <= ... <= p_(m)``, the adjusted value
    of ``p_(i)`` is ``max_{j <= i} min(1, (m - j + 1) p_(j))``; rejecting
    where it is below ``alpha`` keeps the family-wise error rate at ``alpha``.
    NaN entries (tests not made) stay NaN and do not count in m.

    Examples
    --------
    >>> holm_adjust([0.01, 0.04, 0.03, float("nan")]).round(4).tolist()
    [0.03, 0.06, 0.06, nan]
    """
    p = np.asarray(p_values, dtype=np.float64)
    if p.ndim != 1:
        raise ShapeError(f"p_values must be 1-D, got shape {p.shape}")
    out = np.full(p.shape, np.nan)
    made = np.flatnonzero(~np.isnan(p))
    m = made.size
    if m:
        order = made[np.argsort(p[made], kind="stable")]
        scaled = np.minimum(1.0, (m - np.arange(m)) * p[order])
        out[order] = np.maximum.accumulate(scaled)
    return out


@dataclass(frozen=True)
class ClassAccuracyChange:
    """Accuracy of each true class under checkpoint A and B, and the samples that flipped.

    Arrays have one entry per class. ``mcnemar_p`` is the exact McNemar test
    within each class (1.0 without discordant samples, NaN for a class with no
    samples); ``mcnemar_p_holm`` the same after Holm's correction over the
    classes tested, which keeps the chance of any false alarm at the level
    chosen however many classes there are.

    Examples
    --------
    >>> c = per_class_accuracy_change([0, 1, 1, 0], [0, 1, 0, 1], labels=[0, 0, 1, 1], n_classes=3)
    >>> c.support.tolist(), c.accuracy_a.tolist()[:2], c.change.tolist()[:2], c.broken.tolist()
    ([2, 2, 0], [0.5, 0.5], [0.0, 0.0], [0, 1, 0])
    """

    support: np.ndarray
    correct_a: np.ndarray
    correct_b: np.ndarray
    fixed: np.ndarray
    broken: np.ndarray
    mcnemar_p: np.ndarray
    mcnemar_p_holm: np.ndarray

    @property
    def n_classes(self) -> int:
        return int(self.support.shape[0])

    def _rate(self, correct: np.ndarray) -> np.ndarray:
        with np.errstate(invalid="ignore", divide="ignore"):
            rate: np.ndarray = correct / self.support
        return rate

    @property
    def accuracy_a(self) -> np.ndarray:
        """Accuracy under A per true class (NaN for a class without samples)."""
        return self._rate(self.correct_a)

    @property
    def accuracy_b(self) -> np.ndarray:
        """Accuracy under B per true class (NaN for a class without samples)."""
        return self._rate(self.correct_b)

    @property
    def change(self) -> np.ndarray:
        """Accuracy under B less accuracy under A, per true class."""
        return self._rate(self.correct_b - self.correct_a)

    def to_frame(self, classes: Sequence[str] | None = None) -> Any:
        """One row per class: support, both accuracies, change, fixed, broken and both p-values."""
        import pandas as pd

        names = [str(i) for i in range(self.n_classes)] if classes is None else [str(c) for c in classes]
        if len(names) != self.n_classes:
            raise ShapeError(f"{len(names)} class names for {self.n_classes} classes")
        return pd.DataFrame(
            {
                "support": self.support,
                "accuracy_a": self.accuracy_a,
                "accuracy_b": self.accuracy_b,
                "change": self.change,
                "fixed": self.fixed,
                "broken": self.broken,
                "mcnemar_p": self.mcnemar_p,
                "mcnemar_p_holm": self.mcnemar_p_holm,
            },
            index=pd.Index(names, name="class"),
        )

    def to_dict(self, classes: Sequence[str] | None = None) -> list[dict[str, object]]:
        """One JSON-ready dict per class (NaN becomes None)."""
        df = self.to_frame(classes)
        rows: list[dict[str, object]] = []
        for name, rec in zip(df.index, df.to_dict("records"), strict=True):
            clean = {k: (None if isinstance(v, float) and np.isnan(v) else v) for k, v in rec.items()}
            rows.append(
                {"class": name, **{k: (v.item() if isinstance(v, np.generic) else v) for k, v in clean.items()}}
            )
        return rows


def _per_class(pa: np.ndarray, pb: np.ndarray, y: np.ndarray, k: int) -> ClassAccuracyChange:
    ra, rb = pa == y, pb == y
    support = np.bincount(y, minlength=k)
    fixed = np.bincount(y[~ra & rb], minlength=k)
    broken = np.bincount(y[ra & ~rb], minlength=k)
    p = np.where(support > 0, _mcnemar_many(broken, fixed), np.nan)
    return ClassAccuracyChange(
        support=support,
        correct_a=np.bincount(y[ra], minlength=k),
        correct_b=np.bincount(y[rb], minlength=k),
        fixed=fixed,
        broken=broken,
        mcnemar_p=p,
        mcnemar_p_holm=holm_adjust(p),
    )


def per_class_accuracy_change(
    predicted_a: ArrayLike, predicted_b: ArrayLike, labels: ArrayLike, n_classes: int | None = None
) -> ClassAccuracyChange:
    """Accuracy per true class under checkpoint A and B, with the fixed and broken samples of each.

    ``n_classes`` defaults to one more than the largest class index seen.

    Examples
    --------
    >>> c = per_class_accuracy_change([1, 1, 0], [1, 0, 0], labels=[1, 0, 0])
    >>> c.accuracy_a.tolist(), c.accuracy_b.tolist(), c.fixed.tolist()
    ([0.5, 1.0], [1.0, 1.0], [1, 0])
    """
    y = _check_classes_1d(labels, "labels", None)
    pa = _check_classes_1d(predicted_a, "predicted_a", y.shape[0])
    pb = _check_classes_1d(predicted_b, "predicted_b", y.shape[0])
    k = int(max(y.max(), pa.max(), pb.max())) + 1 if n_classes is None else int(n_classes)
    too_big = np.flatnonzero((y >= k) | (pa >= k) | (pb >= k))
    if too_big.size:
        raise LabelError(f"class indices must lie in [0, {k}); out of range at {describe_rows(too_big)}")
    return _per_class(pa, pb, y, k)


# --------------------------------------------------------------------------- forgetting across checkpoints


@dataclass(frozen=True)
class ForgettingRanking:
    """Samples ranked by forgetting events across a sequence of checkpoints (Toneva et al. 2019).

    A forgetting event is a sample going from right at one checkpoint to
    wrong at the next; a learning event the reverse. ``order`` lists every
    row most-forgotten first, by :attr:`score`; ties go to the sample right at
    fewer checkpoints, then to the earlier row.

    Examples
    --------
    >>> r = rank_forgetting([[1, 0, 1, 0], [0, 0, 1, 1], [1, 0, 1, 0]])  # 3 checkpoints x 4 samples
    >>> r.forgetting_events.tolist(), r.never_learned.tolist(), r.order.tolist()
    ([1, 0, 0, 1], [False, True, False, False], [1, 3, 0, 2])
    """

    order: np.ndarray
    forgetting_events: np.ndarray
    learning_events: np.ndarray
    first_learned: np.ndarray
    n_correct: np.ndarray
    n_checkpoints: int

    @property
    def n_samples(self) -> int:
        return int(self.forgetting_events.shape[0])

    @property
    def never_learned(self) -> np.ndarray:
        """Samples wrong at every checkpoint."""
        return self.first_learned < 0

    @property
    def unforgettable(self) -> np.ndarray:
        """Samples right at some checkpoint and never forgotten afterwards (the paper's "unforgettable")."""
        return (self.first_learned >= 0) & (self.forgetting_events == 0)

    @property
    def score(self) -> np.ndarray:
        """The ranking count: forgetting events, and the number of checkpoints for a never-learned sample.

        The paper ranks samples never learned as forgotten more often than any
        learned one; its released code counts them as forgotten at every
        presentation, which is what this score does (no learned sample can
        reach it: between E checkpoints there are at most E / 2 forgetting events).
        """
        return np.where(self.never_learned, self.n_checkpoints, self.forgetting_events)

    def top(self, n: int) -> np.ndarray:
        """The ``n`` most-forgotten rows."""
        return self.order[: max(0, int(n))]

    def to_frame(self, ids: ArrayLike | None = None) -> Any:
        """A pandas DataFrame in rank order: row, forgetting and learning events, first learned, flags.

        ``ids`` (one per row) become the index; default the row positions.
        """
        import pandas as pd

        o = self.order
        index = pd.Index(np.asarray(ids)[o] if ids is not None else o, name="id" if ids is not None else "row")
        return pd.DataFrame(
            {
                "rank": np.arange(1, o.size + 1),
                "row": o,
                "forgetting_events": self.forgetting_events[o],
                "learning_events": self.learning_events[o],
                "first_learned": self.first_learned[o],
                "n_correct": self.n_correct[o],
                "never_learned": self.never_learned[o],
                "unforgettable": self.unforgettable[o],
            },
            index=index,
        )


def rank_forgetting(correct: ArrayLike) -> ForgettingRanking:
    """Count forgetting events per sample over checkpoints and rank the samples by them.

    Toneva, Sordoni, Tachet des Combes, Trischler, Bengio and Gordon (2019),
    "An Empirical Study of Example Forgetting during Deep Neural Network
    Learning" (ICLR): a forgetting event is a transition from correctly to
    incorrectly classified between consecutive presentations; samples that
    are never learned rank above all others (see :attr:`ForgettingRanking.score`).
    Here the presentations are checkpoints (epochs) scored on the same samples.

    Parameters
    ----------
    correct : array_like of bool, shape (E, N)
        ``correct[e, i]``: checkpoint ``e`` (in training order) classifies
        sample ``i`` correctly. At least two checkpoints.

    Examples
    --------
    >>> r = rank_forgetting([[True, True, False], [False, True, False], [True, True, False]])
    >>> r.forgetting_events.tolist(), r.learning_events.tolist(), r.first_learned.tolist()
    ([1, 0, 0], [1, 0, 0], [0, 0, -1])
    >>> r.top(2).tolist()  # never learned first, then the forgotten one
    [2, 0]
    """
    c = np.asarray(correct)
    if c.ndim != 2 or c.shape[0] < 2 or c.shape[1] == 0:
        raise ShapeError(
            f"correct must be a 2-D array (checkpoints, samples) with at least 2 checkpoints, got shape {c.shape}"
        )
    if c.dtype != bool:
        if c.dtype.kind not in "iuf" or not np.isin(c, (0, 1)).all():
            raise InputTypeError(f"correct must hold booleans (or 0 / 1), got dtype {c.dtype}")
        c = c.astype(bool)
    forgotten = np.count_nonzero(c[:-1] & ~c[1:], axis=0)
    learned = np.count_nonzero(~c[:-1] & c[1:], axis=0)
    ever = c.any(axis=0)
    first = np.where(ever, c.argmax(axis=0), -1)
    n_correct = np.count_nonzero(c, axis=0)
    e = int(c.shape[0])
    score = np.where(ever, forgotten, e)
    order = np.lexsort((np.arange(c.shape[1]), n_correct, -score))
    return ForgettingRanking(
        order=order,
        forgetting_events=forgotten.astype(np.int64),
        learning_events=learned.astype(np.int64),
        first_learned=first.astype(np.int64),
        n_correct=n_correct.astype(np.int64),
        n_checkpoints=e,
    )
