"""Partly labelled batches: rows without a label are kept, shown, and left out of every number that needs labels.

Each label-based number of a partly labelled frame is checked against the same reference computed
on the labelled rows alone: scikit-learn (accuracy_score, log_loss, brier_score_loss,
confusion_matrix), torchmetrics (multiclass_calibration_error), scipy (special.softmax,
optimize.minimize_scalar), brute force over the distinct confidences for thresholds.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import optimize, special
from sklearn.metrics import accuracy_score, brier_score_loss, log_loss
from sklearn.metrics import confusion_matrix as sk_confusion_matrix

import logitscope
from logitscope import LabelError, LogitFrame
from logitscope.findings import ThresholdRule, calibration_summary, confusion_summary, threshold_decision
from test_report import read_report

pytestmark = pytest.mark.filterwarnings("ignore::DeprecationWarning")


@pytest.fixture(scope="module")
def partial(mailroom: LogitFrame) -> LogitFrame:
    """The mail-room frame with 60 % of the labels taken away (a production batch half reviewed)."""
    y = np.array(mailroom.labels, copy=True)
    y[np.random.default_rng(3).random(y.size) < 0.6] = -1
    return mailroom.with_labels(y)


@pytest.fixture(scope="module")
def labelled_only(mailroom: LogitFrame, partial: LogitFrame) -> LogitFrame:
    return mailroom.subset(np.flatnonzero(partial.labelled))


# --------------------------------------------------------------------------- the data layer


@pytest.mark.parametrize(
    "labels",
    [
        [0, -1, 2, 1, -1],
        [0, None, 2, 1, None],
        [0.0, np.nan, 2.0, 1.0, np.nan],
        np.ma.masked_array([0, 7, 2, 1, 7], mask=[0, 1, 0, 0, 1]),
        pd.Series([0, None, 2, 1, None], dtype="Int64"),
        ["stamp", None, "parcel", "letter", None],
    ],
)
def test_missing_labels_in_every_documented_form(labels: object) -> None:
    z = np.random.default_rng(0).normal(size=(5, 3))
    f = LogitFrame(z, labels=labels, classes=["stamp", "letter", "parcel"])
    assert f.labels.tolist() == [0, -1, 2, 1, -1]
    assert f.n_labelled == 3 and not f.fully_labelled and f.has_labels
    assert f.labelled.tolist() == [True, False, True, True, False]
    s = f.sample_scores()
    assert np.isnan(s.true_probability[[1, 4]]).all() and s.true_rank[1] == -1 and not s.correct[[1, 4]].any()
    p = special.softmax(z, axis=1)  # scipy softmax
    assert s.true_probability[2] == pytest.approx(p[2, 2])


def test_bad_labels_still_fail_naming_the_rows() -> None:
    z = np.zeros((4, 3))
    with pytest.raises(LabelError, match=r"at row 2 \(values \[-2\]\)"):
        LogitFrame(z, labels=[0, -1, -2, 1])
    with pytest.raises(LabelError, match="whole numbers"):
        LogitFrame(z, labels=[0.0, np.nan, 1.5, 1.0])
    assert not LogitFrame(z, labels=[None] * 4).has_labels  # no label at all: an unlabelled frame


def test_files_keep_the_unlabelled_rows(partial: LogitFrame, tmp_path: Path) -> None:
    plain = partial.with_payload()  # Parquet stores no image arrays
    for name in ("p.npz", "p.parquet"):
        plain.write(tmp_path / name)
        back = LogitFrame.read(tmp_path / name)
        assert np.array_equal(back.labels, plain.labels) and back.n_labelled == partial.n_labelled


# --------------------------------------------------------------------------- numbers of the labelled rows


def test_summary_uses_the_labelled_rows_and_says_how_many(partial: LogitFrame, labelled_only: LogitFrame) -> None:
    torch = pytest.importorskip("torch")
    tm = pytest.importorskip("torchmetrics.functional.classification")
    s = partial.summary()
    y = labelled_only.labels
    p = special.softmax(np.asarray(labelled_only.logits, dtype=np.float64), axis=1)
    assert s["n_labelled"] == y.size and s["n_samples"] == partial.n_samples
    assert s["accuracy"] == pytest.approx(accuracy_score(y, p.argmax(1)))  # sklearn
    assert s["nll"] == pytest.approx(log_loss(y, p), rel=1e-9)  # sklearn
    assert s["brier"] == pytest.approx(brier_score_loss(y, p, labels=range(10)), rel=1e-9)  # sklearn
    ece = tm.multiclass_calibration_error(torch.from_numpy(p), torch.from_numpy(y), 10, n_bins=15)
    assert s["ece"] == pytest.approx(float(ece), abs=1e-6)  # torchmetrics
    # what needs no labels covers every row
    p_all = special.softmax(np.asarray(partial.logits, dtype=np.float64), axis=1)
    assert s["mean_confidence"] == pytest.approx(p_all.max(1).mean())
    c = calibration_summary(partial)
    assert c.n == y.size and c.n_unlabelled == partial.n_samples - y.size


def test_temperature_threshold_and_confusion_use_the_labelled_rows(
    partial: LogitFrame, labelled_only: LogitFrame
) -> None:
    z, y = np.asarray(labelled_only.logits, dtype=np.float64), labelled_only.labels
    res = optimize.minimize_scalar(  # scipy.optimize on sklearn's log_loss, labelled rows only
        lambda lt: log_loss(y, special.softmax(z / math.exp(lt), axis=1), labels=range(10)),
        bounds=(-5, 5),
        method="bounded",
        options={"xatol": 1e-9},
    )
    assert partial.fit_temperature().temperature == pytest.approx(math.exp(res.x), rel=1e-5)
    d = threshold_decision(partial, ThresholdRule("accuracy", target_accuracy=0.97))
    p = special.softmax(z, axis=1)
    conf, ok = p.max(1), p.argmax(1) == y
    t = min(c for c in np.unique(conf) if ok[conf >= c].mean() >= 0.97)  # brute force
    assert d.threshold == pytest.approx(t, rel=1e-12) and d.choice.n_total == y.size
    c = confusion_summary(partial)
    assert np.array_equal(c.matrix, sk_confusion_matrix(y, p.argmax(1), labels=range(10)))  # sklearn


def test_cli_json_reports_n_labelled(partial: LogitFrame, tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    from logitscope import cli

    partial.write(tmp_path / "batch.npz")
    assert cli.main(["summary", str(tmp_path / "batch.npz"), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["n_labelled"] == partial.n_labelled and out["n_samples"] == partial.n_samples


def test_report_says_how_many_rows_are_labelled(partial: LogitFrame, labelled_only: LogitFrame, tmp_path: Path) -> None:
    partial.report(tmp_path / "r.html", target_accuracy=0.97)
    page = read_report(tmp_path / "r.html")
    assert page.value("n-labelled") == partial.n_labelled and page.value("n-samples") == partial.n_samples
    p = special.softmax(np.asarray(labelled_only.logits, dtype=np.float64), axis=1)
    assert page.value("summary-nll-before") == pytest.approx(log_loss(labelled_only.labels, p), rel=1e-9)  # sklearn


def test_class_mix_uses_the_unlabelled_rows_for_the_prior_estimate(mailroom: LogitFrame, partial: LogitFrame) -> None:
    check = partial.class_mix_check(mailroom)
    unlabelled = np.flatnonzero(~partial.labelled)
    ref = np.bincount(mailroom.labels, minlength=10)
    direct = logitscope.analysis.estimate_priors(partial.logits[unlabelled], ref / ref.sum())  # the same EM, alone
    assert check.priors is not None and np.allclose(check.priors, direct.priors)


def test_checkpoints_compare_the_labelled_samples(partial: LogitFrame) -> None:
    from logitscope.checkpoints import compare_frames

    later = LogitFrame(np.asarray(partial.logits) * 1.5 + 0.2 * np.eye(10)[np.arange(partial.n_samples) % 10],
                       labels=partial.labels, ids=partial.ids, classes=partial.classes)  # fmt: skip
    c = compare_frames(partial, later)
    keep = partial.labelled
    y = partial.labels[keep]
    ra = np.asarray(partial.logits)[keep].argmax(1) == y  # per-sample loop over the labelled rows
    rb = np.asarray(later.logits)[keep].argmax(1) == y
    assert c.flips.count("fixed") == int((~ra & rb).sum()) and c.flips.count("broken") == int((ra & ~rb).sum())
    assert c.a.n_samples == int(keep.sum())


# --------------------------------------------------------------------------- views


def test_views_show_every_row_and_count_only_the_labelled(partial: LogitFrame, tmp_path: Path) -> None:
    from logitscope.widgets import Dashboard

    dash = Dashboard(partial, relabel_path=tmp_path / "m.json")
    n_un = partial.n_samples - partial.n_labelled
    # histogram: correct, wrong and "no label" series (numpy.histogram of each group's confidence)
    counts = dash.histogram.counts()
    assert counts.shape[0] == 3 and counts[2].sum() == n_un and counts.sum() == partial.n_samples
    conf = special.softmax(np.asarray(partial.logits, dtype=np.float64), axis=1).max(1)
    ref = np.histogram(conf[~partial.labelled], bins=dash.histogram.edges)[0]
    assert counts[2].tolist() == ref.tolist()
    # scatter: unlabelled rows are their own colour group, named in the key
    assert "no label" in dash.scatter._key.value
    # confusion matrix: labelled rows only
    assert dash.confusion.counts.sum() == partial.n_labelled
    # calibration views: labelled rows only
    assert dash.calibration.diagram.finding.n == partial.n_labelled
    # the relabel list gives an unlabelled sample its first label
    row = int(np.flatnonzero(~partial.labelled)[0])
    dash.queue.mark([row], suggested="three", note="first label")
    mark = dash.queue.marks.iloc[0]
    assert mark["given_label"] is None and mark["suggested_label"] == "three"
    # the gallery shows unlabelled tiles without a label
    dash.selected = [row]
    tile = dash.gallery.tiles[0]
    assert tile["label"] is None and tile["correct"] is None
