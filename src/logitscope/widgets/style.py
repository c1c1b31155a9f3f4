"""What the views share for their looks: the palette, the score menus, and CSS loaded from files.

Stylesheets live in ``widgets/styles/*.css``; :func:`css` wraps one in a
``<style>`` element for an ``ipywidgets.HTML`` value.
"""

from __future__ import annotations

from functools import cache
from importlib import resources

import ipywidgets as widgets

from ..palette import CLASS_COLORS, INK, MARK, MUTED, OVER, REFERENCE, RIGHT, SELECTED, UNDER, UNLABELLED, WRONG

__all__ = [
    "CLASS_COLORS",
    "ENERGY",
    "INK",
    "LABEL_SCORES",
    "MARK",
    "MUTED",
    "OVER",
    "REFERENCE",
    "RIGHT",
    "SCORE_MENU",
    "SCORE_NAMES",
    "SELECTED",
    "UNDER",
    "UNLABELLED",
    "WRONG",
    "css",
    "figure_layout",
    "score_menu",
    "score_options",
]

#: Per-sample scores offered as axes, in menu order (label-dependent ones need labels).
SCORE_MENU = (
    "confidence",
    "entropy",
    "margin",
    "logit_margin",
    "energy",
    "true_probability",
    "true_log_probability",
    "true_rank",
    "brier",
)
#: How menus and axes name each score.
SCORE_NAMES = {
    "confidence": "confidence",
    "entropy": "entropy",
    "margin": "margin",
    "logit_margin": "logit margin",
    "energy": "energy",
    "true_probability": "label probability",
    "true_log_probability": "label log-probability",
    "true_rank": "label rank",
    "brier": "Brier score",
}
#: The scores that need labels.
LABEL_SCORES = frozenset({"true_probability", "true_log_probability", "true_rank", "brier"})
#: The score that means nothing for a frame built from probabilities (its free energy is 0).
ENERGY = "energy"


def score_options(scores: tuple[str, ...]) -> list[tuple[str, str]]:
    """``(name shown, score)`` pairs for a menu of ``scores``.

    Examples
    --------
    >>> score_options(("confidence", "true_probability"))
    [('confidence', 'confidence'), ('label probability', 'true_probability')]
    """
    return [(SCORE_NAMES.get(s, s.replace("_", " ")), s) for s in scores]


def score_menu(has_labels: bool, source: str = "logits") -> tuple[str, ...]:
    """The scores a view offers for a frame: label-free ones without labels, no energy for probabilities.

    Examples
    --------
    >>> score_menu(False)[:3]
    ('confidence', 'entropy', 'margin')
    >>> "energy" in score_menu(True, "probabilities")
    False
    """
    return tuple(
        s
        for s in SCORE_MENU
        if (has_labels or s not in LABEL_SCORES) and not (s == ENERGY and source == "probabilities")
    )


@cache
def _stylesheet(name: str) -> str:
    return resources.files(__package__).joinpath("styles", f"{name}.css").read_text(encoding="utf-8")


def css(name: str) -> str:
    """The stylesheet ``widgets/styles/<name>.css`` as a ``<style>`` element.

    Examples
    --------
    >>> css("views").startswith("<style>")
    True
    """
    return f"<style>{_stylesheet(name)}</style>"


def figure_layout(width: str, height: str, min_width: str | None = None) -> widgets.Layout:
    """The layout of a bqplot figure: its size with matching minimum sizes, so it never shrinks to nothing.

    A figure whose box is 0 wide at a draw (a flex row collapsing while its
    notebook tab is shown again, say) draws its plot area at a negative size
    and fills the browser console with errors; a minimum size keeps the box.
    A fixed ``width`` in pixels also keeps the figure from shrinking in a flex
    row; ``"100%"`` fills the row down to ``min_width``.

    Examples
    --------
    >>> figure_layout("300px", "240px").min_width, figure_layout("100%", "360px", "320px").min_width
    ('300px', '320px')
    """
    fixed = width.endswith("px")
    return widgets.Layout(
        width=width,
        height=height,
        min_width=width if fixed and min_width is None else (min_width or "240px"),
        min_height=height,
        flex="0 0 auto" if fixed else "1 1 auto",
    )
