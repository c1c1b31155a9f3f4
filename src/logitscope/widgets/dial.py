"""Temperature dial: a log slider and a number box for T, and a button that fits T by minimising the NLL."""

from __future__ import annotations

import math
from typing import Any

import ipywidgets as widgets

from .. import analysis as an
from ..errors import InputTypeError, LogitscopeError, ParameterError
from ..findings import fitted_temperature
from ..frame import LogitFrame
from ..parameters import RANGES
from ..parameters import check as check_parameter
from .base import LinkedView
from .state import SharedState

__all__ = ["TemperatureDial"]


class TemperatureDial(LinkedView, widgets.HBox):
    """Set the shared temperature with a log slider or a number box, or fit it (:meth:`LogitFrame.fit_temperature`).

    The slider spans the whole accepted temperature range
    (``parameters.RANGES["temperature"]``, 1e-3 to 1e3) unless narrower
    ``t_min`` / ``t_max`` are given; a shared temperature outside a narrower
    slider widens it, so the slider never shows a value other than the one in
    use. The box takes any temperature of the range exactly and says why when
    a value lies outside it.

    Parameters
    ----------
    frame : LogitFrame
        The data (fitting needs labels).
    state : SharedState, optional
        Shared state; a new one is made when None.
    t_min, t_max : float, optional
        Slider range, within the accepted temperature range (default: all of it).

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> frame = LogitFrame(np.array([[3.0, 0.0], [0.0, 2.0], [1.0, 0.0]]), labels=[0, 1, 1])
    >>> dial = TemperatureDial(frame)
    >>> fit = dial.fit()
    >>> dial.state.temperature == fit.temperature == dial.fitted.temperature
    True
    >>> dial.box.value = 250.0; dial.state.temperature
    250.0
    """

    kind = "temperature dial"

    def __init__(
        self,
        frame: LogitFrame,
        state: SharedState | None = None,
        *,
        t_min: float | None = None,
        t_max: float | None = None,
        **kwargs: Any,
    ) -> None:
        rng = RANGES["temperature"]
        lo_e, hi_e, step = rng.control_bounds()
        lo = 10.0**lo_e if t_min is None else float(check_parameter(t_min, "temperature", context="(t_min)"))
        hi = 10.0**hi_e if t_max is None else float(check_parameter(t_max, "temperature", context="(t_max)"))
        if not lo < hi:
            raise ParameterError(f"need t_min < t_max, got t_min={lo:g}, t_max={hi:g}")
        self.link(frame, state)
        self.fitted: an.TemperatureFit | None = None
        t = self.state.temperature
        self.slider = widgets.FloatLogSlider(
            value=t,
            base=10,
            min=math.log10(min(lo, t)),
            max=math.log10(max(hi, t)),
            step=step,
            continuous_update=False,
            readout=False,
            description="temperature",
            style={"description_width": "initial"},
            layout={"width": "280px"},
        )
        self.box = widgets.FloatText(
            value=t, step=0.01, layout={"width": "78px"}, tooltip=f"T in {rng.interval()}: type a value, press Enter"
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
            children=[self.slider, self.box, self.fit_button, self.reset_button, self.readout],
            layout=widgets.Layout(align_items="center", flex_flow="row wrap"),
            **kwargs,
        )
        self.add_class("logitscope-dial")
        self.slider.observe(self._on_slider, "value")
        self.box.observe(self._on_box, "value")
        self.fit_button.on_click(lambda b: self.fit())
        self.reset_button.on_click(lambda b: setattr(self.state, "temperature", 1.0))
        self._error = ""
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

    def _on_box(self, change: Any) -> None:
        if self.is_quiet:
            return
        try:
            t = float(check_parameter(change["new"], "temperature"))
        except (LogitscopeError, InputTypeError) as exc:
            self._error = f"not set: {exc}"
            self._show()
            return
        self._error = ""
        self.state.temperature = t

    def on_temperature(self, temperature: float) -> None:
        with self.quietly():
            # a temperature beyond the slider's ends widens it: the slider shows the value in use
            e = math.log10(temperature)
            if e < self.slider.min:
                self.slider.min = e
            if e > self.slider.max:
                self.slider.max = e
            self.slider.value = temperature
            self.box.value = temperature
        self._error = ""
        self._show()

    def on_frame(self) -> None:
        self.fitted = None
        self.fit_button.disabled = not self.frame.has_labels
        self._show()

    def _show(self) -> None:
        text = f"T = {self.state.temperature:.4g}"
        if self.fitted is not None:
            f = self.fitted
            text += f"   fitted T = {f.temperature:.3g} (NLL {f.nll_before:.4f} at T = 1 → {f.nll_after:.4f})"
            if f.at_bound:
                text += ", at the search bound"
        if self._error:
            text += f"   {self._error}"
        self.readout.value = text
