"""SampleCard: the focused sample, large, with all its scores, class probabilities and metadata."""

from __future__ import annotations

import math
from typing import Any

import anywidget
import numpy as np
import traitlets

from ..errors import ParameterError
from ..frame import LogitFrame
from ._assets import esm
from .base import LinkedView
from .gallery import page_probabilities
from .state import SharedState
from .style import ENERGY
from .thumbnails import ThumbnailCache

__all__ = ["SampleCard"]

_SCORES = (
    ("confidence", "confidence"),
    ("entropy", "entropy"),
    ("margin", "margin"),
    ("logit_margin", "logit margin"),
    ("energy", "energy"),
    ("true_probability", "label probability"),
    ("true_rank", "label rank"),
)


def _cell(value: Any) -> str:
    """A metadata value as display text (escaping is the front end's job: it sets textContent)."""
    if isinstance(value, np.generic):
        value = value.item()
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "—"
    if isinstance(value, float):
        return f"{value:.6g}"
    return str(value)


class SampleCard(LinkedView, anywidget.AnyWidget):
    """The sample in ``state.focus``, shown large.

    The image (enlarged) or the full text, the id, the given label, the
    prediction, confidence, entropy, margin and energy (not for a frame built
    from probabilities, whose free energy is 0 in every row), every class
    probability as a bar (the ``top`` most probable when there are more
    classes, plus the given label's), and the row's metadata. Follows the
    shared temperature.

    Parameters
    ----------
    frame : LogitFrame
    state : SharedState, optional
    top : int, default 20
        Most probable classes to list when the frame has more.
    image_size : int, default 224
        Long side of the image in pixels.

    Examples
    --------
    >>> import logitscope
    >>> frame = logitscope.load_demo("mailroom")
    >>> card = SampleCard(frame)
    >>> card.sample
    {}
    >>> card.state.focus = 7
    >>> card.sample["id"], card.sample["label"], len(card.sample["probabilities"])
    ('card-00007', 'seven', 10)
    """

    _esm = esm("card.js")
    kind = "sample card"

    sample = traitlets.Dict(help="what the card shows; empty when no sample has the focus").tag(sync=True)
    temperature = traitlets.Float(1.0).tag(sync=True)

    def __init__(
        self,
        frame: LogitFrame,
        state: SharedState | None = None,
        top: int = 20,
        image_size: int = 224,
        **kwargs: Any,
    ) -> None:
        st = self.link(frame, state)
        if isinstance(top, bool) or not isinstance(top, int | np.integer) or top < 1:
            raise ParameterError(f"top must be a positive integer, got {top!r}")
        self.top = int(top)
        self._image_size = int(image_size)
        self.images = ThumbnailCache(frame.payload, size=image_size, max_items=64)
        self._meta = frame.meta  # the frame is immutable: one copy serves every focus change
        super().__init__(temperature=st.temperature, **kwargs)
        self._update()

    def _update(self, change: dict[str, Any] | None = None) -> None:
        self.temperature = self.state.temperature
        row = self.state.focus
        self.sample = {} if row is None else self.describe(int(row))

    def describe(self, row: int) -> dict[str, Any]:
        """The card's content for ``row`` at the shared temperature."""
        frame = self.frame
        t = self.state.temperature
        s = frame.sample_scores(t)
        classes = frame.classes
        label = None if frame.labels is None or frame.labels[row] < 0 else int(frame.labels[row])
        pred = int(s.predicted[row])
        p = page_probabilities(frame, np.array([row]), t)[0]
        order = np.argsort(-p, kind="stable")
        shown = order[: self.top]
        probs = [[classes[int(j)], float(p[j]), int(j) == label, int(j) == pred] for j in shown]
        label_outside = None
        if label is not None and label not in set(shown.tolist()):
            rank = int(np.flatnonzero(order == label)[0]) + 1
            label_outside = [classes[label], float(p[label]), rank]
        scores = []
        for name, title in _SCORES:
            if name == ENERGY and frame.source == "probabilities":
                continue  # a frame built from probabilities has free energy 0 in every row: nothing to read
            arr = getattr(s, name)
            if arr is not None:
                v = arr[row]
                scores.append([title, int(v) if name == "true_rank" else float(v)])
        rec = self._meta.iloc[row] if len(self._meta.columns) else None
        meta = [] if rec is None else [[str(c), _cell(rec.iloc[i])] for i, c in enumerate(self._meta.columns)]
        out: dict[str, Any] = {
            "row": row,
            "id": str(frame.ids[row]),
            "label": None if label is None else classes[label],
            "predicted": classes[pred],
            "correct": None if label is None else label == pred,
            "scores": scores,
            "probabilities": probs,
            "n_classes": frame.n_classes,
            "label_outside": label_outside,
            "meta": meta,
            "png": None,
            "width": 0,
            "height": 0,
            "text": None,
            "error": None,
        }
        payload = frame.payload
        if payload is not None and payload.kind == "texts":
            out["text"] = str(payload.data[row])
        else:
            img = self.images.get(row)
            if img is not None:
                out.update(png=img.png, width=img.width, height=img.height, error=img.error)
        return out

    # ------------------------------------------------------------------ hooks of the linked view

    def on_focus(self, row: int | None) -> None:
        self._update()

    def on_temperature(self, temperature: float) -> None:
        self._update()

    def on_frame(self) -> None:
        self.images = ThumbnailCache(self.frame.payload, size=self._image_size, max_items=64)
        self._meta = self.frame.meta
        self._update()
