"""Settle the choices from user options, and compute every finding a report shows, once.

:func:`resolve_choices` turns the options of the CLI, of
:meth:`LogitFrame.report` or of the calibration panel into :class:`Choices`
and a :class:`TemperatureContext` (the frame's own temperature, the decision
temperature, the fitted one and the one shown "after temperature scaling").
:func:`collect` computes the :class:`Findings` for them. The report renders
a :class:`Findings`; the panel's views compute the same finding functions
for the same choices, so both show the same numbers.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from .. import analysis as an
from ..analysis.split import Split, hash_split
from ..errors import LabelError, ParameterError
from .calibration import CalibrationSummary, PredictionSummary, calibration_summary, prediction_summary
from .choices import Binning, Choices, ThresholdRule
from .confusion import ConfusionSummary, confusion_summary
from .held_out import HeldOutCheck, held_out_check
from .histogram import ConfidenceHistogram, confidence_histogram
from .suspects import SuspectLabels, suspect_labels
from .sweep import SweepFinding, fitted_temperature, sweep_finding
from .threshold import ThresholdDecision, threshold_decision

if TYPE_CHECKING:
    from ..chunked.frame import ChunkedFrame
    from ..frame import LogitFrame

__all__ = ["Findings", "TemperatureContext", "collect", "resolve_choices", "rule_from_options", "temperature_context"]

#: Fewest labelled rows for the report's own held-out split.
MIN_ROWS_FOR_SPLIT = 20
#: Rows of the candidate and pair tables.
N_SUSPECTS = 20
N_PAIRS = 10


@dataclass(frozen=True)
class TemperatureContext:
    """The temperatures a set of findings speaks of.

    ``base`` is the frame's own; ``decision`` the one the threshold, the
    confusion summary and the candidates use (``how``: why); ``fitted`` the
    fit on all labelled rows; ``compare`` the one shown "after temperature
    scaling" beside ``base`` (the decision temperature when it differs from
    the base one, else the fitted one; None without labels).
    """

    base: float
    decision: float
    how: str
    fitted: an.TemperatureFit | None
    compare: float | None
    compare_how: str


def rule_from_options(
    target_accuracy: float | None = None,
    costs: Sequence[float] | None = None,
    threshold: float | None = None,
    use_lower_bound: bool = False,
    per_class: bool = False,
    interval: str = "wilson",
    level: float = 0.95,
) -> ThresholdRule | None:
    """The threshold rule the options ask for (None when they ask for none).

    Examples
    --------
    >>> rule_from_options(costs=(10, 1)).describe()
    'error cost 10, review cost 1'
    """
    asked = [r for r, v in (("accuracy", target_accuracy), ("cost", costs), ("fixed", threshold)) if v is not None]
    if len(asked) > 1:
        raise ParameterError(f"choose one threshold rule, got {' and '.join(asked)}")
    common: dict[str, Any] = {"interval": interval, "level": level, "use_lower_bound": use_lower_bound}
    if target_accuracy is not None:
        return ThresholdRule("accuracy", target_accuracy=target_accuracy, per_class=per_class, **common)
    if costs is not None:
        try:
            e, r = (float(c) for c in costs)
        except (TypeError, ValueError) as exc:
            raise ParameterError(f"costs must be two numbers (error cost, review cost), got {costs!r}") from exc
        return ThresholdRule("cost", error_cost=e, review_cost=r, **common)
    if threshold is not None:
        return ThresholdRule("fixed", threshold=threshold, **common)
    # no rule: still check the interval options, which the caller may have set on purpose
    ThresholdRule("fixed", threshold=0.5, **common)
    return None


def _fit_all(frame: LogitFrame | ChunkedFrame) -> an.TemperatureFit:
    """The temperature fit on all labelled rows (a chunked batch fits over its chunks)."""
    from ..frame import LogitFrame

    if isinstance(frame, LogitFrame):
        return fitted_temperature(frame)
    from ..chunked.analysis import fit_temperature as chunked_fit

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # a bound hit is carried in at_bound, as in memory
        return chunked_fit(frame)


def resolve_choices(
    frame: LogitFrame | ChunkedFrame,
    temperature: float | None = None,
    fit_temperature: bool = False,
    target_accuracy: float | None = None,
    costs: Sequence[float] | None = None,
    threshold: float | None = None,
    use_lower_bound: bool = False,
    per_class: bool = False,
    interval: str = "wilson",
    level: float = 0.95,
    n_bins: int = 15,
    strategy: str = "uniform",
    split: Split | None = None,
    temperature_how: str | None = None,
    *,
    fitted: an.TemperatureFit | None = None,
) -> tuple[Choices, TemperatureContext]:
    """Check the options and settle the temperatures and the threshold rule.

    ``frame`` is a :class:`~logitscope.LogitFrame` or a :class:`~logitscope.chunked.ChunkedFrame`.
    ``fitted`` is the temperature fit on all labelled rows when the caller has it already; else it is
    computed here for a labelled frame (over the chunks for a chunked batch).

    Raises
    ------
    ParameterError
        Conflicting or out-of-range options.
    LabelError
        An option that needs labels on a frame without them.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> frame = LogitFrame(np.array([[2.0, 0.0], [0.0, 1.0], [1.0, 0.0]]), labels=[0, 1, 1])
    >>> choices, temps = resolve_choices(frame, temperature=2.0, target_accuracy=0.9)
    >>> choices.temperature, choices.rule.kind, temps.compare
    (2.0, 'accuracy', 2.0)
    """
    if temperature is not None and fit_temperature:
        raise ParameterError("give either a temperature or fit_temperature=True, not both")
    rule = rule_from_options(target_accuracy, costs, threshold, use_lower_bound, per_class, interval, level)
    binning = Binning(n_bins, strategy)  # type: ignore[arg-type]
    if not frame.has_labels:
        asked = [n for n, v in (("fit_temperature", fit_temperature), ("a threshold rule", rule is not None)) if v]
        if asked:
            raise LabelError(f"{' and '.join(asked)} needs labels; this frame has none (use with_labels)")
    base = frame.temperature
    if fitted is None and frame.has_labels:
        fitted = _fit_all(frame)
    if temperature is not None:
        t = an.check_temperature(temperature)
        how = "set by hand"
        if fitted is not None and math.isclose(t, fitted.temperature, rel_tol=1e-9):
            how = "set by hand, equal to the fitted temperature"
    elif fit_temperature:
        assert fitted is not None
        t, how = fitted.temperature, "fitted: minimum NLL on all labelled rows"
    else:
        t, how = base, "as given"
    if temperature_how:
        how = str(temperature_how)
    choices = Choices(temperature=t, temperature_how=how, binning=binning, rule=rule, split=split)
    return choices, temperature_context(frame, t, how, fitted)


def temperature_context(
    frame: LogitFrame | ChunkedFrame, temperature: float, how: str, fitted: an.TemperatureFit | None = None
) -> TemperatureContext:
    """The temperatures shown beside a decision temperature: the frame's own, the fitted one, the compared one.

    ``fitted`` is the fit on all labelled rows (computed when None and the frame has labels).

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> frame = LogitFrame(np.array([[2.0, 0.0], [0.0, 1.0], [1.0, 0.0]]), labels=[0, 1, 1])
    >>> temperature_context(frame, 2.0, "set by hand").compare
    2.0
    """
    t = an.check_temperature(temperature)
    base = frame.temperature
    if fitted is None and frame.has_labels:
        fitted = _fit_all(frame)
    if fitted is None:
        compare, compare_how = None, ""
    elif not math.isclose(t, base, rel_tol=1e-12):
        compare, compare_how = t, str(how)
    else:
        compare, compare_how = fitted.temperature, "fitted, for comparison: the decisions below do not use it"
    return TemperatureContext(base, t, str(how), fitted, compare, compare_how)


@dataclass(frozen=True)
class Findings:
    """Every finding a report shows, computed once for one frame and one set of choices."""

    choices: Choices
    temperatures: TemperatureContext
    predictions: PredictionSummary
    before: CalibrationSummary | None = None
    after: CalibrationSummary | None = None
    decision: CalibrationSummary | None = None
    sweep: SweepFinding | None = field(default=None, repr=False)
    threshold: ThresholdDecision | None = None
    held_out: HeldOutCheck | None = None
    confusion: ConfusionSummary | None = None
    suspects: SuspectLabels | None = None
    split: Split | None = field(default=None, repr=False)
    histogram: ConfidenceHistogram | None = field(default=None, repr=False)

    @property
    def labelled(self) -> bool:
        return self.before is not None


def collect(
    frame: LogitFrame,
    choices: Choices,
    temperatures: TemperatureContext,
    *,
    own_split: bool = True,
    n_suspects: int = N_SUSPECTS,
    n_pairs: int = N_PAIRS,
) -> Findings:
    """Compute the findings of ``frame`` for ``choices``.

    With ``own_split`` and no split in the choices, the held-out check uses a
    seeded (seed 0) half-and-half split by row hash (:func:`logitscope.analysis.hash_split`:
    the one a chunked batch gets, so both give the same report) when the frame
    has at least ``MIN_ROWS_FOR_SPLIT`` labelled rows and both parts hold some.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> frame = LogitFrame(np.array([[2.0, 0.0], [0.0, 1.0], [1.0, 0.0]]), labels=[0, 1, 1])
    >>> f = collect(frame, *resolve_choices(frame, target_accuracy=0.9))
    >>> f.before.accuracy == f.decision.accuracy, f.threshold.rule.kind
    (True, 'accuracy')
    """
    if not frame.has_labels:
        t = choices.temperature
        return Findings(choices, temperatures, prediction_summary(frame, t), histogram=confidence_histogram(frame, t))
    with frame._sharing_curves():  # a summary and a threshold of the same rows sort their confidences once
        return _labelled_findings(frame, choices, temperatures, own_split, n_suspects, n_pairs)


def _labelled_findings(
    frame: LogitFrame,
    choices: Choices,
    temperatures: TemperatureContext,
    own_split: bool,
    n_suspects: int,
    n_pairs: int,
) -> Findings:
    """:func:`collect` of a frame with labels."""
    t = choices.temperature
    b = choices.binning
    made: dict[float, CalibrationSummary] = {}

    def summary(temperature: float) -> CalibrationSummary:  # each temperature's summary once
        if temperature not in made:
            made[temperature] = calibration_summary(frame, temperature, None, b)
        return made[temperature]

    # The findings are computed temperature by temperature, the decision temperature's last, so that a
    # frame that caches the scores of one temperature only (a large one) computes each one's scores once
    # or nearly (the held-out check ends on the decision temperature too).
    if temperatures.compare is not None and temperatures.compare != t:
        summary(temperatures.compare)
    before = summary(temperatures.base)
    split = choices.split
    if split is None and own_split and frame.n_labelled >= MIN_ROWS_FOR_SPLIT:
        own = hash_split(frame.n_samples, 0.5, seed=0)  # as a chunked batch is split, chunk by chunk
        own.fit.flags.writeable = own.held_out.flags.writeable = False  # the findings of each part share it
        if frame.labelled[own.fit].any() and frame.labelled[own.held_out].any():  # each part judged on labels
            split = own
    held = None if split is None else held_out_check(frame, split, t, choices.rule, b)
    # the findings that need transient per-row arrays come before those that keep some (the curve)
    suspects = suspect_labels(frame, "confident_learning", t, top=n_suspects)
    confusion = confusion_summary(frame, t, 1, n_pairs)
    preds = prediction_summary(frame, t)
    histogram = confidence_histogram(frame, t)
    decision = summary(t)
    after = None if temperatures.compare is None else summary(temperatures.compare)
    marks = [temperatures.base, t]
    sweep = sweep_finding(frame, None, b, marks=marks, fitted=temperatures.fitted)
    # with a split of the user's, the threshold is chosen on its fit part (as the panel's picker does); the
    # held-out check then judges it on the other part. The report's own split only checks.
    chosen_on = None if choices.split is None else choices.split.fit
    threshold = None if choices.rule is None else threshold_decision(frame, choices.rule, t, chosen_on)
    return Findings(
        choices=choices,
        temperatures=temperatures,
        predictions=preds,
        before=before,
        after=after,
        decision=decision,
        sweep=sweep,
        threshold=threshold,
        held_out=held,
        confusion=confusion,
        suspects=suspects,
        split=split,
        histogram=histogram,
    )
