"""The set-level summary of a frame, shared by :meth:`LogitFrame.summary` and the CLI."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, Literal

import numpy as np

from . import analysis as an

if TYPE_CHECKING:
    from .frame import LogitFrame

__all__ = ["SUMMARY_KEYS", "summarize"]

#: Keys of a summary of a labelled frame, in print order.
SUMMARY_KEYS = (
    "n_samples",
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
        ``n_samples, n_classes, mean_confidence, mean_entropy, temperature``
        always; with labels also ``accuracy, top_k_accuracy`` (keyed by k as
        a string), ``nll, brier, ece, mce, aurc``; ``fitted_temperature``
        and ``threshold`` when asked.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> s = summarize(LogitFrame(np.array([[2.0, 0.0], [0.0, 1.0]]), labels=[0, 0]))
    >>> s["accuracy"], s["n_samples"]
    (0.5, 2)
    """
    out: dict[str, Any] = {"n_samples": frame.n_samples, "n_classes": frame.n_classes}
    fit = None
    if fit_temperature:
        fit = frame.fit_temperature()
        t = fit.temperature
    else:
        t = frame.temperature if temperature is None else an.check_temperature(temperature)
    s = frame.sample_scores(t)
    if frame.has_labels:
        assert s.correct is not None and s.true_rank is not None
        assert s.true_log_probability is not None and s.brier is not None
        bins = an.reliability_bins(s.confidence, s.correct, n_bins=n_bins)
        out["accuracy"] = float(np.mean(s.correct))
        ks = an.default_ks(frame.n_classes)
        out["top_k_accuracy"] = {str(k): v for k, v in an.top_k_accuracies(s.true_rank, ks).items()}
        out["nll"] = float(-np.mean(s.true_log_probability))
        out["brier"] = float(np.mean(s.brier))
        out["ece"] = bins.ece
        out["mce"] = bins.mce
    out["mean_confidence"] = float(np.mean(s.confidence))
    out["mean_entropy"] = float(np.mean(s.entropy))
    if frame.has_labels:
        assert s.correct is not None
        out["aurc"] = an.aurc(s.confidence, s.correct)
    out["temperature"] = t
    if fit is not None:
        out["fitted_temperature"] = fit.temperature
        out["nll_before_fit"] = fit.nll_before
    if target_accuracy is not None:
        if not frame.has_labels:
            from .errors import LabelError

            raise LabelError("a threshold for a target accuracy needs labels")
        assert s.correct is not None
        choice = an.threshold_for_accuracy(s.confidence, s.correct, target_accuracy, method=interval)
        out["threshold"] = choice.to_dict()
        out["threshold"]["target_accuracy"] = target_accuracy
        out["caution"] = an.CAUTION
    return out
