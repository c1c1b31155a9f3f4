"""How the report writes numbers and long strings: rounding for the eye, exact values for readers, truncation.

Every number is shown rounded and carried exactly in a ``data-value``
attribute (:func:`raw_value`). A long class name, sample id or text is shown
cut to a few dozen characters (:func:`short`), with the full text in a
``title`` attribute for hovering (:func:`hover`, itself capped so that a
pathological megabyte-long name does not bloat the page).
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from ..text import HOVER_LIMIT, hover, shorten

__all__ = ["HOVER_LIMIT", "fmt_value", "hover", "raw_value", "short", "temp_label"]


def short(text: Any, limit: int = 40) -> str:
    """``text`` cut to at most ``limit`` characters (an ellipsis marks the cut); see :func:`logitscope.text.shorten`.

    Examples
    --------
    >>> short("ticket queue for the third floor printers", 16)
    'ticket queue fo…'
    >>> short("seven")
    'seven'
    """
    return shorten(text, max(limit, 2))


def fmt_value(v: Any, digits: int = 4, pct: bool = False) -> str:
    """A number as shown: integers with thousands separators, others with ``digits`` decimals.

    Examples
    --------
    >>> fmt_value(12345), fmt_value(0.123456), fmt_value(0.5, pct=True), fmt_value(float("nan")), fmt_value(None)
    ('12,345', '0.1235', '50.00%', 'n/a', 'n/a')
    """
    if v is None:
        return "n/a"
    if isinstance(v, bool | np.bool_):
        return "yes" if v else "no"
    if isinstance(v, int | np.integer):
        return f"{int(v):,}"
    f = float(v)
    if math.isnan(f):
        return "n/a"
    if math.isinf(f):
        return "∞" if f > 0 else "-∞"
    if pct:
        return f"{100 * f:.{max(digits - 2, 1)}f}%"
    return f"{f:.{digits}f}"


def raw_value(v: Any) -> str:
    """The exact value for a ``data-value`` attribute (``repr`` of a float, so it reads back bit for bit).

    Examples
    --------
    >>> raw_value(0.1), raw_value(np.int64(7)), raw_value(None), raw_value(float("inf"))
    ('0.1', '7', '', 'inf')
    """
    if v is None:
        return ""
    if isinstance(v, bool | np.bool_):
        return "true" if v else "false"
    if isinstance(v, int | np.integer):
        return str(int(v))
    f = float(v)
    if math.isnan(f):
        return "nan"
    if math.isinf(f):
        return "inf" if f > 0 else "-inf"
    return repr(f)


def temp_label(t: float) -> str:
    """``"T = 1.372"``.

    Examples
    --------
    >>> temp_label(1.37241)
    'T = 1.372'
    """
    return f"T = {t:.4g}"
