"""The choices a set of findings is computed for: bins, temperature, threshold rule, split.

Every view and the report take their numbers from findings computed for one
:class:`Choices`. Two renderings made from equal choices show equal numbers,
because they render the same findings; neither assembles a metric itself.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import ClassVar, Literal

import numpy as np

from .. import analysis as an
from ..analysis.calibration import Strategy
from ..analysis.selective import IntervalMethod
from ..analysis.split import Split
from ..errors import ParameterError

__all__ = ["Binning", "Choices", "RuleKind", "ThresholdRule"]

RuleKind = Literal["accuracy", "cost", "fixed"]

#: Readable names of the two binning strategies.
STRATEGY_NAMES = {"uniform": "equal-width", "quantile": "equal-mass"}
#: Readable names of the two interval methods.
INTERVAL_NAMES = {"wilson": "Wilson score", "clopper-pearson": "Clopper-Pearson (exact)"}


def _int_in(name: str, value: object, low: int, high: int) -> int:
    if isinstance(value, bool) or not isinstance(value, int | np.integer) or not low <= int(value) <= high:
        raise ParameterError(f"{name} must be an integer from {low} to {high}, got {value!r}")
    return int(value)


def _float_in(name: str, value: object, low: float, high: float, *, open_low: bool = False) -> float:
    try:
        v = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError) as exc:
        raise ParameterError(f"{name} must be a number, got {value!r}") from exc
    below = v <= low if open_low else v < low
    if not math.isfinite(v) or below or v > high:
        bracket = "(" if open_low else "["
        raise ParameterError(f"{name} must lie in {bracket}{low:g}, {high:g}], got {value!r}")
    return v


@dataclass(frozen=True)
class Binning:
    """The one binning setting every calibration number uses: ``n_bins`` bins of one strategy.

    Examples
    --------
    >>> Binning(10, "quantile").describe()
    '10 equal-mass bins'
    """

    n_bins: int = 15
    strategy: Strategy = "uniform"
    #: The accepted number of bins, in every layer (controls take their bounds from it).
    N_BINS_RANGE: ClassVar[tuple[int, int]] = (1, 100)

    def __post_init__(self) -> None:
        object.__setattr__(self, "n_bins", _int_in("n_bins", self.n_bins, *self.N_BINS_RANGE))
        if self.strategy not in STRATEGY_NAMES:
            raise ParameterError(f"strategy must be 'uniform' or 'quantile', got {self.strategy!r}")

    def describe(self) -> str:
        """``"15 equal-width bins"``."""
        return f"{self.n_bins} {STRATEGY_NAMES[self.strategy]} bin{'s' if self.n_bins != 1 else ''}"


@dataclass(frozen=True)
class ThresholdRule:
    """How the review threshold is chosen, and how its accuracy's interval is computed.

    ``kind`` is ``"accuracy"`` (lowest threshold reaching ``target_accuracy``,
    on the interval's lower bound when ``use_lower_bound``), ``"cost"``
    (least expected cost for ``error_cost`` and ``review_cost``) or
    ``"fixed"`` (the given ``threshold``). ``per_class`` adds one threshold per
    predicted class for the same target (accuracy rule only).

    Examples
    --------
    >>> r = ThresholdRule("accuracy", target_accuracy=0.98)
    >>> r.describe()
    'target accuracy 0.98'
    >>> conf, ok = np.array([0.99, 0.9, 0.8]), np.array([True, True, False])
    >>> r.choose(conf, ok).threshold
    0.9
    """

    kind: RuleKind
    target_accuracy: float | None = None
    use_lower_bound: bool = False
    error_cost: float | None = None
    review_cost: float | None = None
    threshold: float | None = None
    interval: IntervalMethod = "wilson"
    level: float = 0.95
    per_class: bool = False

    def __post_init__(self) -> None:
        if self.kind == "accuracy":
            if self.target_accuracy is None:
                raise ParameterError("an accuracy rule needs target_accuracy")
            object.__setattr__(
                self, "target_accuracy", _float_in("target accuracy", self.target_accuracy, 0.0, 1.0, open_low=True)
            )
        elif self.kind == "cost":
            if self.error_cost is None or self.review_cost is None:
                raise ParameterError("a cost rule needs error_cost and review_cost")
            object.__setattr__(self, "error_cost", _float_in("error cost", self.error_cost, 0.0, math.inf))
            object.__setattr__(self, "review_cost", _float_in("review cost", self.review_cost, 0.0, math.inf))
        elif self.kind == "fixed":
            if self.threshold is None:
                raise ParameterError("a fixed rule needs threshold")
            object.__setattr__(self, "threshold", _float_in("threshold", self.threshold, 0.0, 1.0))
        else:
            raise ParameterError(f"rule kind must be 'accuracy', 'cost' or 'fixed', got {self.kind!r}")
        if self.interval not in INTERVAL_NAMES:
            raise ParameterError(f"interval must be 'wilson' or 'clopper-pearson', got {self.interval!r}")
        lv = _float_in("level", self.level, 0.0, 1.0, open_low=True)
        if lv >= 1.0:
            raise ParameterError(f"level must lie in (0, 1), got {self.level!r}")
        object.__setattr__(self, "level", lv)
        object.__setattr__(self, "use_lower_bound", bool(self.use_lower_bound))
        object.__setattr__(self, "per_class", bool(self.per_class) and self.kind == "accuracy")

    def describe(self) -> str:
        """A short readable statement of the rule."""
        if self.kind == "accuracy":
            bound = f", on the {self.level:.0%} lower bound" if self.use_lower_bound else ""
            return f"target accuracy {self.target_accuracy:g}{bound}"
        if self.kind == "cost":
            return f"error cost {self.error_cost:g}, review cost {self.review_cost:g}"
        return f"fixed at {self.threshold:g}"

    def choose(
        self, confidence: np.ndarray, correct: np.ndarray, curve: an.RiskCoverage | None = None
    ) -> an.ThresholdChoice:
        """Apply the rule to the given confidences and correctness (``curve``: their risk-coverage curve,
        when already computed, saves sorting them again)."""
        from ..analysis import selective

        if self.kind == "accuracy":
            assert self.target_accuracy is not None
            if curve is not None:
                return selective.accuracy_rule_on_curve(
                    curve, self.target_accuracy, self.level, self.interval, self.use_lower_bound
                )
            return an.threshold_for_accuracy(
                confidence, correct, self.target_accuracy, self.level, self.interval, self.use_lower_bound
            )
        if self.kind == "cost":
            assert self.error_cost is not None and self.review_cost is not None
            if curve is not None:
                return selective.cost_rule_on_curve(curve, self.error_cost, self.review_cost, self.level, self.interval)
            return an.threshold_for_cost(
                confidence, correct, self.error_cost, self.review_cost, self.level, self.interval
            )
        assert self.threshold is not None
        return an.evaluate_threshold(confidence, correct, self.threshold, self.level, self.interval)

    def judge(self, confidence: np.ndarray, correct: np.ndarray, threshold: float) -> an.ThresholdChoice:
        """Coverage and accuracy of a given threshold, with this rule's interval."""
        return an.evaluate_threshold(confidence, correct, threshold, self.level, self.interval)


@dataclass(frozen=True, eq=False)
class Choices:
    """Everything a set of findings depends on besides the frame.

    Parameters
    ----------
    temperature : float
        The decision temperature: the threshold, the confusion summary and the
        relabelling candidates use it.
    temperature_how : str
        How it was chosen, in words (shown beside it).
    binning : Binning
    rule : ThresholdRule or None
    split : Split or None
        Fit / held-out rows for the held-out check.

    Examples
    --------
    >>> c = Choices(1.5, binning=Binning(10))
    >>> c.with_temperature(2.0, "set by hand").temperature
    2.0
    """

    temperature: float = 1.0
    temperature_how: str = "as given"
    binning: Binning = field(default_factory=Binning)
    rule: ThresholdRule | None = None
    split: Split | None = None

    def __post_init__(self) -> None:
        object.__setattr__(self, "temperature", an.check_temperature(self.temperature))

    def with_temperature(self, temperature: float, how: str) -> Choices:
        """The same choices at another decision temperature."""
        return replace(self, temperature=an.check_temperature(temperature), temperature_how=how)
