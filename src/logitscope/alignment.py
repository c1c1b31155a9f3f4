"""Lining up frames of the same samples by id, whatever their row order.

Two checkpoints scored on one validation set rarely come back in the same
row order (a shuffled loader, a parquet file sorted another way, a few
samples dropped). :func:`align_frames` matches rows by sample id and returns
every frame cut to the ids they all hold, in the first frame's order. Ids
that some frame lacks are named in the error, or, with ``missing="drop"``,
left out and reported apart.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np
import pandas as pd

from .errors import ClassNameError, InputTypeError, ParameterError, ShapeError
from .frame import LogitFrame

__all__ = ["AlignedFrames", "MissingIds", "align_frames"]

MissingIds = Literal["raise", "drop"]


@dataclass(frozen=True)
class AlignedFrames:
    """Frames cut to the ids they share, row ``i`` of each being the same sample.

    Attributes
    ----------
    frames : tuple of LogitFrame
        The input frames, each reduced to the shared ids in the first frame's
        order (a frame already in that order is returned as it is).
    rows : tuple of ndarray
        For each frame, the positions of the shared ids in the frame as given.
    dropped : tuple of ndarray
        For each frame, the ids it holds that some other frame lacks (empty
        unless ``missing="drop"``).
    names : tuple of str
        The names used in messages ("A", "B", ... unless given).
    """

    frames: tuple[LogitFrame, ...]
    rows: tuple[np.ndarray, ...]
    dropped: tuple[np.ndarray, ...]
    names: tuple[str, ...]

    @property
    def ids(self) -> np.ndarray:
        """The shared ids, in the order of the aligned rows."""
        return self.frames[0].ids

    @property
    def n_samples(self) -> int:
        return self.frames[0].n_samples

    def __len__(self) -> int:
        return len(self.frames)

    def __getitem__(self, i: int) -> LogitFrame:
        return self.frames[i]


def _id_kind(ids: np.ndarray) -> str:
    return "strings" if ids.dtype.kind in "OSU" else "numbers"


def _show(ids: np.ndarray, limit: int = 5) -> str:
    shown = ", ".join(repr(v.item() if isinstance(v, np.generic) else v) for v in ids[:limit])
    return shown + (f" and {ids.size - limit} more" if ids.size > limit else "")


def _default_names(n: int) -> tuple[str, ...]:
    return tuple(chr(ord("A") + i) if n <= 26 else f"frame {i + 1}" for i in range(n))


def align_frames(
    *frames: LogitFrame, missing: MissingIds = "raise", names: Sequence[str] | None = None
) -> AlignedFrames:
    """Match the rows of two or more frames by sample id.

    Parameters
    ----------
    *frames : LogitFrame
        Two or more frames with the same classes in the same order.
    missing : {"raise", "drop"}, default "raise"
        What to do with ids some frame lacks: raise a :class:`ShapeError`
        naming them, or leave them out (listed in :attr:`AlignedFrames.dropped`).
    names : sequence of str, optional
        Names of the frames in messages (file names, epochs); default "A", "B", ...

    Raises
    ------
    ShapeError
        If ids differ and ``missing="raise"``, or no id is shared.
    ClassNameError
        If the frames' classes differ.

    Examples
    --------
    >>> import numpy as np
    >>> a = LogitFrame(np.eye(3), labels=[0, 1, 2], ids=["P-1", "P-2", "P-3"])
    >>> b = LogitFrame(np.eye(3)[::-1], labels=[2, 1, 0], ids=["P-3", "P-2", "P-1"])
    >>> pair = align_frames(a, b)
    >>> pair.frames[1].ids.tolist(), pair.rows[1].tolist()
    (['P-1', 'P-2', 'P-3'], [2, 1, 0])
    >>> pair = align_frames(a, b.subset([0, 1]), missing="drop")
    >>> pair.ids.tolist(), pair.dropped[0].tolist()
    (['P-2', 'P-3'], ['P-1'])
    """
    if len(frames) < 2:
        raise ParameterError(f"align_frames needs at least two frames, got {len(frames)}")
    bad = [i for i, f in enumerate(frames) if not isinstance(f, LogitFrame)]
    if bad:
        raise InputTypeError(f"align_frames takes LogitFrames; argument {bad[0]} is a {type(frames[bad[0]]).__name__}")
    if missing not in ("raise", "drop"):
        raise ParameterError(f"missing must be 'raise' or 'drop', got {missing!r}")
    labels = tuple(str(n) for n in names) if names is not None else _default_names(len(frames))
    if len(labels) != len(frames):
        raise ParameterError(f"{len(labels)} names for {len(frames)} frames")
    first = frames[0]
    for name, f in zip(labels[1:], frames[1:], strict=True):
        if f.classes != first.classes:
            same_set = set(f.classes) == set(first.classes)
            raise ClassNameError(
                f"{labels[0]} and {name} must have the same classes in the same order"
                + ("; they hold the same names in another order" if same_set else "")
            )
    # positions of the first frame's ids in every frame (-1 where absent)
    lookup = [pd.Index(f.ids).get_indexer(first.ids) for f in frames]
    shared = np.logical_and.reduce([pos >= 0 for pos in lookup])
    if not shared.all() or any(f.n_samples != first.n_samples for f in frames):
        problems = []
        first_index = pd.Index(first.ids)
        for name, f, pos in zip(labels[1:], frames[1:], lookup[1:], strict=True):
            lacks = np.asarray(first.ids)[pos < 0]
            extra = np.asarray(f.ids)[first_index.get_indexer(f.ids) < 0]
            if lacks.size:
                problems.append(f"{lacks.size} ids of {labels[0]} are not in {name} (first {_show(lacks)})")
            if extra.size:
                problems.append(f"{extra.size} ids of {name} are not in {labels[0]} (first {_show(extra)})")
        kinds = {_id_kind(np.asarray(f.ids)) for f in frames}
        hint = (
            f"; the ids are of different kinds ({' and '.join(sorted(kinds))}), so none can match"
            if len(kinds) > 1
            else ""
        )
        if not shared.any():
            raise ShapeError("the frames share no sample id: " + "; ".join(problems[:2]) + hint)
        if missing == "raise":
            raise ShapeError(
                "the frames do not hold the same sample ids: "
                + "; ".join(problems[:4])
                + f". Pass missing='drop' to keep the {int(shared.sum())} ids they share"
            )
    keep = np.flatnonzero(shared)
    rows = tuple(pos[keep].astype(np.int64) for pos in lookup)
    aligned = []
    dropped = []
    for f, r in zip(frames, rows, strict=True):
        same = r.size == f.n_samples and np.array_equal(r, np.arange(f.n_samples))
        aligned.append(f if same else f.subset(r))
        left = np.ones(f.n_samples, dtype=bool)
        left[r] = False
        dropped.append(np.asarray(f.ids)[left])
    return AlignedFrames(frames=tuple(aligned), rows=rows, dropped=tuple(dropped), names=labels)
