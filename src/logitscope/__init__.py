"""logitscope: look at a classifier's logits inside the notebook where it was trained.

The softmax over classes is a Boltzmann distribution (logit = minus energy,
``T`` = temperature); class counts of a batch follow a multinomial
distribution. The package has three layers: the data layer
(:class:`LogitFrame`), the analysis layer (:mod:`logitscope.analysis`, pure
numpy) and linked widgets (:mod:`logitscope.widgets`).
"""

from __future__ import annotations

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


def explore(frame: LogitFrame, **options: object) -> object:
    """Open the linked dashboard on ``frame`` (see :class:`logitscope.widgets.Dashboard`)."""
    from .widgets import Dashboard

    return Dashboard(frame, **options)  # type: ignore[arg-type]


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
