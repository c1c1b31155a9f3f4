"""What the views share for their looks: the palette, the score menus, and CSS loaded from files.

Stylesheets live in ``widgets/styles/*.css``; :func:`css` wraps one in a
``<style>`` element for an ``ipywidgets.HTML`` value.
"""

from __future__ import annotations

from functools import cache
from importlib import resources

from ..palette import CLASS_COLORS, INK, MUTED, OVER, REFERENCE, RIGHT, SELECTED, UNDER, UNLABELLED, WRONG

__all__ = [
    "CLASS_COLORS",
    "ENERGY",
    "INK",
    "LABEL_SCORES",
    "MUTED",
    "OVER",
    "REFERENCE",
    "RIGHT",
    "SCORE_MENU",
    "SELECTED",
    "UNDER",
    "UNLABELLED",
    "WRONG",
    "css",
    "score_menu",
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
#: The scores that need labels.
LABEL_SCORES = frozenset({"true_probability", "true_log_probability", "true_rank", "brier"})
#: The score that means nothing for a frame built from probabilities (its free energy is 0).
ENERGY = "energy"


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
