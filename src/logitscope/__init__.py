"""logitscope: look at a classifier's logits inside the notebook where it was trained.

The softmax over classes is a Boltzmann distribution (logit = minus energy,
``T`` = temperature); class counts of a batch follow a multinomial
distribution. The package has three layers: the data layer
(:class:`LogitFrame`), the analysis layer (:mod:`logitscope.analysis`, pure
numpy) and linked widgets (:mod:`logitscope.widgets`).
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from typing import TYPE_CHECKING

from . import analysis
from .alignment import MissingIds
from .demo import load_demo
from .errors import (
    ClassNameError,
    DuplicateError,
    FileFormatError,
    InputTypeError,
    LabelError,
    LogitscopeError,
    NonFiniteError,
    ParameterError,
    ProbabilityError,
    ShapeError,
)
from .frame import LogitFrame, Payload

if TYPE_CHECKING:
    from .widgets import Dashboard, SharedState
    from .widgets.comparison import ComparisonPanel

__version__ = "0.1.0"

__all__ = [
    "ClassNameError",
    "DuplicateError",
    "FileFormatError",
    "InputTypeError",
    "LabelError",
    "LogitFrame",
    "LogitscopeError",
    "NonFiniteError",
    "ParameterError",
    "Payload",
    "ProbabilityError",
    "ShapeError",
    "__version__",
    "analysis",
    "compare",
    "explore",
    "load_demo",
]


def explore(
    frame: LogitFrame,
    *,
    relabel_path: str | os.PathLike[str] | None = None,
    max_classes: int = 30,
    state: SharedState | None = None,
    label: str | None = None,
    keep_frames: int = 10,
    compare_to: LogitFrame | None = None,
    compare_missing: MissingIds = "raise",
) -> Dashboard:
    """Open the linked dashboard on ``frame``: every view in three tabs, one selection shared by all.

    The "Explore" tab holds the score scatter, the confidence histogram, the
    sample card and gallery, the confusion matrix, the relabel queue and the
    doubtful-label candidates; "Calibrate and decide" holds the reliability
    diagram, the temperature sweep and the threshold choice; "History" plots
    the set-level numbers of every frame shown. Brush, click or assign
    ``dashboard.selected`` and every view follows; ``dashboard.update(frame)``
    shows a new frame (the next epoch's logits, say) in place. Show the
    returned widget by leaving it as the last expression of a notebook cell.

    Parameters
    ----------
    frame : LogitFrame
        The logits (or probabilities), labels, class names, ids and payload to look at.
    relabel_path : str or path-like, optional
        The JSON file the relabel queue saves its marks to after every change;
        an existing file is reopened with its marks. When None, a file in the
        current folder named after the data, such as
        ``relabel-zero-to-nine-1797-samples-<fingerprint>.json`` (see
        :func:`logitscope.relabel_store.default_path`), so the same data
        reopens the same list and two data sets keep two lists.
    max_classes : int, default 30
        Classes the confusion matrix gives their own row and column; with
        more classes, those with the most errors are drawn and the rest summed
        into one "other" row and column. At least 1.
    state : SharedState, optional
        The shared selection, focus and temperature, to link this dashboard to
        views made earlier on the same frame; a new one when None.
    label : str, optional
        Name of this first frame in the history (``"update 0"`` when None).
    keep_frames : int, default 10
        How many of the most recent frames :meth:`Dashboard.update` keeps to
        step back to (each holds its logit matrix; the numbers of every
        update are kept). At least 1.
    compare_to : LogitFrame, optional
        Another checkpoint's frame of the same samples, in any row order: adds a
        "Compare" tab with the flip table, the confidence scatter and the
        per-class change (see :func:`compare`), on the dashboard's selection.
    compare_missing : {"raise", "drop"}, default "raise"
        Ids that only one of the two frames holds: a :class:`ShapeError` naming
        them, or left out of the comparison and named apart in the tab.

    Returns
    -------
    Dashboard
        The widget; its views are attributes (``scatter``, ``histogram``,
        ``gallery``, ``card``, ``confusion``, ``queue``, ``doubtful``,
        ``calibration``) and ``selected`` reads or sets the selection.

    Raises
    ------
    InputTypeError
        When ``frame`` is not a :class:`LogitFrame` or ``state`` not a ``SharedState``.
    ParameterError
        When ``state`` was made for another number of samples, or ``max_classes``
        or ``keep_frames`` is out of range.
    FileFormatError
        When ``relabel_path`` exists but is not a relabel list; the file is left as it is.

    See Also
    --------
    logitscope.widgets.Dashboard : the class behind this function.

    Examples
    --------
    >>> import tempfile, pathlib, logitscope
    >>> frame = logitscope.load_demo("mailroom")
    >>> dash = logitscope.explore(frame, relabel_path=pathlib.Path(tempfile.mkdtemp()) / "marks.json")
    >>> dash.selected = [4, 8, 15]  # select from Python; a brush in the browser does the same
    >>> sorted(dash.gallery.page_rows.tolist())
    [4, 8, 15]
    >>> dash.queue.mark([8], note="smudged")
    >>> dash.queue.marks["id"].tolist()
    ['card-00008']
    """
    from .widgets import Dashboard

    return Dashboard(
        frame, state, relabel_path, max_classes=max_classes, label=label, keep_frames=keep_frames,
        compare_to=compare_to, compare_missing=compare_missing,
    )  # fmt: skip


def compare(
    a: LogitFrame,
    b: LogitFrame,
    *,
    missing: MissingIds = "raise",
    names: Sequence[str] = ("A", "B"),
    page_size: int = 12,
) -> ComparisonPanel:
    """Two checkpoints' frames of the same samples side by side: flip table, confidence scatter, per-class change.

    The frames are matched by sample id, in any row order
    (:func:`logitscope.checkpoints.compare_frames`). The panel holds the
    comparison view (:class:`logitscope.widgets.CheckpointComparisonView`),
    a gallery and a sample card on one shared state: a click on a
    flip-table cell (right in both, fixed, broken, wrong in both with the same
    or other classes), on a class, or a rectangle brushed on the scatter puts
    those samples in the gallery. McNemar's exact test (McNemar 1947) weighs
    fixed against broken; the per-class p-values are Holm-adjusted.

    Parameters
    ----------
    a, b : LogitFrame
        The earlier (A) and the later (B) checkpoint's frames, with the same
        classes in the same order; each is read at its own temperature.
    missing : {"raise", "drop"}, default "raise"
        Ids held by one frame only: a :class:`ShapeError` naming them, or left
        out of the comparison and named apart in the view.
    names : two str, default ("A", "B")
        Names of the frames in the view and in messages (file names, epochs).
    page_size : int, default 12
        Tiles per gallery page.

    Returns
    -------
    ComparisonPanel
        A widget; ``panel.flip_table`` is the flip table as a DataFrame,
        ``panel.view``, ``panel.gallery`` and ``panel.card`` its parts,
        ``panel.selected`` the selected rows of ``a``.

    Raises
    ------
    ShapeError
        If the frames' ids differ and ``missing="raise"``, or they share none.
    ClassNameError
        If their classes differ.
    LabelError
        If their labels disagree on shared ids.

    Examples
    --------
    >>> import numpy as np
    >>> import logitscope
    >>> before = logitscope.load_demo("mailroom")
    >>> rng = np.random.default_rng(0)
    >>> z = before.logits + rng.normal(scale=2.0, size=before.logits.shape)  # a noisier checkpoint
    >>> order = rng.permutation(before.n_samples)  # its rows come back in another order
    >>> after = logitscope.LogitFrame(z[order], labels=before.labels[order], classes=before.classes,
    ...                               ids=before.ids[order])
    >>> panel = logitscope.compare(before, after, names=("epoch 9", "epoch 10"))
    >>> table = panel.flip_table
    >>> int(table["count"].sum()) == before.n_samples
    True
    >>> rows = panel.view.select_cell("broken")  # rows of `before` right under it, wrong under `after`
    >>> bool((before.sample_scores().correct[rows]).all()), panel.gallery.n_shown == int(table.loc["broken", "count"])
    (True, True)
    """
    from .widgets.comparison import open_comparison

    return open_comparison(a, b, missing=missing, names=names, page_size=page_size)
