"""Checkpoints side by side: two frames of the same samples compared, or many ranked by forgetting.

:func:`compare_frames` aligns two frames by id (:mod:`logitscope.alignment`)
and compares them with :func:`logitscope.analysis.compare_checkpoints`: the
flip table with its rows, McNemar's exact test and the per-class accuracy
change, ready for a view, the report or the ``logitscope compare`` command.
:func:`forgetting_across` does the same for a sequence of checkpoints
(epochs) and ranks the samples by forgetting events (Toneva et al. 2019).

One set of labels is used for all frames: the first frame's (or the first
that has labels). Frames whose labels disagree on shared ids are refused,
since "right" would mean different things for each.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from . import analysis as an
from .alignment import AlignedFrames, MissingIds, align_frames
from .analysis._validation import assume_valid
from .errors import LabelError, ParameterError
from .frame import LogitFrame

__all__ = ["FrameComparison", "FrameForgetting", "compare_frames", "forgetting_across"]


def _shared_labels(aligned: AlignedFrames) -> np.ndarray | None:
    """The labels all aligned frames agree on (None if no frame has labels)."""
    with_labels = [(n, f) for n, f in zip(aligned.names, aligned.frames, strict=True) if f.labels is not None]
    if not with_labels:
        return None
    name0, f0 = with_labels[0]
    assert f0.labels is not None
    y = np.array(f0.labels, copy=True)
    for name, f in with_labels[1:]:
        assert f.labels is not None
        # a sample labelled in one frame only takes that label; labels given in both must agree
        differ = np.flatnonzero((f.labels != y) & (f.labels >= 0) & (y >= 0))
        y = np.where(y >= 0, y, f.labels)
        if differ.size:
            ids = ", ".join(repr(np.asarray(aligned.ids)[i].item()) for i in differ[:5])
            raise LabelError(
                f"{name0} and {name} give different labels to {differ.size} shared ids (first {ids}); "
                "compare checkpoints on one set of labels (frame.with_labels)"
            )
    return y


def _labelled_part(aligned: AlignedFrames) -> AlignedFrames:
    """The aligned frames cut to the samples that have a label (a partly labelled batch): right and wrong,
    fixed and broken are defined for those only. Fully labelled or unlabelled frames are returned as they are."""
    y = _shared_labels(aligned)
    if y is None or bool(np.all(y >= 0)):
        return aligned
    keep = np.flatnonzero(y >= 0)
    if keep.size == 0:
        raise LabelError("none of the shared samples has a label")
    left_out = [np.asarray(aligned.ids)[y < 0]] * len(aligned.frames)
    return AlignedFrames(
        frames=tuple(f.subset(keep) for f in aligned.frames),
        rows=tuple(r[keep] for r in aligned.rows),
        dropped=tuple(np.concatenate([d, u]) for d, u in zip(aligned.dropped, left_out, strict=True)),
        names=aligned.names,
    )


@dataclass(frozen=True)
class FrameComparison:
    """Two checkpoints' frames aligned by id and compared (A = first, B = second).

    Row indices in :attr:`flips` and :attr:`comparison` refer to the aligned
    frames :attr:`a` and :attr:`b` (the same rows in both); :meth:`ids_of`
    turns a flip-table cell into sample ids.

    Examples
    --------
    >>> import numpy as np
    >>> a = LogitFrame(np.array([[2.0, 0.0], [0.0, 2.0], [2.0, 0.0]]), labels=[0, 0, 1], ids=[10, 11, 12])
    >>> b = LogitFrame(np.array([[2.0, 0.0], [0.0, 2.0], [2.0, 0.0]]), labels=[1, 0, 0], ids=[12, 10, 11])
    >>> c = compare_frames(a, b)  # b holds the same samples in another order
    >>> c.ids_of("fixed").tolist(), c.ids_of("broken").tolist(), c.ids_of("wrong_same").tolist()
    ([11], [10], [12])
    """

    aligned: AlignedFrames
    comparison: an.CheckpointComparison

    @property
    def a(self) -> LogitFrame:
        return self.aligned.frames[0]

    @property
    def b(self) -> LogitFrame:
        return self.aligned.frames[1]

    @property
    def ids(self) -> np.ndarray:
        return self.aligned.ids

    @property
    def classes(self) -> tuple[str, ...]:
        return self.a.classes

    @property
    def flips(self) -> an.FlipTable | None:
        """The flip table (None when neither frame has labels)."""
        return self.comparison.flips

    @property
    def per_class(self) -> an.ClassAccuracyChange | None:
        return self.comparison.per_class

    @property
    def only_in_a(self) -> np.ndarray:
        """Ids of A left out because B lacks them (with ``missing="drop"``)."""
        return self.aligned.dropped[0]

    @property
    def only_in_b(self) -> np.ndarray:
        return self.aligned.dropped[1]

    def ids_of(self, cell: str) -> np.ndarray:
        """Sample ids in one flip-table cell (see :data:`logitscope.analysis.FLIP_CELLS`)."""
        if self.flips is None:
            raise LabelError("the flip table needs labels; neither frame has any")
        return np.asarray(self.ids)[self.flips.rows(cell)]

    def per_class_frame(self) -> Any:
        """The per-class accuracy change as a DataFrame indexed by class name."""
        if self.per_class is None:
            raise LabelError("the per-class change needs labels; neither frame has any")
        return self.per_class.to_frame(self.classes)

    def to_dict(self) -> dict[str, object]:
        """A JSON-ready dict: sizes, ids left out, accuracies, flip table, McNemar p, per class."""
        out: dict[str, object] = {
            "names": list(self.aligned.names),
            "n_samples": self.comparison.n_samples,
            "n_only_in_a": int(self.only_in_a.size),
            "n_only_in_b": int(self.only_in_b.size),
            "labelled": self.flips is not None,
            "temperature_a": self.a.temperature,
            "temperature_b": self.b.temperature,
        }
        out.update(self.comparison.to_dict(self.classes))
        return out


def compare_frames(
    a: LogitFrame, b: LogitFrame, *, missing: MissingIds = "raise", names: Sequence[str] = ("A", "B")
) -> FrameComparison:
    """Align two frames by sample id and compare the checkpoints that made them.

    Parameters
    ----------
    a, b : LogitFrame
        The two checkpoints' frames (same classes); each is read at its own temperature.
    missing : {"raise", "drop"}
        Ids held by one frame only: name them in an error, or leave them out
        (:attr:`FrameComparison.only_in_a`, :attr:`FrameComparison.only_in_b`).
    names : two str
        Names of the frames in messages (file names in the CLI).

    Examples
    --------
    >>> from logitscope import load_demo
    >>> before = load_demo("mailroom")
    >>> after = before.subset(np.arange(before.n_samples)[::-1])  # same logits, other row order
    >>> compare_frames(before, after).to_dict()["n_changed"]
    0
    """
    aligned = _labelled_part(align_frames(a, b, missing=missing, names=names))
    y = _shared_labels(aligned)
    fa, fb = aligned.frames
    with assume_valid():
        result = an.compare_checkpoints(fa.logits, fb.logits, y, fa.temperature, fb.temperature)
    return FrameComparison(aligned=aligned, comparison=result)


@dataclass(frozen=True)
class FrameForgetting:
    """Checkpoints in training order, aligned by id, and their samples ranked by forgetting events.

    Examples
    --------
    >>> import numpy as np
    >>> epochs = [LogitFrame(np.array(z, dtype=float), labels=[0, 1, 0]) for z in
    ...           ([[2, 0], [0, 2], [0, 2]], [[0, 2], [0, 2], [0, 2]], [[2, 0], [0, 2], [0, 2]])]
    >>> f = forgetting_across(epochs)
    >>> f.to_frame()[["forgetting_events", "never_learned"]].values.tolist()
    [[0, True], [1, False], [0, False]]
    """

    aligned: AlignedFrames
    ranking: an.ForgettingRanking
    correct: np.ndarray

    @property
    def ids(self) -> np.ndarray:
        return self.aligned.ids

    def top_ids(self, n: int) -> np.ndarray:
        """Ids of the ``n`` most-forgotten samples."""
        return np.asarray(self.ids)[self.ranking.top(n)]

    def to_frame(self) -> Any:
        """The ranking as a DataFrame indexed by id, most-forgotten first, with the label's class name."""
        df = self.ranking.to_frame(self.ids)
        first = self.aligned.frames[0]
        y = _shared_labels(self.aligned)
        assert y is not None
        df.insert(2, "label_class", [first.classes[int(k)] for k in y[self.ranking.order]])
        return df


def forgetting_across(frames: Sequence[LogitFrame], *, missing: MissingIds = "raise") -> FrameForgetting:
    """Rank samples by forgetting events over checkpoints given in training order (Toneva et al. 2019).

    Each frame is one checkpoint (epoch) scored on the same samples; frames
    are aligned by id. See :func:`logitscope.analysis.rank_forgetting`.

    Raises
    ------
    LabelError
        If no frame has labels, or the frames' labels disagree.
    """
    frames = list(frames)
    if len(frames) < 2:
        raise ParameterError(f"forgetting needs at least two checkpoints, got {len(frames)}")
    aligned = align_frames(*frames, missing=missing, names=[f"checkpoint {i}" for i in range(len(frames))])
    aligned = _labelled_part(aligned)
    y = _shared_labels(aligned)
    if y is None:
        raise LabelError("forgetting events need labels; none of the frames has any")
    correct = np.stack([f.sample_scores().predicted == y for f in aligned.frames])
    return FrameForgetting(aligned=aligned, ranking=an.rank_forgetting(correct), correct=correct)
