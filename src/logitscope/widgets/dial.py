"""Temperature dial: a log slider for T and a button that fits T by minimising the NLL."""

from __future__ import annotations

import math
from typing import Any

import ipywidgets as widgets

from .. import analysis as an
from ..errors import ParameterError
from ..findings import fitted_temperature
from ..frame import LogitFrame
from .base import LinkedView
from .state import SharedState

__all__ = ["TemperatureDial"]


class TemperatureDial(LinkedView, widgets.HBox):
    """Set the shared temperature with a log slider, or fit it (:meth:`LogitFrame.fit_temperature`).

    Parameters
    ----------
    frame : LogitFrame
        The data (fitting needs labels).
    state : SharedState, optional
        Shared state; a new one is made when None.
    t_min, t_max : float
        Slider range (the shared temperature itself may lie outside; the
        slider then rests at its end and the readout shows the true value).

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> frame = LogitFrame(np.array([[3.0, 0.0], [0.0, 2.0], [1.0, 0.0]]), labels=[0, 1, 1])
    >>> dial = TemperatureDial(frame)
    >>> fit = dial.fit()
    >>> dial.state.temperature == fit.temperature == dial.fitted.temperature
    True
    """

    kind = "temperature dial"

    def __init__(
        self,
        frame: LogitFrame,
        state: SharedState | None = None,
        *,
        t_min: float = 0.05,
        t_max: float = 20.0,
        **kwargs: Any,
    ) -> None:
        if not (0 < t_min < t_max and math.isfinite(t_max)):
            raise ParameterError(f"need 0 < t_min < t_max, got t_min={t_min}, t_max={t_max}")
        self.link(frame, state)
        self.fitted: an.TemperatureFit | None = None
        self.slider = widgets.FloatLogSlider(
            value=min(max(self.state.temperature, t_min), t_max),
            base=10,
            min=math.log10(t_min),
            max=math.log10(t_max),
            step=0.01,
            continuous_update=False,
            readout=False,
            description="temperature",
            style={"description_width": "initial"},
            layout={"width": "300px"},
        )
        self.fit_button = widgets.Button(
            description="fit T",
            tooltip="minimise the negative log-likelihood over T",
            disabled=not frame.has_labels,
            layout={"width": "70px"},
        )
        self.reset_button = widgets.Button(description="reset", tooltip="set T = 1", layout={"width": "64px"})
        self.readout = widgets.Label()
        self.readout.add_class("logitscope-dial-readout")
        widgets.HBox.__init__(
            self,
            children=[self.slider, self.fit_button, self.reset_button, self.readout],
            layout=widgets.Layout(align_items="center", flex_flow="row wrap"),
            **kwargs,
        )
        self.add_class("logitscope-dial")
        self.slider.observe(self._on_slider, "value")
        self.fit_button.on_click(lambda b: self.fit())
        self.reset_button.on_click(lambda b: setattr(self.state, "temperature", 1.0))
        self._show()

    def fit(self) -> an.TemperatureFit:
        """Fit the temperature on the frame's labels and set it as the shared temperature."""
        self.fitted = fitted_temperature(self.frame)
        self.state.temperature = self.fitted.temperature
        self._show()
        return self.fitted

    def _on_slider(self, change: Any) -> None:
        if not self.is_quiet:
            self.state.temperature = float(change["new"])

    def on_temperature(self, temperature: float) -> None:
        lo, hi = 10.0**self.slider.min, 10.0**self.slider.max
        with self.quietly():
            self.slider.value = min(max(temperature, lo), hi)
        self._show()

    def on_frame(self) -> None:
        self.fitted = None
        self.fit_button.disabled = not self.frame.has_labels
        self._show()

    def _show(self) -> None:
        text = f"T = {self.state.temperature:.3g}"
        if self.fitted is not None:
            f = self.fitted
            text += f"   fitted T = {f.temperature:.3g} (NLL {f.nll_before:.4f} at T = 1 → {f.nll_after:.4f})"
            if f.at_bound:
                text += ", at the search bound"
        self.readout.value = text
