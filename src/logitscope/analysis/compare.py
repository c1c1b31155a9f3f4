"""Comparing two checkpoints on the same samples.

Whether checkpoint B is better than A on one labelled batch is a paired
question: McNemar's test (McNemar 1947, "Note on the sampling error of the
difference between correlated proportions") looks only at the samples on
which exactly one of them is right. Under "no difference" those discordant
samples split between the two as a fair coin would, so the exact p-value is
a two-sided binomial test with p = 1/2 on the discordant counts.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike
from scipy import stats

from ..errors import ShapeError
from ._validation import assume_valid, check_labels, check_logits
from .scores import sample_scores

__all__ = ["CheckpointComparison", "compare_checkpoints", "mcnemar_exact"]


def mcnemar_exact(only_a_right: int, only_b_right: int) -> float:
    """Exact two-sided McNemar p-value from the two discordant counts.

    Examples
    --------
    >>> round(mcnemar_exact(2, 10), 4)  # binomial(12, 1/2): P(X <= 2) * 2
    0.0386
    """
    b, c = int(only_a_right), int(only_b_right)
    if b + c == 0:
        return 1.0
    return float(stats.binomtest(b, b + c, 0.5, alternative="two-sided").pvalue)


@dataclass(frozen=True)
class CheckpointComparison:
    """How two checkpoints differ on one batch (A = the first, B = the second)."""

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

    def to_dict(self) -> dict[str, object]:
        """Counts and rates as a JSON-ready dict (row arrays as counts)."""
        out = {k: v for k, v in self.__dict__.items() if not isinstance(v, np.ndarray) and v is not None}
        out["n_changed"] = int(self.changed_rows.size)
        if self.fixed_rows is not None and self.broken_rows is not None:
            out["n_fixed"] = int(self.fixed_rows.size)
            out["n_broken"] = int(self.broken_rows.size)
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
    ``fixed_rows`` are samples B gets right and A wrong; ``broken_rows`` the reverse.

    Examples
    --------
    >>> import numpy as np
    >>> a = np.array([[2.0, 0.0], [0.0, 2.0], [2.0, 0.0], [2.0, 0.0]])
    >>> b = np.array([[2.0, 0.0], [2.0, 0.0], [0.0, 2.0], [2.0, 0.0]])
    >>> c = compare_checkpoints(a, b, labels=[0, 0, 1, 1])
    >>> c.agreement, c.only_a_right, c.only_b_right, c.fixed_rows.tolist()
    (0.5, 0, 2, [1, 2])
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
    only_a = int(np.sum(ra & ~rb))
    only_b = int(np.sum(~ra & rb))
    return CheckpointComparison(
        accuracy_a=float(ra.mean()),
        accuracy_b=float(rb.mean()),
        both_right=int(np.sum(ra & rb)),
        only_a_right=only_a,
        only_b_right=only_b,
        both_wrong=int(np.sum(~ra & ~rb)),
        mcnemar_p=mcnemar_exact(only_a, only_b),
        fixed_rows=np.flatnonzero(~ra & rb),
        broken_rows=np.flatnonzero(ra & ~rb),
        n_samples=n_samples,
        agreement=agreement,
        changed_rows=changed,
        mean_abs_confidence_change=mean_abs_confidence_change,
    )
