"""shorten(): long user text cut for display, one line, never longer than asked."""

from __future__ import annotations

import unicodedata

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from logitscope.errors import ParameterError
from logitscope.text import ELLIPSIS, shorten


@settings(max_examples=200, deadline=None)
@given(text=st.text(max_size=200), max_chars=st.integers(1, 60), where=st.sampled_from(["end", "middle"]))
def test_shorten_properties(text, max_chars, where):
    out = shorten(text, max_chars, where)
    assert len(out) <= max_chars
    assert not any(unicodedata.category(c) in ("Cc", "Cs") for c in out)  # one printable line
    out.encode("utf-8")  # always writable as UTF-8 (HTML, JSON)
    if len(text) <= max_chars and text.isprintable():
        assert out == text  # what fits is left alone
    if out.endswith(ELLIPSIS) and where == "end" and text.isprintable():
        assert text.startswith(out[:-1])
    if ELLIPSIS in out and where == "middle" and max_chars >= 3 and text.isprintable() and ELLIPSIS not in text:
        head, tail = out.split(ELLIPSIS)
        assert text.startswith(head) and text.endswith(tail)


def test_a_one_megabyte_class_name():
    name = "routing " * 131_072  # 1 MiB
    out = shorten(name, 40)
    assert len(out) == 40 and out.endswith(ELLIPSIS)


def test_line_breaks_and_direction_overrides_become_spaces():
    assert shorten("two\nlines\r\tand a tab", 80) == "two lines  and a tab"
    assert shorten("abc\u202egnp.exe", 80) == "abc gnp.exe"  # U+202E would show the name reversed
    assert shorten("family \U0001f468\u200d\U0001f469", 80) == "family \U0001f468\u200d\U0001f469"  # ZWJ kept


def test_accents_stay_with_their_letter():
    decomposed = "cafe\u0301" * 10  # "e" + combining acute accent (Unicode canonical decomposition)
    for n in range(2, 20):
        kept = shorten(decomposed, n)[:-1]
        assert decomposed.startswith(kept)
        assert not unicodedata.combining(decomposed[len(kept)])  # no accent cut off its letter
    assert shorten(decomposed, 5) == "caf" + ELLIPSIS  # "cafe" would drop the accent of its "e"


@pytest.mark.parametrize(("max_chars", "where"), [(0, "end"), (-3, "end"), (True, "end"), (2.5, "end"), (10, "left")])
def test_bad_parameters(max_chars, where):
    with pytest.raises(ParameterError):
        shorten("billing", max_chars, where)
