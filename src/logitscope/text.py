"""Text shown to people: long names shortened for display (the full text goes in a tooltip)."""

from __future__ import annotations

__all__ = ["shorten"]


def shorten(text: object, max_chars: int = 40) -> str:
    """``text`` as a string of at most ``max_chars`` characters, cut in the middle with an ellipsis.

    Cutting in the middle keeps both ends, which tell similar long names apart
    (``"billing: invoice"`` and ``"billing: refund"``).

    Examples
    --------
    >>> shorten("password reset", 40)
    'password reset'
    >>> shorten("a" * 30 + "XYZ", 10)
    'aaaaa…aXYZ'
    """
    s = str(text)
    if max_chars < 2:
        max_chars = 2
    if len(s) <= max_chars:
        return s
    keep = max_chars - 1
    head = (keep + 1) // 2
    tail = keep - head
    return s[:head] + "…" + (s[-tail:] if tail else "")
