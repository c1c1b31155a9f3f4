"""A self-contained HTML report for teammates: one file, inline SVG plots, viewable offline.

``logitscope report FILE -o report.html``, :meth:`LogitFrame.report` and the
"write report" button of the calibration panel all call :func:`write_report`.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from typing import TYPE_CHECKING

from .._atomic import atomic_write
from ..analysis.split import Split
from ..errors import InputTypeError
from .html import IntervalMethod, ReportChoices, build_report, resolve_choices

if TYPE_CHECKING:
    from ..frame import LogitFrame

__all__ = ["ReportChoices", "build_report", "resolve_choices", "write_report"]


def write_report(
    frame: LogitFrame,
    path: str | os.PathLike[str],
    temperature: float | None = None,
    fit_temperature: bool = False,
    target_accuracy: float | None = None,
    costs: Sequence[float] | None = None,
    title: str | None = None,
    *,
    threshold: float | None = None,
    use_lower_bound: bool = False,
    interval: IntervalMethod = "wilson",
    level: float = 0.95,
    n_bins: int = 15,
    strategy: str = "uniform",
    split: Split | None = None,
    temperature_how: str | None = None,
) -> None:
    """Write one self-contained HTML report about ``frame`` to ``path`` (atomically).

    The report holds the summary table, the reliability diagram before and
    after temperature scaling, the temperature sweep, the accuracy-coverage
    curve with the chosen threshold and its readouts (overall and by
    predicted class), a held-out check of the temperature and threshold,
    the most confused pairs, the top candidates for relabelling and the
    caution about thresholds. A frame without labels gets what needs no
    labels and a list of what does.

    Parameters
    ----------
    frame : LogitFrame
    path : str or path-like
        Output file; written through a temporary file and renamed, so a
        reader never sees half a report.
    temperature : float, optional
        Decision temperature (default: the frame's own).
    fit_temperature : bool
        Use the temperature that minimises the NLL (needs labels).
    target_accuracy : float, optional
        Choose the lowest confidence threshold whose accepted predictions reach this accuracy.
    costs : (error_cost, review_cost), optional
        Choose the threshold with the least expected cost instead.
    title : str, optional
        Page title (escaped).
    threshold : float, optional
        A fixed confidence threshold instead of a rule.
    use_lower_bound : bool
        With ``target_accuracy``: require the interval's lower bound to reach the target.
    interval : {"wilson", "clopper-pearson"}
        Binomial confidence interval for the accuracy of accepted predictions.
    level : float
        Confidence level of the interval.
    n_bins : int
        Bins of the reliability diagram and ECE.
    strategy : {"uniform", "quantile"}
        Equal-width or equal-mass bins.
    split : Split, optional
        Fit/held-out rows for the held-out check (default: a stratified random half split, seed 0).
    temperature_how : str, optional
        How the temperature was chosen, in words for the page (escaped); default from the options.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from logitscope import load_demo
    >>> out = pathlib.Path(tempfile.mkdtemp()) / "report.html"
    >>> write_report(load_demo("helpdesk"), out, fit_temperature=True, target_accuracy=0.95)
    >>> "Review threshold" in out.read_text()
    True
    """
    from ..frame import LogitFrame

    if not isinstance(frame, LogitFrame):
        raise InputTypeError(f"write_report needs a LogitFrame, got {type(frame).__name__}")
    if split is not None and not isinstance(split, Split):
        raise InputTypeError(f"split must be a logitscope.analysis.split.Split, got {type(split).__name__}")
    choices = resolve_choices(
        frame,
        temperature=temperature,
        fit_temperature=fit_temperature,
        target_accuracy=target_accuracy,
        costs=costs,
        threshold=threshold,
        use_lower_bound=use_lower_bound,
        interval=interval,
        level=level,
        n_bins=n_bins,
        strategy=strategy,  # type: ignore[arg-type]
        temperature_how=temperature_how,
    )
    page = build_report(frame, choices, title=title, split=split)
    with atomic_write(path, "w") as fh:
        fh.write(page)
