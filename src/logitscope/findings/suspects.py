"""The suspect-label finding: samples whose given label the model doubts, most doubtful first."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from .. import analysis as an
from ..errors import LabelError

if TYPE_CHECKING:
    from ..frame import LogitFrame

__all__ = ["SuspectLabels", "suspect_labels"]


@dataclass(frozen=True)
class SuspectLabels:
    """A ranking of rows by how doubtful their label is, with the probabilities behind it.

    ``rows`` are frame rows, most doubtful first; ``suggested`` the class the
    model prefers; ``p_given`` and ``p_suggested`` the probabilities of the
    given and the suggested class at ``temperature``. ``n_flagged`` counts
    the rows the method flags (confident learning flags a subset; the other
    methods rank every row).
    """

    method: str
    temperature: float
    rows: np.ndarray = field(repr=False)
    score: np.ndarray = field(repr=False)
    given: np.ndarray = field(repr=False)
    suggested: np.ndarray = field(repr=False)
    p_given: np.ndarray = field(repr=False)
    p_suggested: np.ndarray = field(repr=False)
    n_flagged: int

    def __len__(self) -> int:
        return int(self.rows.size)

    def top(self, n: int) -> SuspectLabels:
        """The first ``n`` rows of the ranking."""
        return SuspectLabels(
            self.method, self.temperature, self.rows[:n], self.score[:n], self.given[:n], self.suggested[:n],
            self.p_given[:n], self.p_suggested[:n], self.n_flagged,
        )  # fmt: skip


def suspect_labels(
    frame: LogitFrame, method: str = "confident_learning", temperature: float | None = None, top: int | None = None
) -> SuspectLabels:
    """Rank the frame's rows by how doubtful their label is (see :mod:`logitscope.analysis.label_errors`).

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> z = np.log(np.array([[0.8, 0.2], [0.6, 0.4], [0.3, 0.7], [0.1, 0.9]]))
    >>> s = suspect_labels(LogitFrame(z, labels=[0, 0, 1, 0]))
    >>> s.rows.tolist(), s.suggested.tolist(), round(float(s.p_given[0]), 2)
    ([3], [1], 0.1)
    """
    if not frame.has_labels:
        raise LabelError("ranking doubtful labels needs labels; this frame has none (use with_labels)")
    t = frame.temperature if temperature is None else an.check_temperature(temperature)
    assert frame.labels is not None
    keep = frame.labelled_rows()  # a partly labelled batch: only rows with a label can have a doubtful one
    z = frame.logits if keep is None else frame.logits[keep]
    y = frame.labels if keep is None else frame.labels[keep]
    with an.assume_valid():
        # the frame's cached scores serve when every row takes part
        known = frame.sample_scores(t) if keep is None else None
        ranking = an.rank_doubtful_labels(z, y, method, temperature=t, scores=known)  # type: ignore[arg-type]
    n_flagged = len(ranking)
    if top is not None:
        ranking = ranking.top(int(top))
    rows = np.asarray(ranking.index, dtype=np.int64)
    if keep is not None:
        rows = keep[rows]
    given = frame.labels[rows]
    with an.assume_valid():
        probs = an.softmax(np.asarray(frame.logits[rows]), temperature=t) if rows.size else np.zeros((0, 1))
    idx = np.arange(rows.size)
    return SuspectLabels(
        method=ranking.method,
        temperature=t,
        rows=rows,
        score=np.asarray(ranking.score),
        given=np.asarray(given, dtype=np.int64),
        suggested=np.asarray(ranking.suggested, dtype=np.int64),
        p_given=probs[idx, given].astype(np.float64) if rows.size else np.zeros(0),
        p_suggested=probs[idx, ranking.suggested].astype(np.float64) if rows.size else np.zeros(0),
        n_flagged=n_flagged,
    )
