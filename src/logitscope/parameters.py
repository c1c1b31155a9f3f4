"""The accepted range of every user-facing parameter, declared once for all layers.

Each parameter a user can set (``n_bins``, ``target_accuracy``, ``level``,
the two costs, ``threshold``, ``temperature``, ``k``, ``held_out_fraction``,
``n_candidates`` ...) has one :class:`ParameterRange` in :data:`RANGES`. The
analysis functions, the findings, the report and the widget controls all
read it from here, so a value is either accepted everywhere or refused
everywhere with a :class:`~logitscope.errors.ParameterError` that names the
range. Nothing is silently clipped or replaced.

How a control should use a range
--------------------------------
A widget control (slider, bounded text box) takes its bounds from
:meth:`ParameterRange.control_bounds`, which returns ``(min, max, step)``
in the control's own units: closed bounds, an open end moved inwards by one
``step``, and for a range with ``log=True`` (the temperature) the base-10
exponents that ``ipywidgets.FloatLogSlider`` expects. A constructor argument
goes through :func:`check` (or :meth:`ParameterRange.check`) before the
control is built, so ``ReliabilityDiagram(n_bins=50)`` either shows 50 bins
or raises; it never shows 40. A range whose upper end depends on the data
(``k`` goes up to the number of classes) takes it as ``upper=``::

    lo, hi, step = RANGES["n_bins"].control_bounds()
    slider = widgets.IntSlider(value=check(n_bins, "n_bins"), min=lo, max=hi, step=step)
    k_box = widgets.BoundedIntText(min=1, max=RANGES["k"].control_bounds(upper=frame.n_classes)[1])

This module imports nothing from the rest of logitscope except the errors
(and numpy), so every layer may import it.

Examples
--------
>>> check(15, "n_bins")
15
>>> check(0.3, "target_accuracy")
0.3
>>> check(0, "n_bins")
Traceback (most recent call last):
...
logitscope.errors.ParameterError: n_bins must lie in [1, 100], got 0
>>> RANGES["temperature"].control_bounds()
(-3.0, 3.0, 0.01)
"""

from __future__ import annotations

import math
import numbers
from collections.abc import Mapping
from dataclasses import dataclass
from types import MappingProxyType
from typing import Literal

import numpy as np

from .errors import InputTypeError, ParameterError

__all__ = ["RANGES", "ParameterRange", "check", "get_range"]


def _fmt(x: float) -> str:
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    return f"{x:g}" if float(x) != int(x) or abs(x) >= 1e6 else str(int(x))


@dataclass(frozen=True)
class ParameterRange:
    """The accepted values of one parameter.

    Attributes
    ----------
    name : str
        The parameter's name in the API (``"n_bins"``).
    label : str
        How messages and controls call it (``"target accuracy"``).
    kind : {"int", "float"}
        Integers only, or any real number.
    min, max : float
        The ends of the range; ``max`` is None when it depends on the data
        (``k``: the number of classes), which :meth:`check` then takes as ``upper``.
    step : float
        The step of a control (for ``log=True``: in base-10 exponent units).
    default : float
        The value used when the caller gives none.
    min_open, max_open : bool
        Whether an end is excluded (``level`` lies in the open interval (0, 1)).
    log : bool
        Whether a control should move on a log scale.
    meaning : str
        One line on what the parameter does.
    """

    name: str
    label: str
    kind: Literal["int", "float"]
    min: float
    max: float | None
    step: float
    default: float | None
    min_open: bool = False
    max_open: bool = False
    log: bool = False
    meaning: str = ""

    def bounds(self, upper: float | None = None) -> tuple[float, float]:
        """``(min, max)`` with a data-dependent upper end filled in from ``upper``."""
        hi = self.max if upper is None else (upper if self.max is None else min(self.max, upper))
        if hi is None:
            raise ParameterError(f"the range of {self.name} needs its upper end (upper=...)")
        return self.min, float(hi)

    def interval(self, upper: float | None = None) -> str:
        """The range in interval notation, ``"[1, 100]"`` or ``"(0, 1]"``."""
        lo, hi = self.bounds(upper)
        return f"{'(' if self.min_open else '['}{_fmt(lo)}, {_fmt(hi)}{')' if self.max_open else ']'}"

    def contains(self, value: float, upper: float | None = None) -> bool:
        """Whether ``value`` lies in the range (the kind is not checked)."""
        lo, hi = self.bounds(upper)
        v = float(value)
        if math.isnan(v):
            return False
        above = v > lo if self.min_open else v >= lo
        below = v < hi if self.max_open else v <= hi
        return above and below

    def check(self, value: object, upper: float | None = None, *, context: str = "") -> int | float:
        """Return ``value`` as an int or float if it lies in the range, else raise.

        Raises
        ------
        InputTypeError
            If ``value`` is not a number (a string, None, a boolean).
        ParameterError
            If it is a number outside the range, NaN, or (for an integer
            parameter) not a whole number. The message names the range.
        """
        where = f" {context}" if context else ""
        if not isinstance(value, numbers.Real) and getattr(value, "ndim", None) == 0 and hasattr(value, "item"):
            value = value.item()  # a 0-d numpy array or tensor
        if isinstance(value, bool | np.bool_) or not isinstance(value, numbers.Real):
            noun = "an integer" if self.kind == "int" else "a number"
            raise InputTypeError(f"{self.label} must be {noun}, got {value!r}")
        if self.kind == "int":
            if not isinstance(value, numbers.Integral):
                raise ParameterError(f"{self.label} must be an integer in {self.interval(upper)}{where}, got {value!r}")
            out: int | float = int(value)
        else:
            out = float(value)
        if not self.contains(out, upper):
            raise ParameterError(f"{self.label} must lie in {self.interval(upper)}{where}, got {value!r}")
        return out

    def control_bounds(self, upper: float | None = None) -> tuple[float, float, float]:
        """``(min, max, step)`` for a widget control: closed ends, log-scale ranges as base-10 exponents."""
        lo, hi = self.bounds(upper)
        if self.log:
            lo_e, hi_e = math.log10(lo), math.log10(hi)
            return (lo_e + self.step if self.min_open else lo_e, hi_e - self.step if self.max_open else hi_e, self.step)
        lo_c = lo + self.step if self.min_open else lo
        hi_c = hi - self.step if self.max_open else hi
        if self.kind == "int":
            return int(lo_c), int(hi_c), int(self.step)
        return lo_c, hi_c, self.step


_ALL = (
    ParameterRange(
        "n_bins", "n_bins", "int", 1, 100, 1, 15,
        meaning="bins of a reliability diagram / ECE (Guo et al. 2017 use 15)",
    ),
    ParameterRange(
        "target_accuracy", "target accuracy", "float", 0.0, 1.0, 0.001, 0.95, min_open=True,
        meaning="accuracy the accepted samples must reach",
    ),
    ParameterRange(
        "level", "level", "float", 0.0, 1.0, 0.001, 0.95, min_open=True, max_open=True,
        meaning="confidence level of a binomial interval",
    ),
    ParameterRange(
        "error_cost", "error cost", "float", 0.0, 1e9, 0.1, 10.0,
        meaning="cost of one accepted wrong prediction",
    ),
    ParameterRange(
        "review_cost", "review cost", "float", 0.0, 1e9, 0.1, 1.0,
        meaning="cost of sending one sample to a person",
    ),
    ParameterRange(
        "threshold", "threshold", "float", 0.0, 1.0, 0.001, None,
        meaning="accept predictions whose confidence is at least this",
    ),
    ParameterRange(
        "temperature", "temperature", "float", 1e-3, 1e3, 0.01, 1.0, log=True,
        meaning="softmax temperature T (the fitted temperature stays in the same range)",
    ),
    ParameterRange(
        "k", "k", "int", 1, None, 1, 1,
        meaning="top-k: the label counts as found among the k largest logits (at most the number of classes)",
    ),
    ParameterRange(
        "held_out_fraction", "held_out_fraction", "float", 0.0, 1.0, 0.05, 0.5, min_open=True, max_open=True,
        meaning="share of the rows held out to judge a calibration",
    ),
    ParameterRange(
        "n_candidates", "n_candidates", "int", 1, 100_000, 1, 24,
        meaning="doubtful labels listed",
    ),
    ParameterRange(
        "n_pairs", "n_pairs", "int", 1, 1000, 1, 8,
        meaning="largest confusions listed (a true class read as another)",
    ),
    ParameterRange(
        "max_classes", "max_classes", "int", 2, 1000, 1, 30,
        meaning="classes drawn in a confusion matrix (the most frequent ones)",
    ),
    ParameterRange(
        "n_temperatures", "n_temperatures", "int", 2, 1001, 1, 41,
        meaning="points of a temperature sweep",
    ),
    ParameterRange(
        "alpha", "alpha", "float", 0.0, 0.5, 0.001, 0.05, min_open=True,
        meaning="significance level of the class-mix check",
    ),
    ParameterRange(
        "n_draws", "n_draws", "int", 100, 10_000_000, 100, 10_000,
        meaning="Monte Carlo draws for a p-value where expected counts are small",
    ),
)  # fmt: skip

#: Every parameter's range, by name (read-only).
RANGES: Mapping[str, ParameterRange] = MappingProxyType({r.name: r for r in _ALL})


def get_range(name: str) -> ParameterRange:
    """The range of the parameter ``name``.

    Examples
    --------
    >>> get_range("level").interval()
    '(0, 1)'
    """
    try:
        return RANGES[name]
    except KeyError:
        raise ParameterError(f"no parameter named {name!r}; known: {', '.join(sorted(RANGES))}") from None


def check(value: object, name: str, upper: float | None = None, *, context: str = "") -> int | float:
    """Return ``value`` if it lies in the range of parameter ``name``, else raise ParameterError.

    Parameters
    ----------
    value : number
    name : str
        A key of :data:`RANGES`.
    upper : float, optional
        The upper end of a range that depends on the data (``k``: the number of classes).
    context : str
        Appended to the message (``"for 4 classes"``).

    Examples
    --------
    >>> check(3, "k", upper=5)
    3
    >>> check(6, "k", upper=5, context="for 5 classes")
    Traceback (most recent call last):
    ...
    logitscope.errors.ParameterError: k must lie in [1, 5] for 5 classes, got 6
    """
    return get_range(name).check(value, upper, context=context)
