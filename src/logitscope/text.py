"""Shortening user text (class names, ids, notes) for display; the full text goes in a tooltip beside it.

Neutral: no HTML and no escaping here (the caller escapes the result, and the full text, where it
reaches HTML).
"""

from __future__ import annotations

import unicodedata
from typing import Literal

from .errors import ParameterError

__all__ = ["ELLIPSIS", "HOVER_LIMIT", "hover", "shorten", "unique_keys"]

#: Most characters of a full text put in a tooltip (a 1 MB name must not fill the page).
HOVER_LIMIT = 2000

#: what stands for the removed part (one character, U+2026)
ELLIPSIS = "\u2026"


def _cut_back(text: str, end: int) -> int:
    """Move a cut at ``end`` left so it does not split a character from its combining marks."""
    while 0 < end < len(text) and unicodedata.combining(text[end]):
        end -= 1
    return end


def _cut_forward(text: str, start: int) -> int:
    """Move a cut at ``start`` right past combining marks that belong to a character before it."""
    while start < len(text) and unicodedata.combining(text[start]):
        start += 1
    return start


#: format characters kept: zero-width joiner and non-joiner (emoji sequences, scripts that need them)
_KEPT_FORMAT = {"\u200c", "\u200d"}


def _visible(c: str) -> str:
    """A control or direction-changing character as a space, a lone surrogate as U+FFFD, anything else as it is."""
    cat = unicodedata.category(c)
    if cat == "Cs":
        return "\ufffd"
    if cat == "Cc" or (cat == "Cf" and c not in _KEPT_FORMAT):
        return " "
    return c


def shorten(text: object, max_chars: int = 40, where: Literal["end", "middle"] = "end") -> str:
    """``text`` as a string of at most ``max_chars`` characters, cut with an ellipsis when longer.

    Line breaks, tabs, other control characters and direction overrides become
    spaces first (a lone surrogate becomes U+FFFD), so the result is one line
    that reads left to right as stored. Text that fits is returned as it is (after that). A cut
    never separates a letter from its combining accents.

    Parameters
    ----------
    text : object
        Any value; ``str(text)`` is shortened.
    max_chars : int, default 40
        The most characters the result has, the ellipsis included; at least 1.
    where : {"end", "middle"}
        Keep the start (class names), or the start and the end (ids such as
        ``card-000000123``, whose end tells them apart).

    Raises
    ------
    ParameterError
        If ``max_chars`` is below 1 or ``where`` is not one of the two choices.

    Examples
    --------
    >>> shorten("password reset and account recovery", 16)
    'password reset \u2026'
    >>> shorten("scan-2024-06-11-000123.png", 15, where="middle")
    'scan-20\u2026123.png'
    >>> shorten("billing", 16)
    'billing'
    """
    if isinstance(max_chars, bool) or not isinstance(max_chars, int) or max_chars < 1:
        raise ParameterError(f"max_chars must be a whole number of at least 1, got {max_chars!r}")
    if where not in ("end", "middle"):
        raise ParameterError(f"where must be 'end' or 'middle', got {where!r}")
    s = "".join(_visible(c) for c in str(text))
    if len(s) <= max_chars:
        return s
    room = max_chars - len(ELLIPSIS)
    if where == "end" or room < 2:
        return s[: _cut_back(s, room)] + ELLIPSIS
    head = _cut_back(s, (room + 1) // 2)
    tail = _cut_forward(s, len(s) - (room - (room + 1) // 2))
    return s[:head] + ELLIPSIS + s[tail:]


def hover(text: object) -> str:
    """The text for a tooltip (``title`` attribute): all of it, up to :data:`HOVER_LIMIT` characters.

    Examples
    --------
    >>> hover("x" * 2500).endswith("… (2,500 characters in all)")
    True
    """
    s = str(text)
    return s if len(s) <= HOVER_LIMIT else s[:HOVER_LIMIT] + f"{ELLIPSIS} ({len(s):,} characters in all)"


def unique_keys(names: list[str]) -> list[str]:
    """The names, made unique for use as plot keys: a repeated name gets zero-width spaces appended.

    It reads the same on screen (an aggregate named like a class, two classes shortened alike).

    Examples
    --------
    >>> [len(k) for k in unique_keys(["other", "billing", "other"])]
    [5, 7, 6]
    """
    seen: set[str] = set()
    out = []
    for name in names:
        key = name
        while key in seen:
            key += "\u200b"
        seen.add(key)
        out.append(key)
    return out
