"""ClassMixView: it renders the frame's class-mix check exactly, its numbers against scipy, linked selections.

The view's ``check`` must be the object ``batch.class_mix_check(reference, ...)`` returns; the
numbers are checked against scipy (``chi2_contingency`` for the two-sample test of homogeneity,
``chisquare`` / ``power_divergence`` for known proportions), the selections against numpy counts.
"""

import numpy as np
import pytest
from scipy import stats

from logitscope import ClassNameError, LabelError, LogitFrame, ParameterError, ShapeError
from logitscope.text import shorten
from logitscope.widgets import SampleGallery, SharedState
from logitscope.widgets.class_mix import ClassMixView


@pytest.fixture(scope="module")
def shifted_batch(mailroom):
    # a week of post from a route with many PO boxes: ones and sevens three times as common
    rng = np.random.default_rng(5)
    w = np.where(np.isin(mailroom.labels, [1, 7]), 3.0, 1.0)
    rows = rng.choice(mailroom.n_samples, 600, replace=False, p=w / w.sum())
    return mailroom.subset(rows)


def _same_check(a, b) -> None:
    """Two ClassMixCheck objects hold the same fields (arrays equal element for element)."""
    da, db = a.to_dict(), b.to_dict()
    assert da.keys() == db.keys()
    for key in da:
        assert da[key] == db[key], key


def test_view_renders_exactly_the_frame_check_against_a_reference_frame(mailroom, shifted_batch):
    batch = shifted_batch.with_labels(None)
    view = ClassMixView(batch, mailroom)
    _same_check(view.check, batch.class_mix_check(mailroom, temperature=view.state.temperature))
    # reference: scipy's chi-square test of homogeneity of the 2 x K table of predicted classes
    a = np.bincount(batch.sample_scores().predicted, minlength=10)
    b = np.bincount(mailroom.sample_scores().predicted, minlength=10)
    sp = stats.chi2_contingency(np.vstack([a, b]), correction=False)
    assert view.check.test == "homogeneity" and view.check.dof == sp.dof == 9
    assert view.check.statistic == pytest.approx(sp.statistic, rel=1e-12)
    assert view.check.p_value == pytest.approx(sp.pvalue, rel=1e-9)
    assert view.check.shifted  # 600 samples with ones and sevens tripled
    # what is drawn is what the check says
    np.testing.assert_allclose(view.bars.y[0], b / b.sum(), rtol=1e-12)
    np.testing.assert_allclose(view.bars.y[1], a / a.sum(), rtol=1e-12)
    # EM priors of the unlabelled batch (Saerens et al. 2002): ones and sevens move up from the reference mix
    ref_mix = np.bincount(mailroom.labels, minlength=10) / mailroom.n_samples
    assert view.check.priors is not None and view.estimate_dots.visible
    np.testing.assert_array_equal(view.estimate_dots.y, view.check.priors)
    assert view.check.priors[1] > ref_mix[1] and view.check.priors[7] > ref_mix[7]
    assert "The mix has moved" in view.readout.value and "homogeneity" in view.readout.value


def test_known_proportions_use_the_goodness_of_fit_test(mailroom, shifted_batch):
    props = np.bincount(mailroom.labels, minlength=10) / mailroom.n_samples
    view = ClassMixView(shifted_batch, props, counts="labels", statistic="g")
    _same_check(view.check, shifted_batch.class_mix_check(props, counts="labels", statistic="g"))
    observed = np.bincount(shifted_batch.labels, minlength=10)
    # reference: scipy.stats.power_divergence with lambda_="log-likelihood" (the G test)
    sp = stats.power_divergence(observed, props * observed.sum(), lambda_="log-likelihood")
    assert view.check.test == "goodness of fit"
    assert view.check.statistic == pytest.approx(sp.statistic, rel=1e-12)
    assert view.check.p_value == pytest.approx(sp.pvalue, rel=1e-9)
    assert view.check.priors is None and not view.estimate_dots.visible  # labelled batch: nothing to estimate
    pearson = ClassMixView(shifted_batch, props, counts="labels")
    assert pearson.check.statistic == pytest.approx(stats.chisquare(observed, props * 600).statistic, rel=1e-12)


def test_the_temperature_moves_only_the_em_estimate(mailroom, shifted_batch):
    batch = shifted_batch.with_labels(None)
    view = ClassMixView(batch, mailroom)
    before = view.check
    view.state.temperature = 2.0
    _same_check(view.check, batch.class_mix_check(mailroom, temperature=2.0))
    assert view.check.statistic == before.statistic  # the predicted classes do not move with T
    assert not np.allclose(view.check.priors, before.priors)


def test_a_bar_click_selects_the_class_rows_and_the_gallery_shows_them(mailroom, shifted_batch):
    state = SharedState(shifted_batch.n_samples)
    view = ClassMixView(shifted_batch, mailroom, state)
    gallery = SampleGallery(shifted_batch, state, page_size=500)
    view.bars.selected = [7]  # what a click on the "seven" bars sends
    expected = np.flatnonzero(shifted_batch.sample_scores().predicted == 7)  # numpy: predicted class 7
    np.testing.assert_array_equal(state.rows, expected)
    assert state.origin_name == "class mix" and view.owns_selection
    assert view.bars.selected == [7]  # the bars stay marked while the selection is the view's
    assert gallery.scope == f"{expected.size} selected (class mix)"
    assert sorted(gallery.page_rows.tolist()) == expected.tolist()
    # a Ctrl-click on the same bars (bqplot sends no selection) clears it; so does the clear button
    view.bars.selected = None
    assert state.rows.size == 0 and view.selected_class is None and view.clear_button.disabled
    view.select_class(1)
    assert not view.clear_button.disabled
    view.clear_button.click()
    assert state.rows.size == 0 and gallery.scope == "all 600 samples"


def test_a_selection_elsewhere_shows_as_class_shares(mailroom, shifted_batch):
    state = SharedState(shifted_batch.n_samples)
    view = ClassMixView(shifted_batch, mailroom, state)
    view.select_class(3)
    rows = np.arange(0, 600, 7)
    state.select(rows, origin="python")
    assert view.selected_class is None and view.bars.selected is None
    counted = np.bincount(shifted_batch.sample_scores().predicted[rows], minlength=10)
    assert view.selection_dots.visible
    np.testing.assert_allclose(view.selection_dots.y, counted / counted.sum(), rtol=1e-12)
    assert f"{rows.size} rows selected from Python" in view.note.value
    state.clear()
    assert not view.selection_dots.visible


def test_hostile_and_long_names_are_escaped_and_cut(mailroom):
    long = "parcel for the " + "north " * 40 + "depot"
    names = ["<img src=x onerror=alert(1)>", "b & c", long]
    batch = LogitFrame(np.eye(3)[[0, 0, 1, 2] * 10] * 3.0, classes=names)
    view = ClassMixView(batch, [0.25, 0.25, 0.5])
    assert "<img" not in view.readout.value and "&lt;img src=x" in view.readout.value
    assert "b &amp; c" in view.readout.value
    ticks = list(view._ax_x.tick_labels.values())
    assert ticks == [shorten(n, 18, where="middle") for n in names] and max(len(t) for t in ticks) <= 18
    view.select_class(2)
    assert f"title='{long}'" in view.note.value and long not in view.note.value.replace(f"title='{long}'", "")


def test_bad_input_is_named(mailroom):
    other = LogitFrame(np.zeros((3, 2)), labels=[0, 1, 0])
    with pytest.raises(ClassNameError, match="same classes"):
        ClassMixView(mailroom, other)
    with pytest.raises(ShapeError, match=r"shape \(10,\)"):
        ClassMixView(mailroom, [0.5, 0.5])
    with pytest.raises(ParameterError, match="sum to 1"):
        ClassMixView(mailroom, [1, 2, 1, 1, 1, 1, 1, 1, 1, 1])
    with pytest.raises(LabelError, match="needs labels"):
        ClassMixView(mailroom.with_labels(None), mailroom, counts="labels")
    with pytest.raises(ParameterError, match=r"alpha must lie in \(0, 0.5\]"):
        ClassMixView(mailroom, mailroom, alpha=0.7)
    with pytest.raises(ParameterError, match="class index"):
        ClassMixView(mailroom, mailroom).select_class(10)
