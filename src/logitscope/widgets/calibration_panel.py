"""Calibration and decision panel: reliability diagram, temperature sweep, threshold picker.

This first version shows the calibration numbers at the shared temperature;
the full composition grows in later commits.
"""

from __future__ import annotations

import html
from typing import Any

import ipywidgets as widgets

from .. import analysis as an
from ..frame import LogitFrame
from .state import SharedState

__all__ = ["CalibrationPanel"]


class CalibrationPanel(widgets.VBox):
    """Calibration numbers of a frame at the shared temperature.

    Parameters
    ----------
    frame : LogitFrame
        The data.
    state : SharedState, optional
        Shared state; a new one is made when None.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> frame = LogitFrame(np.array([[2.0, 0.0], [0.0, 1.0]]), labels=[0, 1])
    >>> panel = CalibrationPanel(frame)
    >>> panel.state.temperature
    1.0
    """

    def __init__(self, frame: LogitFrame, state: SharedState | None = None, **kwargs: Any) -> None:
        self.frame = frame
        self.state = state if state is not None else SharedState(frame.n_samples, frame.temperature)
        self._numbers = widgets.HTML()
        super().__init__(children=[self._numbers], **kwargs)
        self.state.observe(self._redraw, "temperature")
        self._redraw()

    def _redraw(self, change: Any = None) -> None:
        t = self.state.temperature
        if not self.frame.has_labels:
            self._numbers.value = "<p>Calibration needs labels; this frame has none.</p>"
            return
        s = self.frame.sample_scores(t)
        bins = an.reliability_bins(s.confidence, s.correct)
        self._numbers.value = (
            f"<p>T = {t:.3g}: ECE {bins.ece:.4f}, MCE {bins.mce:.4f}, "
            f"accuracy {html.escape(format(float(s.correct.mean()), '.4f'))}</p>"
        )
