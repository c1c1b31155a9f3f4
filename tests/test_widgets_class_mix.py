"""ClassMixView: the multinomial test numbers against scipy, selections, escaping, bad input."""

import numpy as np
import pytest
from scipy import stats

from logitscope import ClassNameError, LogitFrame, ParameterError
from logitscope.widgets import SharedState
from logitscope.widgets.class_mix import ClassMixView


@pytest.fixture(scope="module")
def shifted_batch(mailroom):
    # a week of post from a route with many PO boxes: ones and sevens three times as common
    rng = np.random.default_rng(5)
    w = np.where(np.isin(mailroom.labels, [1, 7]), 3.0, 1.0)
    rows = rng.choice(mailroom.n_samples, 600, replace=False, p=w / w.sum())
    return mailroom.subset(rows)


def test_pearson_test_matches_scipy_chisquare(mailroom, shifted_batch):
    batch = shifted_batch.with_labels(None)
    view = ClassMixView(batch, mailroom)
    observed = np.bincount(batch.sample_scores().predicted, minlength=10)
    ref = np.bincount(mailroom.labels, minlength=10) / mailroom.n_samples
    # reference: scipy.stats.chisquare (Pearson's goodness-of-fit test of a multinomial)
    expected = ref * observed.sum()
    sp = stats.chisquare(observed, expected)
    assert view.test.statistic == pytest.approx(sp.statistic, rel=1e-12)
    assert view.test.p_value == pytest.approx(sp.pvalue, rel=1e-9)
    assert view.test.p_value < 1e-6  # the shift is large: 600 draws with ones and sevens tripled
    assert view.estimate is not None and view.estimate_line.visible
    # the EM estimate moves the ones and sevens up from the reference mix (Saerens et al. 2002)
    assert view.estimate.priors[1] > ref[1] and view.estimate.priors[7] > ref[7]


def test_g_statistic_and_label_counts_match_scipy(mailroom, shifted_batch):
    view = ClassMixView(shifted_batch, mailroom, counts="labels", statistic="g")
    observed = np.bincount(shifted_batch.labels, minlength=10)
    ref = np.bincount(mailroom.labels, minlength=10) / mailroom.n_samples
    # reference: scipy.stats.power_divergence with lambda_="log-likelihood" (the G test)
    sp = stats.power_divergence(observed, ref * observed.sum(), lambda_="log-likelihood")
    assert view.test.statistic == pytest.approx(sp.statistic, rel=1e-12)
    assert view.estimate is None and not view.estimate_line.visible  # labelled batch: no estimate needed


def test_bar_click_selects_the_class_rows(mailroom, shifted_batch):
    state = SharedState(shifted_batch.n_samples)
    view = ClassMixView(shifted_batch, mailroom, state)
    view.bars.selected = [7]  # what a click on the "seven" bars sends
    expected = np.flatnonzero(shifted_batch.sample_scores().predicted == 7)
    np.testing.assert_array_equal(state.rows, expected)
    assert state.origin_name == "class mix"
    assert view.bars.selected is None  # ready for the next click


def test_reference_given_as_proportions_and_hostile_names_escaped():
    names = ["<img src=x onerror=alert(1)>", "b & c", "plain"]
    batch = LogitFrame(np.eye(3)[[0, 0, 1, 2]] * 3.0, classes=names)
    view = ClassMixView(batch, [1, 1, 2])
    assert "<img" not in view.readout.value and "&lt;img src=x" in view.readout.value
    assert "b &amp; c" in view.readout.value


def test_bad_input_is_named(mailroom):
    other = LogitFrame(np.zeros((3, 2)), labels=[0, 1, 0])
    with pytest.raises(ClassNameError, match="same classes"):
        ClassMixView(mailroom, other)
    with pytest.raises(ParameterError, match="10 entries"):
        ClassMixView(mailroom, [1, 2])
    with pytest.raises(ParameterError, match="needs labels"):
        ClassMixView(mailroom, mailroom.with_labels(None))
    with pytest.raises(ParameterError, match="labelled batch"):
        ClassMixView(mailroom.with_labels(None), mailroom, counts="labels")
