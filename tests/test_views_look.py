"""What the views show, checked without a browser: contrast of the palette, scores offered for frames of
probabilities, long names cut with the full text kept, count labels that never overlap.

Contrast follows the published WCAG 2.1 definitions (relative luminance and contrast ratio, W3C
Recommendation 2018, Success Criterion 1.4.11: 3:1 for graphical objects). The dark page is
JupyterLab's dark theme background #111111 (from memory: ``--jp-layout-color0`` of the dark theme).
"""

from __future__ import annotations

import numpy as np
import pytest

from logitscope import LogitFrame
from logitscope.palette import MARK, RIGHT, SELECTED, WRONG
from logitscope.text import shorten
from logitscope.widgets import SampleCard, SampleGallery, ScoreScatter
from logitscope.widgets.gate import ShownWhenVisible
from logitscope.widgets.reliability import count_labels
from logitscope.widgets.scatter import FADED

WHITE, DARK = (255, 255, 255), (17, 17, 17)


def _rgb(color: str) -> tuple[int, int, int]:
    h = color.lstrip("#")
    return int(h[0:2], 16), int(h[2:4], 16), int(h[4:6], 16)


def _luminance(rgb: tuple[float, float, float]) -> float:
    """WCAG 2.1 relative luminance of an sRGB colour (0..255 channels)."""

    def lin(c: float) -> float:
        c /= 255.0
        return c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4

    r, g, b = (lin(c) for c in rgb)
    return 0.2126 * r + 0.7152 * g + 0.0722 * b


def _contrast(a: tuple[float, float, float], b: tuple[float, float, float]) -> float:
    """WCAG 2.1 contrast ratio (L1 + 0.05) / (L2 + 0.05)."""
    la, lb = sorted((_luminance(a), _luminance(b)), reverse=True)
    return (la + 0.05) / (lb + 0.05)


def _over(color: tuple[int, int, int], alpha: float, page: tuple[int, int, int]) -> tuple[float, float, float]:
    """``color`` at ``alpha`` composited over ``page`` (the "over" operator, Porter and Duff 1984)."""
    return tuple(alpha * c + (1 - alpha) * p for c, p in zip(color, page, strict=True))  # type: ignore[return-value]


def test_wcag_contrast_of_the_reference_values():
    # worked values of the definition: black on white is 21:1, a colour on itself 1:1
    assert _contrast((0, 0, 0), WHITE) == pytest.approx(21.0)
    assert _contrast((118, 118, 118), WHITE) == pytest.approx(4.54, abs=0.01)  # #767676, WCAG's 4.5:1 grey


@pytest.mark.parametrize("name, color", [("right", RIGHT), ("wrong", WRONG), ("selected", SELECTED), ("mark", MARK)])
def test_marks_keep_three_to_one_on_white_and_on_the_dark_theme(name, color):
    for page in (WHITE, DARK):
        assert _contrast(_rgb(color), page) >= 3.0, (name, page)


def test_scatter_points_stay_visible_selected_and_faded(mailroom):
    view = ScoreScatter(mailroom)
    # one isolated point's opacity in the painted image: 1 - exp(-1 / depth) (PointRaster's rule)
    alpha = 1.0 - np.exp(-1.0 / view._depth)
    for page in (WHITE, DARK):
        for color in (RIGHT, WRONG):
            full = _contrast(_over(_rgb(color), alpha, page), page)
            faded = _contrast(_over(_rgb(color), alpha * FADED, page), page)
            # our own rule: a lone point reads clearly (2.5:1), a faded one still shows (1.4:1)
            assert full >= 2.5 and faded >= 1.4, (color, page, full, faded)


def test_frames_of_probabilities_offer_no_energy(mailroom):
    probs = LogitFrame.from_probabilities(mailroom.probabilities(), labels=mailroom.labels, classes=mailroom.classes)
    card = SampleCard(probs)
    card.state.focus = 3
    shown = [name for name, _ in card.sample["scores"]]
    assert "energy" not in shown and "confidence" in shown
    gallery = SampleGallery(probs)
    assert "energy" not in gallery.sort_columns and "confidence" in gallery.sort_columns
    assert "energy" not in ScoreScatter(probs).scores_offered
    # a frame of logits keeps it: there the free energy is -T log sum exp(z / T) (scipy's logsumexp)
    from scipy.special import logsumexp

    card = SampleCard(mailroom)
    card.state.focus = 3
    energy = dict(card.sample["scores"])["energy"]
    assert energy == pytest.approx(-logsumexp(np.asarray(mailroom.logits[3], dtype=np.float64)), rel=1e-9)
    assert "energy" in SampleGallery(mailroom).sort_columns


def test_count_labels_never_overlap_and_keep_what_fits():
    rng = np.random.default_rng(3)
    for _ in range(200):
        n = int(rng.integers(1, 40))
        edges = np.sort(np.r_[0.0, rng.uniform(0, 1, n - 1), 1.0])
        counts = rng.integers(0, 100_000, n)
        lo, hi = edges[:-1], edges[1:]
        texts = count_labels(lo, hi, counts, width_px=264.0)
        kept = [(((a + b) / 2) * 264.0, (5.6 * len(t) + 4) / 2) for a, b, t in zip(lo, hi, texts, strict=True) if t]
        # brute force over every pair of kept labels: their extents are disjoint
        for i in range(len(kept)):
            for j in range(i + 1, len(kept)):
                (ci, hi_), (cj, hj) = kept[i], kept[j]
                assert abs(ci - cj) >= hi_ + hj - 1e-9
        assert texts[0] == f"{int(counts[0]):,}"  # the first always fits
        assert all(t in ("", f"{int(c):,}") for t, c in zip(texts, counts, strict=True))
    # wide bins all get their numbers
    assert count_labels(np.arange(10) / 10, np.arange(1, 11) / 10, np.full(10, 737)) == ["737"] * 10


def test_long_names_are_cut_in_the_middle_with_both_ends_kept():
    name = "billing: invoice " + "x" * 200 + " refund"
    short = shorten(name, 24, where="middle")  # class names keep both ends: they tell similar names apart
    assert len(short) == 24 and short.startswith("billing: inv") and short.endswith("refund") and "…" in short


def test_the_gate_holds_its_child_for_widget_walkers():
    import ipywidgets as widgets

    inner = widgets.VBox([widgets.Label("x")])
    gate = ShownWhenVisible(inner)
    assert gate.children == (inner,) and gate.child is inner and gate.shown is False
    # the browser reads the child by reference, as any container's children
    assert gate.get_state()["child"] == f"IPY_MODEL_{inner.model_id}"
