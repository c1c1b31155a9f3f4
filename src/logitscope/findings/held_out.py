"""The held-out check: temperature and threshold fitted on one part of the rows, judged on the other.

A temperature or a threshold judged on the rows it was fitted on looks better
than it is. :func:`held_out_check` fits the temperature on the fit part of a
split and compares NLL, ECE and Brier score on both parts at the frame's own
temperature, at that fitted temperature and at the decision temperature; it
applies the threshold rule to the fit part (at the decision temperature) and
judges the threshold it gives on the held-out part. The panel and the report
both render this one finding.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from .. import analysis as an
from ..analysis.split import Split
from ..errors import LabelError, ParameterError
from .calibration import CalibrationSummary, _take, calibration_summary
from .choices import Binning, ThresholdRule
from .sweep import fitted_temperature
from .threshold import ThresholdDecision, threshold_decision

if TYPE_CHECKING:
    from ..frame import LogitFrame

__all__ = ["HeldOutCheck", "held_out_check"]


@dataclass(frozen=True)
class HeldOutCheck:
    """Numbers of the fit part and the held-out part of a split.

    ``columns`` lists ``(key, temperature, label)`` for the temperatures
    compared: ``"given"`` (the frame's own), ``"fitted"`` (fitted on the fit
    part) and ``"decision"`` (the decision temperature, when it differs from
    both). ``fit[key]`` and ``held[key]`` are the calibration summaries of the
    two parts at that temperature.
    """

    description: str
    n_fit: int
    n_held: int
    fitted: an.TemperatureFit
    columns: tuple[tuple[str, float, str], ...]
    fit: dict[str, CalibrationSummary] = field(repr=False)
    held: dict[str, CalibrationSummary] = field(repr=False)
    decision_temperature: float
    decision_on_fit: ThresholdDecision | None = field(default=None, repr=False)
    judged_on_held: an.ThresholdChoice | None = None


def _labelled_part(frame: LogitFrame, part: np.ndarray) -> np.ndarray:
    """The labelled rows of a part of a split, read-only, so that the findings of the part share them
    (:func:`logitscope.rows.as_rows` keeps such an array): the part itself when it is a read-only int64
    array of its own and every row has a label, else a new array."""
    r = np.asarray(part)
    if frame.fully_labelled and r.dtype == np.int64 and r.ndim == 1 and r.base is None and not r.flags.writeable:
        return r
    r = r[frame.labelled[r]]
    r.flags.writeable = False
    return r


def held_out_check(
    frame: LogitFrame,
    split: Split,
    temperature: float | None = None,
    rule: ThresholdRule | None = None,
    binning: Binning | None = None,
) -> HeldOutCheck:
    """Fit on ``split.fit``, judge on ``split.held_out``.

    Parameters
    ----------
    frame : LogitFrame
        Needs labels.
    split : Split
    temperature : float, optional
        The decision temperature (default the frame's own).
    rule : ThresholdRule, optional
        Applied to the fit part, its threshold judged on the held-out part.
    binning : Binning, optional

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> from logitscope.analysis import random_split
    >>> rng = np.random.default_rng(0)
    >>> z = rng.normal(size=(200, 3)) * 4
    >>> frame = LogitFrame(z, labels=np.where(rng.random(200) < 0.8, z.argmax(1), 0))
    >>> check = held_out_check(frame, random_split(200, 0.5, seed=1), rule=ThresholdRule("fixed", threshold=0.9))
    >>> check.n_fit + check.n_held, [key for key, _, _ in check.columns]
    (200, ['given', 'fitted'])
    """
    if not frame.has_labels:
        raise LabelError("a held-out check needs labels; this frame has none (use with_labels)")
    if np.asarray(split.fit).size == 0 or np.asarray(split.held_out).size == 0:
        raise ParameterError("both parts of a split need at least one row")
    # a partly labelled batch: each part is judged on its labelled rows
    fit_rows, held_rows = _labelled_part(frame, split.fit), _labelled_part(frame, split.held_out)
    if fit_rows.size == 0 or held_rows.size == 0:
        raise LabelError("both parts of a split need labelled rows; one part has none")
    t_dec = frame.temperature if temperature is None else an.check_temperature(temperature)
    b = Binning() if binning is None else binning
    fitted = fitted_temperature(frame, fit_rows)
    columns: list[tuple[str, float, str]] = [
        ("given", frame.temperature, "as given"),
        ("fitted", fitted.temperature, "fitted on the fit part"),
    ]
    if not any(math.isclose(t_dec, t, rel_tol=1e-9) for _, t, _ in columns):
        columns.append(("decision", t_dec, "decision temperature"))
    # both parts at one temperature before the next, the decision temperature last and its fit part last of
    # all (the threshold below uses them): a large frame caches the scores of one temperature only, and the
    # fit part's risk-coverage curve at the decision temperature is shared with the threshold
    made: dict[str, tuple[CalibrationSummary, CalibrationSummary]] = {}
    for key, t, _ in sorted(columns, key=lambda c: math.isclose(c[1], t_dec, rel_tol=1e-9)):
        on_held = calibration_summary(frame, t, held_rows, b)
        made[key] = calibration_summary(frame, t, fit_rows, b), on_held
    fit = {key: made[key][0] for key, _, _ in columns}
    held = {key: made[key][1] for key, _, _ in columns}
    decision = judged = None
    if rule is not None:
        decision = threshold_decision(frame, rule, t_dec, fit_rows)
        s = frame.sample_scores(t_dec)
        assert s.correct is not None
        judged = rule.judge(_take(s.confidence, held_rows), _take(s.correct, held_rows), decision.threshold)
    return HeldOutCheck(
        description=split.description or "given split",
        n_fit=int(fit_rows.size),
        n_held=int(held_rows.size),
        fitted=fitted,
        columns=tuple(columns),
        fit=fit,
        held=held,
        decision_temperature=t_dec,
        decision_on_fit=decision,
        judged_on_held=judged,
    )
