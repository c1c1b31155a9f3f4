"""The set-level summary of a frame, shared by :meth:`LogitFrame.summary` and the CLI."""

from __future__ import annotations

import warnings
from typing import TYPE_CHECKING, Any, Literal

from . import analysis as an
from .errors import LabelError

if TYPE_CHECKING:
    from .frame import LogitFrame

__all__ = ["SUMMARY_KEYS", "summarize"]

#: Keys of a summary of a labelled frame, in print order.
SUMMARY_KEYS = (
    "n_samples",
    "n_labelled",
    "n_classes",
    "accuracy",
    "top_k_accuracy",
    "nll",
    "brier",
    "ece",
    "mce",
    "mean_confidence",
    "mean_entropy",
    "aurc",
    "temperature",
    "fitted_temperature",
    "threshold",
)


def summarize(
    frame: LogitFrame,
    temperature: float | None = None,
    fit_temperature: bool = False,
    target_accuracy: float | None = None,
    n_bins: int = 15,
    interval: Literal["wilson", "clopper-pearson"] = "wilson",
) -> dict[str, Any]:
    """Summarise a frame at one temperature.

    Parameters
    ----------
    frame : LogitFrame
    temperature : float, optional
        Temperature to evaluate at; default the frame's own.
    fit_temperature : bool
        Fit the temperature first (needs labels) and evaluate at it; adds
        ``fitted_temperature`` and ``nll_before_fit``.
    target_accuracy : float, optional
        Also choose the lowest confidence threshold reaching this accuracy
        (:func:`logitscope.analysis.threshold_for_accuracy`); adds ``threshold``.
    n_bins : int
        Equal-width bins for ECE and MCE.
    interval : {"wilson", "clopper-pearson"}
        Binomial interval for the threshold's accuracy.

    Returns
    -------
    dict
        ``n_samples, n_labelled, n_classes, mean_confidence, mean_entropy,
        temperature`` always (the last three over every row); with labels
        also ``accuracy, top_k_accuracy`` (keyed by k as a string), ``nll,
        brier, ece, mce, aurc``, over the labelled rows only (``n_labelled``
        of them); ``fitted_temperature`` and ``threshold`` when asked.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> s = summarize(LogitFrame(np.array([[2.0, 0.0], [0.0, 1.0]]), labels=[0, 0]))
    >>> s["accuracy"], s["n_samples"]
    (0.5, 2)
    """
    from .findings import (
        Binning,
        ThresholdRule,
        calibration_summary,
        fitted_temperature,
        prediction_summary,
        threshold_decision,
    )

    out: dict[str, Any] = {"n_samples": frame.n_samples, "n_labelled": frame.n_labelled, "n_classes": frame.n_classes}
    fit = None
    if fit_temperature:
        if not frame.has_labels:
            raise LabelError("fit_temperature needs labels; this frame has none (use with_labels)")
        fit = fitted_temperature(frame)
        if fit.at_bound:
            warnings.warn(
                f"the fitted temperature reached its bound T = {fit.temperature:g}: the NLL keeps falling "
                "towards it; treat the fit with care",
                RuntimeWarning,
                stacklevel=2,
            )
        t = fit.temperature
    else:
        t = frame.temperature if temperature is None else an.check_temperature(temperature)
    binning = Binning(n_bins, "uniform")
    if frame.has_labels:
        c = calibration_summary(frame, t, None, binning)
        out.update(
            accuracy=c.accuracy,
            top_k_accuracy={str(k): v for k, v in c.top_k.items()},
            nll=c.nll,
            brier=c.brier,
            ece=c.ece,
            mce=c.mce,
            aurc=c.aurc,
        )
    p = prediction_summary(frame, t)  # what needs no labels covers every row, labelled or not
    out.update(mean_confidence=p.mean_confidence, mean_entropy=p.mean_entropy)
    out["temperature"] = t
    if fit is not None:
        out["fitted_temperature"] = fit.temperature
        out["nll_before_fit"] = fit.nll_before
    if target_accuracy is not None:
        if not frame.has_labels:
            raise LabelError("a threshold for a target accuracy needs labels")
        rule = ThresholdRule("accuracy", target_accuracy=target_accuracy, interval=interval)
        decision = threshold_decision(frame, rule, t)
        out["threshold"] = decision.choice.to_dict()
        out["threshold"]["target_accuracy"] = rule.target_accuracy
        out["caution"] = decision.caution
    return out
