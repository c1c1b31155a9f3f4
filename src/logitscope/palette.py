"""Colours shared by the widgets and the report: one palette of our own.

Chosen to stay apart for the common forms of colour blindness (the hues
follow Okabe and Ito 2008, "Color Universal Design") and to read on a
white page and on JupyterLab's dark theme.
"""

from __future__ import annotations

__all__ = [
    "CLASS_COLORS",
    "INK",
    "MARK",
    "MUTED",
    "OVER",
    "REFERENCE",
    "RIGHT",
    "SELECTED",
    "UNDER",
    "UNLABELLED",
    "WRONG",
]

#: Correct predictions (bluish green) and wrong ones (vermilion).
RIGHT = "#0f8a6d"
WRONG = "#d2581c"
#: Rows without a label.
UNLABELLED = "#8a7fb8"
#: The current selection, drawn over everything else: a purple that reads on a white page and on a dark one
#: (contrast about 5:1 against white and 3.7:1 against JupyterLab's dark background).
SELECTED = "#8f4fd0"
#: Neutral marks (dots, the current-temperature rule): mid-grey, visible on light and dark backgrounds.
MARK = "#5b6776"
#: Over-confident gaps (confidence above accuracy) and under-confident ones.
OVER = "#d2581c"
UNDER = "#2a7ab8"
#: Reference lines (the diagonal of a reliability diagram) and secondary text.
REFERENCE = "#a3acb9"
MUTED = "#5f6b7a"
INK = "#1f2933"
#: Categorical colours, cycled for more classes (Okabe-Ito hues, then muted ones).
CLASS_COLORS = (
    "#0072b2",
    "#e69f00",
    "#009e73",
    "#d55e00",
    "#56b4e9",
    "#cc79a7",
    "#b8a21a",
    "#6b6b6b",
    "#8c564b",
    "#17becf",
)
