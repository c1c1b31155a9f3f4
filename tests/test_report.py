"""The HTML report: every number read back from the page and checked against an outside reference.

References, named beside each check: scikit-learn (accuracy_score, log_loss, brier_score_loss,
top_k_accuracy_score, confusion_matrix), torchmetrics (multiclass_calibration_error), scipy
(special.softmax, stats.entropy, stats.binomtest(...).proportion_ci, optimize.minimize_scalar),
pandas (cut / groupby for the reliability bins), numpy.histogram, the CSP Level 2 hash-source
definition (hashlib), and a hand-worked example for the threshold rules. One test checks that every
number on the page is the value of the finding it renders (the report computes none itself).
"""

from __future__ import annotations

import base64
import hashlib
import math
import os
import re
import stat
from html.parser import HTMLParser
from pathlib import Path
from typing import ClassVar

import numpy as np
import pandas as pd
import pytest
from scipy import optimize, special, stats
from sklearn.metrics import (
    accuracy_score,
    brier_score_loss,
    confusion_matrix,
    log_loss,
    top_k_accuracy_score,
)

import logitscope
from logitscope import LabelError, LogitFrame, ParameterError
from logitscope.analysis import CAUTION
from logitscope.analysis.split import hash_split, random_split
from logitscope.findings import Findings, collect, resolve_choices
from logitscope.relabel_store import RelabelStore
from logitscope.report import write_report

# --------------------------------------------------------------------------- reading the page back


class Page(HTMLParser):
    """Collects every element: tag, attributes, text inside it (unescaped by the parser)."""

    def __init__(self, text: str) -> None:
        super().__init__(convert_charrefs=True)
        self.elements: list[dict] = []
        self._open: list[dict] = []
        self.feed(text)
        ids = [e["attrs"]["id"] for e in self.elements if "id" in e["attrs"]]
        self.duplicate_ids = sorted({i for i in ids if ids.count(i) > 1})
        self.by_id = {e["attrs"]["id"]: e for e in self.elements if "id" in e["attrs"]}

    _VOID: ClassVar[set[str]] = {"meta", "br", "img", "input", "link", "hr", "col", "area", "base", "wbr", "source"}

    def handle_starttag(self, tag: str, attrs: list) -> None:
        el = {"tag": tag, "attrs": dict(attrs), "text": "", "within": [e["attrs"].get("id") for e in self._open]}
        self.elements.append(el)
        if tag not in self._VOID:
            self._open.append(el)

    def handle_startendtag(self, tag: str, attrs: list) -> None:
        within = [e["attrs"].get("id") for e in self._open]
        self.elements.append({"tag": tag, "attrs": dict(attrs), "text": "", "within": within})

    def handle_endtag(self, tag: str) -> None:
        for i in range(len(self._open) - 1, -1, -1):
            if self._open[i]["tag"] == tag:
                del self._open[i:]
                break

    def handle_data(self, data: str) -> None:
        for el in self._open:
            el["text"] += data

    def value(self, id: str) -> float:
        raw = self.by_id[id]["attrs"]["data-value"]
        return float(raw)

    def text(self, id: str) -> str:
        return self.by_id[id]["text"].strip()

    def ids(self, prefix: str) -> list[str]:
        return [i for i in self.by_id if i.startswith(prefix)]

    def inside(self, id: str, tag: str) -> list[dict]:
        """Elements of ``tag`` within the element ``id``, in page order."""
        return [e for e in self.elements if e["tag"] == tag and id in e["within"]]


def read_report(path: Path) -> Page:
    return Page(path.read_text(encoding="utf-8"))


# --------------------------------------------------------------------------- references


def _probs(frame: LogitFrame, t: float) -> np.ndarray:
    # scipy.special.softmax in float64 is the reference for probabilities
    return special.softmax(np.asarray(frame.logits, dtype=np.float64) / t, axis=1)


def _scipy_fitted_temperature(z: np.ndarray, y: np.ndarray) -> float:
    # scipy.optimize on log T of sklearn's log_loss: the reference temperature fit
    k = z.shape[1]

    def loss(log_t: float) -> float:
        return log_loss(y, special.softmax(z / math.exp(log_t), axis=1), labels=range(k))

    res = optimize.minimize_scalar(loss, bounds=(-5, 5), method="bounded", options={"xatol": 1e-9})
    return math.exp(res.x)


def _pandas_bins(conf: np.ndarray, ok: np.ndarray, n_bins: int = 15) -> pd.DataFrame:
    # Guo et al. (2017) equal-width bins (b/B, (b+1)/B]: pandas.cut with right-closed intervals
    cut = pd.cut(conf, np.linspace(0, 1, n_bins + 1), include_lowest=True, labels=False)
    df = pd.DataFrame({"bin": cut, "conf": conf, "ok": ok.astype(float)})
    return df.groupby("bin").agg(count=("ok", "size"), accuracy=("ok", "mean"), confidence=("conf", "mean"))


def _pandas_ece(conf: np.ndarray, ok: np.ndarray, n_bins: int = 15) -> float:
    b = _pandas_bins(conf, ok, n_bins)
    return float(np.sum(b["count"] / conf.size * np.abs(b["accuracy"] - b["confidence"])))


def _torchmetrics_ce(probs: np.ndarray, y: np.ndarray, norm: str) -> float:
    torch = pytest.importorskip("torch")
    tm = pytest.importorskip("torchmetrics.functional.classification")
    # torchmetrics bins confidences in float32 and gives exactly 1.0 a bin of its own: only comparable
    # when no confidence rounds to 1.0 (checked by the caller)
    value = tm.multiclass_calibration_error(
        torch.from_numpy(probs), torch.from_numpy(np.array(y)), num_classes=probs.shape[1], n_bins=15, norm=norm
    )
    return float(value)


def _wilson(k: int, n: int, level: float = 0.95) -> tuple[float, float]:
    # scipy.stats.binomtest(...).proportion_ci(method="wilson") is the reference Wilson score interval
    ci = stats.binomtest(k, n).proportion_ci(confidence_level=level, method="wilson")
    return ci.low, ci.high


def _clopper_pearson(k: int, n: int, level: float = 0.95) -> tuple[float, float]:
    # scipy's "exact" interval is Clopper-Pearson
    ci = stats.binomtest(k, n).proportion_ci(confidence_level=level, method="exact")
    return ci.low, ci.high


# --------------------------------------------------------------------------- fixtures


@pytest.fixture(scope="module")
def mailroom_page(mailroom: LogitFrame, tmp_path_factory: pytest.TempPathFactory) -> Page:
    path = tmp_path_factory.mktemp("report") / "mailroom.html"
    write_report(mailroom, path, **MAILROOM_OPTIONS, title="Mail room, week 12")
    return read_report(path)


MAILROOM_OPTIONS = {"fit_temperature": True, "target_accuracy": 0.98, "per_class": True}


# --------------------------------------------------------------------------- every number


def test_fitted_temperature_matches_scipy(mailroom: LogitFrame, mailroom_page: Page) -> None:
    z, y = np.asarray(mailroom.logits, dtype=np.float64), mailroom.labels
    t_ref = _scipy_fitted_temperature(z, y)
    assert mailroom_page.value("fitted-temperature") == pytest.approx(t_ref, rel=1e-5)
    assert mailroom_page.value("decision-temperature") == pytest.approx(t_ref, rel=1e-5)
    assert mailroom_page.text("decision-how") == "fitted: minimum NLL on all labelled rows"


def test_summary_table_matches_sklearn_and_scipy(mailroom: LogitFrame, mailroom_page: Page) -> None:
    y, k = mailroom.labels, mailroom.n_classes
    t_after = mailroom_page.value("decision-temperature")
    assert mailroom_page.value("n-samples") == mailroom.n_samples
    assert mailroom_page.value("n-classes") == k
    for which, t in (("before", 1.0), ("after", t_after)):
        p = _probs(mailroom, t)
        v = lambda key, w=which: mailroom_page.value(f"summary-{key}-{w}")  # noqa: E731
        assert v("accuracy") == pytest.approx(accuracy_score(y, p.argmax(axis=1)), abs=1e-12)  # sklearn
        assert v("nll") == pytest.approx(log_loss(y, p, labels=range(k)), rel=1e-7)  # sklearn log_loss
        # sklearn's multiclass Brier score (sum over classes, range [0, 2])
        assert v("brier") == pytest.approx(brier_score_loss(y, p, labels=range(k)), rel=1e-7)
        for kk in (2, 3, 5):  # sklearn top_k_accuracy_score
            assert v(f"top_k_accuracy-{kk}") == pytest.approx(top_k_accuracy_score(y, p, k=kk, labels=range(k)))
        assert np.all(p.max(axis=1).astype(np.float32) < 1.0)  # torchmetrics comparable (see _torchmetrics_ce)
        assert v("ece") == pytest.approx(_torchmetrics_ce(p, y, "l1"), abs=1e-5)  # torchmetrics, norm="l1"
        assert v("mce") == pytest.approx(_torchmetrics_ce(p, y, "max"), abs=1e-5)  # torchmetrics, norm="max"
        assert v("mean_confidence") == pytest.approx(p.max(axis=1).mean(), rel=1e-9)
        assert v("mean_entropy") == pytest.approx(stats.entropy(p, axis=1).mean(), rel=1e-7)  # scipy entropy
        # AURC by its published definition (Geifman, Uziel and El-Yaniv 2019): mean over n of errors(n) / n,
        # samples by confidence descending, errors first among ties
        conf, ok = p.max(axis=1), p.argmax(axis=1) == y
        order = np.lexsort((ok, -conf))
        ref = np.mean(np.cumsum(~ok[order]) / np.arange(1, y.size + 1))
        assert v("aurc") == pytest.approx(ref, rel=1e-6)


def test_reliability_bins_match_pandas_and_numbers_match_torchmetrics(
    mailroom: LogitFrame, mailroom_page: Page
) -> None:
    y = mailroom.labels
    for key, t in (("before", 1.0), ("after", mailroom_page.value("decision-temperature"))):
        p = _probs(mailroom, t)
        conf, ok = p.max(axis=1), p.argmax(axis=1) == y
        ref = _pandas_bins(conf, ok)  # pandas.cut, right-closed bins
        shown = mailroom_page.ids(f"bin-{key}-")
        assert len(shown) == len(ref)  # one bar per non-empty bin
        for b, row in ref.iterrows():
            el = mailroom_page.by_id[f"bin-{key}-{int(b)}"]["attrs"]
            # a bin is named by its confidence range: equal-width edges b/15, (b+1)/15 (Guo et al. 2017)
            assert el["data-range"] == f"{int(b) / 15:.2f}–{(int(b) + 1) / 15:.2f}"
            assert mailroom_page.value(f"bins-{key}-{int(b)}-count") == row["count"]
            assert int(el["data-count"]) == row["count"]
            assert float(el["data-accuracy"]) == pytest.approx(row["accuracy"], abs=1e-12)
            assert float(el["data-confidence"]) == pytest.approx(row["confidence"], rel=1e-6)
        assert sum(int(mailroom_page.by_id[i]["attrs"]["data-count"]) for i in shown) == mailroom.n_samples
        assert mailroom_page.value(f"reliability-{key}-ece") == pytest.approx(_torchmetrics_ce(p, y, "l1"), abs=1e-5)
        assert mailroom_page.value(f"reliability-{key}-mce") == pytest.approx(_torchmetrics_ce(p, y, "max"), abs=1e-5)
        assert mailroom_page.value(f"reliability-{key}-nll") == pytest.approx(log_loss(y, p), rel=1e-7)
        assert mailroom_page.value(f"reliability-{key}-brier") == pytest.approx(
            brier_score_loss(y, p, labels=range(10)), rel=1e-7
        )


def test_temperature_sweep_matches_sklearn_and_torchmetrics(mailroom: LogitFrame, mailroom_page: Page) -> None:
    y = mailroom.labels
    n = len(mailroom_page.ids("sweep-t-"))
    assert n >= 41
    temps = [mailroom_page.value(f"sweep-t-{i}") for i in range(n)]
    assert temps == sorted(temps) and temps[0] <= 0.25 and temps[-1] >= 4.0
    # the grid is log-spaced (ratios between neighbours of the 41-point grid are equal) plus the marked temperatures
    assert any(t == pytest.approx(1.0) for t in temps)
    assert any(t == pytest.approx(mailroom_page.value("fitted-temperature"), rel=1e-12) for t in temps)
    compared_tm = 0
    for i, t in enumerate(temps):
        p = _probs(mailroom, t)
        assert mailroom_page.value(f"sweep-nll-{i}") == pytest.approx(log_loss(y, p), rel=1e-6)  # sklearn
        assert mailroom_page.value(f"sweep-brier-{i}") == pytest.approx(
            brier_score_loss(y, p, labels=range(10)), rel=1e-6
        )  # sklearn
        conf, ok = p.max(axis=1), p.argmax(axis=1) == y
        assert mailroom_page.value(f"sweep-ece-{i}") == pytest.approx(_pandas_ece(conf, ok), abs=1e-9)  # pandas
        if np.all(conf.astype(np.float32) < 1.0):
            assert mailroom_page.value(f"sweep-ece-{i}") == pytest.approx(_torchmetrics_ce(p, y, "l1"), abs=1e-5)
            compared_tm += 1
    assert compared_tm >= 20


def test_threshold_readouts_match_brute_force_and_scipy_intervals(mailroom: LogitFrame, mailroom_page: Page) -> None:
    y = mailroom.labels
    p = _probs(mailroom, mailroom_page.value("decision-temperature"))
    conf, pred = p.max(axis=1), p.argmax(axis=1)
    ok = pred == y
    # the rule, straight from its definition: the lowest distinct confidence t whose accepted set
    # {conf >= t} has accuracy >= 0.98 (brute force over every distinct confidence)
    feasible = [t for t in np.unique(conf) if ok[conf >= t].mean() >= 0.98]
    t_ref = min(feasible)
    assert mailroom_page.value("threshold-value") == pytest.approx(t_ref, rel=1e-9)
    acc = conf >= t_ref
    n_acc, n_right = int(acc.sum()), int(ok[acc].sum())
    assert mailroom_page.value("threshold-accepted") == n_acc
    assert mailroom_page.value("threshold-review") == y.size - n_acc
    assert mailroom_page.value("threshold-coverage") == pytest.approx(n_acc / y.size)
    assert mailroom_page.value("threshold-accuracy") == pytest.approx(n_right / n_acc)
    lo, hi = _wilson(n_right, n_acc)  # scipy binomtest, Wilson
    assert mailroom_page.value("threshold-ci-low") == pytest.approx(lo, abs=1e-9)
    assert mailroom_page.value("threshold-ci-high") == pytest.approx(hi, abs=1e-9)
    assert "Wilson" in mailroom_page.text("threshold-readout")
    # per predicted class at the same threshold
    for k in range(10):
        m = pred == k
        a = m & acc
        assert mailroom_page.value(f"class-{k}-accepted") == a.sum()
        assert mailroom_page.value(f"class-{k}-review") == (m & ~acc).sum()
        lo, hi = _wilson(int(ok[a].sum()), int(a.sum()))
        assert mailroom_page.value(f"class-{k}-ci-low") == pytest.approx(lo, abs=1e-9)
        assert mailroom_page.value(f"class-{k}-ci-high") == pytest.approx(hi, abs=1e-9)
        # one threshold per predicted class, same rule on that class's rows only
        own = [t for t in np.unique(conf[m]) if ok[m][conf[m] >= t].mean() >= 0.98]
        if own:
            assert mailroom_page.value(f"own-{k}-value") == pytest.approx(min(own), rel=1e-9)
    assert CAUTION in mailroom_page.text("caution")


def test_held_out_check_matches_scipy_on_each_part(mailroom: LogitFrame, mailroom_page: Page) -> None:
    split = hash_split(mailroom.n_samples, 0.5, seed=0)  # the report's own split
    z = np.asarray(mailroom.logits, dtype=np.float64)
    y = mailroom.labels
    t_fit = _scipy_fitted_temperature(z[split.fit], y[split.fit])
    assert mailroom_page.value("split-fitted-temperature") == pytest.approx(t_fit, rel=1e-5)
    assert mailroom_page.value("split-fit-n") == split.fit.size
    assert mailroom_page.value("split-held-n") == split.held_out.size
    t_used = mailroom_page.value("decision-temperature")
    assert not math.isclose(t_used, t_fit, rel_tol=1e-3)  # all rows vs the fit part: three columns
    for key, t in (("given", 1.0), ("fitted", t_fit), ("decision", t_used)):
        for part, rows in (("fit", split.fit), ("held", split.held_out)):
            pp = special.softmax(z[rows] / t, axis=1)
            v = lambda m, part=part, key=key: mailroom_page.value(f"split-{part}-{m}-{key}")  # noqa: E731
            assert v("nll") == pytest.approx(log_loss(y[rows], pp, labels=range(10)), rel=1e-5)  # sklearn
            assert v("brier") == pytest.approx(brier_score_loss(y[rows], pp, labels=range(10)), rel=1e-5)  # sklearn
            conf, ok = pp.max(axis=1), pp.argmax(axis=1) == y[rows]
            assert v("ece") == pytest.approx(_pandas_ece(conf, ok), abs=1e-6)  # pandas.cut bins
    # the threshold is chosen on the fit part (at the decision T) and judged on the held-out part
    pf = special.softmax(z[split.fit] / t_used, axis=1)
    cf, okf = pf.max(axis=1), pf.argmax(axis=1) == y[split.fit]
    thr = min(t for t in np.unique(cf) if okf[cf >= t].mean() >= 0.98)
    assert mailroom_page.value("split-threshold") == pytest.approx(thr, rel=1e-9)
    ph = special.softmax(z[split.held_out] / t_used, axis=1)
    ch, okh = ph.max(axis=1), ph.argmax(axis=1) == y[split.held_out]
    acc = ch >= thr
    assert mailroom_page.value("split-held-coverage") == pytest.approx(acc.mean())
    assert mailroom_page.value("split-held-accuracy") == pytest.approx(okh[acc].mean())
    lo, hi = _wilson(int(okh[acc].sum()), int(acc.sum()))
    assert mailroom_page.value("split-held-ci-low") == pytest.approx(lo, abs=1e-9)
    assert mailroom_page.value("split-held-ci-high") == pytest.approx(hi, abs=1e-9)
    assert CAUTION in mailroom_page.text("caution-held-out")  # the caution beside this decision too


def test_mixups_match_sklearn_confusion_matrix(mailroom: LogitFrame, mailroom_page: Page) -> None:
    p = _probs(mailroom, mailroom_page.value("decision-temperature"))
    cm = confusion_matrix(mailroom.labels, p.argmax(axis=1), labels=range(10))  # sklearn
    off = cm.copy()
    np.fill_diagonal(off, 0)
    rows = mailroom_page.ids("mixup-")
    shown = [i for i in rows if i.count("-") == 1]
    assert len(shown) == 10
    counts = [mailroom_page.value(f"{i}-count") for i in shown]
    assert counts == sorted(np.sort(off.ravel())[::-1][:10].tolist(), reverse=True)
    for i in shown:
        a = mailroom_page.by_id[i]["attrs"]
        t, o = int(a["data-true"]), int(a["data-read-as"])
        assert mailroom_page.value(f"{i}-count") == cm[t, o]
        assert mailroom_page.value(f"{i}-share") == pytest.approx(cm[t, o] / cm[t].sum())
        cells = [e["text"].strip() for e in mailroom_page.inside(i, "td")]
        assert cells[:2] == [mailroom.classes[t], mailroom.classes[o]]  # a table row, true class then read as
    heads = [e["text"] for e in mailroom_page.inside("mixups-table", "th")]
    assert heads[:4] == ["true class", "read as", "samples", "share"]
    assert "Where the model mixes classes up" in mailroom_page.text("mixups")


def test_doubtful_labels_show_the_given_label_and_probabilities(mailroom: LogitFrame, mailroom_page: Page) -> None:
    p = _probs(mailroom, mailroom_page.value("decision-temperature"))
    rows = mailroom_page.ids("doubt-")
    cands = [i for i in rows if i.count("-") == 1]
    assert 1 <= len(cands) <= 20
    assert mailroom_page.value("doubtful-flagged") >= len(cands)
    assert "Doubtful labels" in mailroom_page.text("doubtful")
    assert "Northcutt, Jiang and Chuang 2021" in mailroom_page.text("doubtful")
    for i in cands:
        el = mailroom_page.by_id[i]
        r, g, s = (int(el["attrs"][k]) for k in ("data-row", "data-given", "data-suggested"))
        assert g == mailroom.labels[r] and s != g
        assert mailroom.ids[r] in el["text"]
        assert mailroom.classes[g] in el["text"] and mailroom.classes[s] in el["text"]
        assert mailroom_page.value(f"{i}-p-given") == pytest.approx(p[r, g], rel=1e-6, abs=1e-12)  # scipy softmax
        assert mailroom_page.value(f"{i}-p-suggested") == pytest.approx(p[r, s], rel=1e-6)
        # confident learning only flags a row whose label the model finds less likely than the suggestion
        assert p[r, s] > p[r, g]


# --------------------------------------------------------------------------- threshold rules, hand-worked

# Hand-worked example: ten samples, two classes, logits [log c, log(1 - c)] so that the confidence of
# each sample is c (all above 1/2, so class 0 is predicted), label 0 where the prediction is right.
#
#   confidence  0.99 0.95 0.93 0.90 0.85 0.80 0.72 0.65 0.60 0.55
#   right?       1    1    1    0    1    1    0    1    0    0
#   accepted n   1    2    3    4    5    6    7    8    9    10
#   right of n   1    2    3    3    4    5    5    6    6    6
#   accuracy    1.0  1.0  1.0  .75  .80  .833 .714 .75  .667 .60
#
# Target accuracy 0.8: the lowest threshold with accuracy >= 0.8 is 0.80 (n = 6: 5 of 6 right),
# coverage 0.6, 4 sent for review. Wilson 95% interval for 5 of 6, by hand (z = 1.95996):
#   centre = (5/6 + z^2/12) / (1 + z^2/6) = 0.70321, half = z sqrt(5/216 + z^2/144) / (1 + z^2/6) = 0.26672
#   -> [0.4365, 0.9699].
# Target 0.9: threshold 0.93 (n = 3), coverage 0.3.   Target 0.75: threshold 0.65 (n = 8), coverage 0.8.
# Costs 5 per accepted error, 1 per review: cost(n) = (5 errors(n) + (10 - n)) / 10 =
#   n: 0    1   2   3   4   5   6   7   8   9   10
#      1.0 .9  .8  .7 1.1 1.0  .9 1.3 1.2 1.6 2.0  -> minimum 0.7 at n = 3: threshold 0.93.
# Costs 2 and 1: 1.0 .9 .8 .7 .8 .7 .6 .7 .6 .7 .8 -> minimum 0.6 at n = 6 and n = 8; the tie goes to
#   the larger coverage: threshold 0.65, 2 sent for review.
HAND_CONF = np.array([0.99, 0.95, 0.93, 0.90, 0.85, 0.80, 0.72, 0.65, 0.60, 0.55])
HAND_RIGHT = np.array([1, 1, 1, 0, 1, 1, 0, 1, 0, 0], dtype=bool)


def hand_frame() -> LogitFrame:
    z = np.log(np.c_[HAND_CONF, 1 - HAND_CONF])
    return LogitFrame(z, labels=np.where(HAND_RIGHT, 0, 1), classes=["parcel", "letter"])


@pytest.mark.parametrize(
    ("options", "threshold", "coverage", "review", "accuracy"),
    [
        ({"target_accuracy": 0.8}, 0.80, 0.6, 4, 5 / 6),
        ({"target_accuracy": 0.9}, 0.93, 0.3, 7, 1.0),
        ({"target_accuracy": 0.75}, 0.65, 0.8, 2, 0.75),
        ({"costs": (5, 1)}, 0.93, 0.3, 7, 1.0),
        ({"costs": (2, 1)}, 0.65, 0.8, 2, 0.75),
    ],
)
def test_threshold_rules_on_the_hand_worked_example(tmp_path: Path, options, threshold, coverage, review, accuracy):
    path = tmp_path / "hand.html"
    write_report(hand_frame(), path, **options)
    page = read_report(path)
    assert page.value("threshold-value") == pytest.approx(threshold, abs=1e-12)
    assert page.value("threshold-coverage") == pytest.approx(coverage)
    assert page.value("threshold-review") == review
    assert page.value("threshold-accuracy") == pytest.approx(accuracy)
    if "costs" in options:
        assert page.value("threshold-cost") == pytest.approx({(5, 1): 0.7, (2, 1): 0.6}[options["costs"]])


def test_hand_worked_wilson_and_clopper_pearson_intervals(tmp_path: Path) -> None:
    path = tmp_path / "hand.html"
    write_report(hand_frame(), path, target_accuracy=0.8)
    page = read_report(path)
    # by hand (see the worked example above), and scipy's Wilson interval
    assert page.value("threshold-ci-low") == pytest.approx(0.4365, abs=5e-5)
    assert page.value("threshold-ci-high") == pytest.approx(0.9699, abs=5e-5)
    assert (page.value("threshold-ci-low"), page.value("threshold-ci-high")) == pytest.approx(_wilson(5, 6))
    write_report(hand_frame(), path, target_accuracy=0.8, interval="clopper-pearson", level=0.9)
    page = read_report(path)
    assert (page.value("threshold-ci-low"), page.value("threshold-ci-high")) == pytest.approx(
        _clopper_pearson(5, 6, 0.9)
    )  # scipy binomtest, method="exact"
    assert "Clopper-Pearson" in page.text("threshold-readout") and "90%" in page.text("threshold-readout")


def test_an_unreachable_target_sends_everything_to_review(tmp_path: Path) -> None:
    path = tmp_path / "hand.html"
    z = np.log(np.c_[HAND_CONF, 1 - HAND_CONF])
    frame = LogitFrame(z, labels=np.ones(10, dtype=int))  # every prediction wrong
    write_report(frame, path, target_accuracy=0.9)
    page = read_report(path)
    assert page.value("threshold-accepted") == 0 and page.value("threshold-review") == 10
    assert "threshold-infeasible" in page.by_id


# --------------------------------------------------------------------------- escaping and self-containment

HOSTILE = ["<script>alert(1)</script>", "<img src=x onerror=alert(1)>", "a \"quoted\" & 'single' name"]


def hostile_frame(labels: bool = True) -> LogitFrame:
    rng = np.random.default_rng(7)
    n = 60
    z = rng.normal(size=(n, 3)) * 3
    y = z.argmax(axis=1)
    y[:12] = (y[:12] + 1) % 3  # some errors and relabelling candidates
    ids = [f"{HOSTILE[i % 3]}-{i}" for i in range(n)]
    texts = [f"ticket {i}: {HOSTILE[i % 3]}" for i in range(n)]
    frame = LogitFrame(z, labels=y if labels else None, classes=HOSTILE, ids=ids)
    return frame.with_payload(texts=texts)


@pytest.mark.parametrize("labels", [True, False])
def test_hostile_names_ids_texts_and_title_are_escaped(tmp_path: Path, labels: bool) -> None:
    path = tmp_path / "hostile.html"
    options = {"fit_temperature": True, "target_accuracy": 0.9} if labels else {}
    write_report(hostile_frame(labels), path, title=HOSTILE[0] + HOSTILE[2], **options)
    text = path.read_text(encoding="utf-8")
    assert "<script" not in text.lower()
    assert "<img src=x" not in text and "onerror=alert" not in text.replace("onerror=alert(1)&gt;", "")
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in text
    assert "&lt;img src=x onerror=alert(1)&gt;" in text
    assert "&#34;quoted&#34; &amp; &#39;single&#39;" in text  # markupsafe's (Jinja2's) entities
    page = Page(text)
    tags = {e["tag"] for e in page.elements}
    assert "script" not in tags
    for e in page.elements:
        assert not any(a.startswith("on") for a in e["attrs"]), e
        if e["tag"] == "img":
            assert e["attrs"]["src"].startswith("data:image/png;base64,")
    # the parser unescapes the text back to the user's strings: they are shown, not run
    assert HOSTILE[0] in page.text("report-title")
    body = " ".join(e["text"] for e in page.elements if e["tag"] == "main")
    for name in HOSTILE:
        assert name in body
    if labels:
        assert any(HOSTILE[i % 3] in body for i in range(3))


def _external_references(text: str) -> list[str]:
    import re

    urls = re.findall(r"""(?:src|href|action)\s*=\s*["']?([^"' >]+)""", text) + re.findall(r"url\(([^)]*)\)", text)
    return [u for u in urls if not (u.startswith("data:") or u.startswith("#"))]


def test_report_is_self_contained(mailroom_page: Page, mailroom: LogitFrame, tmp_path: Path) -> None:
    path = tmp_path / "r.html"
    write_report(mailroom, path, fit_temperature=True, target_accuracy=0.98)
    text = path.read_text(encoding="utf-8")
    assert _external_references(text) == []
    assert "@import" not in text and "<link" not in text and "<script" not in text
    # the only http string is the SVG namespace name, which is never fetched
    assert set(__import__("re").findall(r"https?://[^\s\"'<>]+", text)) == {"http://www.w3.org/2000/svg"}
    assert mailroom_page.duplicate_ids == []  # every id names one element (they are how the numbers are read)
    csp = [e for e in mailroom_page.elements if e["attrs"].get("http-equiv") == "Content-Security-Policy"]
    assert csp and "default-src 'none'" in csp[0]["attrs"]["content"]
    policy = csp[0]["attrs"]["content"]
    assert "script-src" not in policy and "unsafe-inline" not in policy  # scripts fall back to 'none'
    # the one style block is allowed by its hash: base64 of the SHA-256 of its text (CSP Level 2, hash-source)
    styles = re.findall(r"<style>(.*?)</style>", text, flags=re.S)
    assert len(styles) == 1
    digest = base64.b64encode(hashlib.sha256(styles[0].encode("utf-8")).digest()).decode("ascii")
    assert f"style-src 'sha256-{digest}'" in policy
    assert all("style" not in e["attrs"] for e in mailroom_page.elements)  # no style attribute the hash would refuse
    # thumbnails of the digits are inline PNGs
    imgs = [e for e in mailroom_page.elements if e["tag"] == "img"]
    assert imgs and all(e["attrs"]["src"].startswith("data:image/png;base64,") for e in imgs)


# --------------------------------------------------------------------------- unlabelled frames, options, files


def test_unlabelled_frame_shows_what_needs_no_labels(tmp_path: Path) -> None:
    frame = logitscope.load_demo("helpdesk").with_labels(None)
    path = tmp_path / "u.html"
    write_report(frame, path)
    page = read_report(path)
    p = _probs(frame, 1.0)
    assert page.value("summary-mean_confidence-before") == pytest.approx(p.max(axis=1).mean(), rel=1e-9)
    assert page.value("summary-mean_entropy-before") == pytest.approx(stats.entropy(p, axis=1).mean(), rel=1e-7)
    counts = np.bincount(p.argmax(axis=1), minlength=frame.n_classes)
    for k in range(frame.n_classes):
        assert page.value(f"predicted-{k}-count") == counts[k]  # numpy bincount of scipy's argmax
        assert page.value(f"predicted-{k}-share") == pytest.approx(counts[k] / frame.n_samples)
    assert page.duplicate_ids == []
    needs = page.text("needs-labels-list")
    for what in ("reliability diagram", "temperature", "threshold", "confusion matrix", "doubtful labels"):
        assert what in needs
    assert "threshold-value" not in page.by_id and "summary-accuracy-before" not in page.by_id


@pytest.mark.parametrize(
    "options", [{"fit_temperature": True}, {"target_accuracy": 0.9}, {"costs": (1, 1)}, {"threshold": 0.5}]
)
def test_unlabelled_frame_refuses_what_needs_labels(tmp_path: Path, options: dict) -> None:
    frame = logitscope.load_demo("helpdesk").with_labels(None)
    with pytest.raises(LabelError, match="needs labels"):
        write_report(frame, tmp_path / "u.html", **options)
    assert not (tmp_path / "u.html").exists()


@pytest.mark.parametrize(
    ("options", "words"),
    [
        ({"temperature": 2.0, "fit_temperature": True}, "not both"),
        ({"target_accuracy": 0.9, "costs": (1, 1)}, "one threshold rule"),
        ({"target_accuracy": 1.5}, "target accuracy"),
        ({"costs": (-1, 1)}, "error cost must lie in"),
        ({"costs": (1,)}, "two numbers"),
        ({"interval": "normal"}, "wilson"),
        ({"n_bins": 0}, "n_bins"),
        ({"temperature": -1.0}, "temperature"),
        ({"threshold": 2.0}, "threshold"),
    ],
)
def test_bad_options_name_the_problem_and_leave_the_old_file(tmp_path: Path, options: dict, words: str) -> None:
    path = tmp_path / "r.html"
    path.write_text("old report")
    with pytest.raises(ParameterError, match=words):
        write_report(hand_frame(), path, **options)
    assert path.read_text() == "old report"
    assert [p.name for p in tmp_path.iterdir()] == ["r.html"]  # no temporary file left behind


def test_report_overwrites_atomically_and_is_readable_by_others(tmp_path: Path) -> None:
    path = tmp_path / "r.html"
    path.write_text("old report")
    hand_frame().report(path, target_accuracy=0.8)  # LogitFrame.report calls write_report
    assert read_report(path).value("threshold-value") == pytest.approx(0.8)
    mask = os.umask(0)
    os.umask(mask)
    assert stat.S_IMODE(path.stat().st_mode) == 0o666 & ~mask
    assert [p.name for p in tmp_path.iterdir()] == ["r.html"]


def test_a_given_temperature_and_split_are_used(tmp_path: Path) -> None:
    path = tmp_path / "r.html"
    helpdesk = logitscope.load_demo("helpdesk")
    write_report(helpdesk, path, temperature=0.5)
    page = read_report(path)
    assert page.value("decision-temperature") == 0.5
    assert page.text("decision-how") == "set by hand"
    p = _probs(helpdesk, 0.5)
    assert page.value("summary-nll-after") == pytest.approx(log_loss(helpdesk.labels, p), rel=1e-7)  # sklearn
    # a split given by the caller replaces the default one
    split = random_split(helpdesk.n_samples, 0.3, seed=4)
    write_report(helpdesk, path, split=split)
    page = read_report(path)
    assert page.value("split-held-n") == split.held_out.size
    z = np.asarray(helpdesk.logits, dtype=np.float64)
    t_ref = _scipy_fitted_temperature(z[split.fit], helpdesk.labels[split.fit])
    assert page.value("split-fitted-temperature") == pytest.approx(t_ref, rel=1e-5)


# --------------------------------------------------------------------------- the report renders findings


def _expected_numbers(f: Findings, marks: int | None = None) -> dict[str, float | None]:
    """Every number the page should show, read off the findings field by field (independently of the templates)."""
    out: dict[str, float | None] = {"n-samples": f.predictions.n, "n-classes": f.predictions.predicted_counts.size}
    t = f.temperatures
    out["decision-temperature"] = t.decision
    if not f.labelled:
        p = f.predictions
        out["summary-mean_confidence-before"] = p.mean_confidence
        out["summary-mean_entropy-before"] = p.mean_entropy
        for k, c in enumerate(p.predicted_counts):
            out[f"predicted-{k}-count"] = c
            out[f"predicted-{k}-share"] = p.predicted_share[k]
        return out
    assert f.before is not None and f.sweep is not None and f.confusion is not None and f.suspects is not None
    for which, s in (("before", f.before), ("after", f.after)):
        if s is None:
            continue
        for key in ("accuracy", "nll", "brier", "ece", "mce", "aurc", "mean_confidence", "mean_entropy"):
            out[f"summary-{key}-{which}"] = getattr(s, key)
        for k, v in s.top_k.items():
            out[f"summary-top_k_accuracy-{k}-{which}"] = v
        for key in ("ece", "mce", "nll", "brier"):
            out[f"reliability-{which}-{key}"] = getattr(s, key)
        for b in np.flatnonzero(s.bins.count):
            for key, arr in (("count", s.bins.count), ("accuracy", s.bins.accuracy), ("confidence", s.bins.confidence)):
                out[f"bins-{which}-{b}-{key}"] = arr[b]
            out[f"bins-{which}-{b}-gap"] = s.bins.gap[b]
    if t.fitted is not None:
        out["fitted-temperature"] = t.fitted.temperature
        out["fit-passes"] = getattr(t.fitted, "passes", t.fitted.iterations)
    sw = f.sweep
    for i in range(sw.temperature.size):
        for key, arr in (("t", sw.temperature), ("nll", sw.nll), ("ece", sw.ece), ("brier", sw.brier)):
            out[f"sweep-{key}-{i}"] = arr[i]
        out[f"sweep-conf-{i}"] = sw.mean_confidence[i]
    d = f.threshold
    if d is None:
        assert f.decision is not None
        out["threshold-aurc"] = f.decision.aurc
    else:
        c = d.choice
        out.update(
            {
                "threshold-value": c.threshold if math.isfinite(c.threshold) else None,
                "threshold-coverage": c.coverage,
                "threshold-accepted": c.n_accepted,
                "threshold-review": c.n_review,
                "threshold-accuracy": c.accuracy,
                "threshold-ci-low": c.interval[0],
                "threshold-ci-high": c.interval[1],
                "threshold-aurc": d.aurc,
            }
        )
        if c.expected_cost is not None:
            out["threshold-cost"] = c.expected_cost
        if d.accept_all_cost is not None:
            out["cost-accept-all"], out["cost-review-all"] = d.accept_all_cost, d.review_all_cost
        for k, pc in enumerate(d.by_class):
            if pc is None:
                continue
            for key, v in (("predicted", pc.n_total), ("accepted", pc.n_accepted), ("review", pc.n_review),
                           ("coverage", pc.coverage), ("accuracy", pc.accuracy), ("ci-low", pc.interval[0]),
                           ("ci-high", pc.interval[1])):  # fmt: skip
                out[f"class-{k}-{key}"] = v
        if d.own is not None:
            assert d.own_combined is not None
            for k, o in enumerate(d.own):
                if o is None:
                    continue
                out[f"own-{k}-value"] = o.threshold if math.isfinite(o.threshold) else None
                for key, v in (("coverage", o.coverage), ("accuracy", o.accuracy), ("ci-low", o.interval[0]),
                               ("ci-high", o.interval[1])):  # fmt: skip
                    out[f"own-{k}-{key}"] = v
            oc = d.own_combined
            out.update({"own-all-coverage": oc.coverage, "own-all-accuracy": oc.accuracy,
                        "own-all-ci-low": oc.interval[0], "own-all-ci-high": oc.interval[1]})  # fmt: skip
    h = f.held_out
    if h is not None:
        out["split-fit-n"], out["split-held-n"], out["split-fitted-temperature"] = (
            h.n_fit,
            h.n_held,
            h.fitted.temperature,
        )
        for key, _, _ in h.columns:
            for part, table in (("fit", h.fit), ("held", h.held)):
                for metric in ("nll", "ece", "brier"):
                    out[f"split-{part}-{metric}-{key}"] = getattr(table[key], metric)
        if h.decision_on_fit is not None:
            dc, j = h.decision_on_fit.choice, h.judged_on_held
            assert j is not None
            out.update(
                {
                    "split-threshold": dc.threshold if math.isfinite(dc.threshold) else None,
                    "split-threshold-fit-accuracy": dc.accuracy,
                    "split-threshold-fit-coverage": dc.coverage,
                    "split-held-coverage": j.coverage,
                    "split-held-accuracy": j.accuracy,
                    "split-held-ci-low": j.interval[0],
                    "split-held-ci-high": j.interval[1],
                    "split-held-review": j.n_review,
                }
            )
    for i, pair in enumerate(f.confusion.pairs):
        out[f"mixup-{i}-count"], out[f"mixup-{i}-share"] = pair.count, pair.rate
    out["doubtful-flagged"] = f.suspects.n_flagged
    for i in range(len(f.suspects)):
        out[f"doubt-{i}-p-given"], out[f"doubt-{i}-p-suggested"] = f.suspects.p_given[i], f.suspects.p_suggested[i]
    if marks is not None:
        out["marks-count"] = marks
    return out


def _same(shown: str, value: float | None) -> bool:
    if value is None:
        return shown == ""
    if isinstance(value, float | np.floating) and math.isnan(value):
        return shown == "nan"
    return float(shown) == float(value)  # exact: data-value holds repr(float), which reads back bit for bit


def _check_page_against(page: Page, f: Findings) -> None:
    shown = {e["attrs"]["id"]: e["attrs"]["data-value"] for e in page.elements if "data-value" in e["attrs"]}
    assert all("id" in e["attrs"] for e in page.elements if "data-value" in e["attrs"])  # every number is named
    expected = _expected_numbers(f)
    assert set(shown) == set(expected), set(shown) ^ set(expected)  # no number left out, none made up
    wrong = {k: (shown[k], v) for k, v in expected.items() if not _same(shown[k], v)}
    assert wrong == {}


@pytest.mark.parametrize(
    "options",
    [
        MAILROOM_OPTIONS,
        {"temperature": 1.3, "costs": (10, 1), "interval": "clopper-pearson", "n_bins": 10, "strategy": "quantile"},
        {},
    ],
)
def test_every_number_on_the_page_is_the_value_of_its_finding(
    mailroom: LogitFrame, tmp_path: Path, options: dict
) -> None:
    # the findings computed on their own, for the same options, and the page written by write_report
    f = collect(mailroom, *resolve_choices(mailroom, **options))
    path = tmp_path / "r.html"
    write_report(mailroom, path, **options)
    _check_page_against(read_report(path), f)
    # handing the findings over (as the calibration panel does) gives the same page, apart from the time stamp
    write_report(mailroom, tmp_path / "given.html", findings=f)
    assert _masked(tmp_path / "given.html") == _masked(path)


def test_an_unlabelled_page_renders_its_findings_too(tmp_path: Path) -> None:
    frame = logitscope.load_demo("helpdesk").with_labels(None)
    path = tmp_path / "u.html"
    write_report(frame, path, temperature=1.7)
    _check_page_against(read_report(path), collect(frame, *resolve_choices(frame, temperature=1.7)))


def test_histogram_bars_match_numpy(mailroom: LogitFrame, mailroom_page: Page) -> None:
    p = _probs(mailroom, mailroom_page.value("decision-temperature"))
    conf, ok = p.max(axis=1), p.argmax(axis=1) == mailroom.labels
    edges = np.linspace(0.1, 1.0, 21)  # 20 equal-width bins from 1/K to 1
    for part, mask in (("right", ok), ("wrong", ~ok)):
        ref = np.histogram(conf[mask], edges)[0]  # numpy.histogram
        bars = [e["attrs"] for e in mailroom_page.elements if e["attrs"].get("data-part") == part]
        got = np.zeros(20, dtype=int)
        for a in bars:
            got[int(a["data-bin"])] = int(a["data-count"])
        assert got.tolist() == ref.tolist()


# --------------------------------------------------------------------------- same input, same bytes

_STAMP = re.compile(r'<time id="written" datetime="[^"]*">[^<]*</time>')


def _masked(path: Path) -> str:
    text = path.read_text(encoding="utf-8")
    assert len(_STAMP.findall(text)) == 1
    return _STAMP.sub("<time>", text)


def test_same_input_gives_the_same_bytes_apart_from_the_time_stamp(mailroom: LogitFrame, tmp_path: Path) -> None:
    write_report(mailroom, tmp_path / "a.html", **MAILROOM_OPTIONS)
    write_report(hand_frame(), tmp_path / "other.html", target_accuracy=0.8)  # another report in between
    write_report(mailroom, tmp_path / "b.html", **MAILROOM_OPTIONS)
    assert _masked(tmp_path / "a.html") == _masked(tmp_path / "b.html")
    clip_ids = re.findall(r'clipPath id="([^"]+)"', (tmp_path / "b.html").read_text())
    assert clip_ids and clip_ids[0] == "lsclip1" and len(set(clip_ids)) == len(clip_ids)  # ids count per page


# --------------------------------------------------------------------------- the temperature fit


def test_the_fit_says_how_many_passes_over_the_data_it_made(monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    import logitscope.analysis.temperature as temperature_module

    frame = logitscope.load_demo("helpdesk")
    n = frame.n_samples
    passes = []
    real = temperature_module.temperature_moments

    def counting(z, y, beta):  # one call = one pass over the rows given (NLL and its two derivatives)
        passes.append(np.asarray(z).shape[0])
        return real(z, y, beta)

    monkeypatch.setattr(temperature_module, "temperature_moments", counting)
    write_report(frame, tmp_path / "r.html", fit_temperature=True)
    page = read_report(tmp_path / "r.html")
    assert page.value("fit-passes") == passes.count(n) >= 2  # one pass at T = 1, at least one Newton step
    note = page.text("fit-note")
    assert f"{passes.count(n)} passes over the data" in " ".join(note.split())
    assert "Newton steps" not in page.text("summary")


# --------------------------------------------------------------------------- the rule's own options


def test_the_per_class_table_appears_only_when_asked(tmp_path: Path) -> None:
    frame = hand_frame()
    write_report(frame, tmp_path / "shared.html", target_accuracy=0.8)
    page = read_report(tmp_path / "shared.html")
    assert page.ids("own-") == [] and "threshold-own-class" not in page.by_id
    assert "class-0-accepted" in page.by_id  # the one threshold judged per class is always there
    write_report(frame, tmp_path / "own.html", target_accuracy=0.8, per_class=True)
    page = read_report(tmp_path / "own.html")
    # every sample is predicted "parcel" (class 0): its own threshold is the shared one, by brute force
    own = [t for t in np.unique(HAND_CONF) if HAND_RIGHT[HAND_CONF >= t].mean() >= 0.8]
    assert page.value("own-0-value") == pytest.approx(min(own))
    assert "own-1-value" not in page.by_id  # "letter" is never predicted
    assert CAUTION in page.text("caution-per-class")


def test_findings_or_choices_exclude_the_options(mailroom: LogitFrame, tmp_path: Path) -> None:
    f = collect(mailroom, *resolve_choices(mailroom, target_accuracy=0.9))
    with pytest.raises(ParameterError, match="do not give target_accuracy"):
        write_report(mailroom, tmp_path / "r.html", findings=f, target_accuracy=0.9)
    with pytest.raises(ParameterError, match="not both"):
        write_report(mailroom, tmp_path / "r.html", findings=f, choices=f.choices)
    with pytest.raises(ParameterError, match="another frame"):
        write_report(hand_frame(), tmp_path / "r.html", findings=f)
    assert not (tmp_path / "r.html").exists()
    # choices alone: the findings are computed for them, the same as from the options
    write_report(mailroom, tmp_path / "choices.html", choices=f.choices)
    write_report(mailroom, tmp_path / "options.html", target_accuracy=0.9)
    assert _masked(tmp_path / "choices.html") == _masked(tmp_path / "options.html")


# --------------------------------------------------------------------------- long strings


class _TextNodes(HTMLParser):
    """Every text node shown on the page (style text excluded) and every title attribute."""

    def __init__(self, text: str) -> None:
        super().__init__(convert_charrefs=True)
        self.nodes: list[str] = []
        self.titles: list[str] = []
        self._in_style = False
        self.feed(text)

    def handle_starttag(self, tag: str, attrs: list) -> None:
        self._in_style = tag == "style"
        self.titles += [v for k, v in attrs if k == "title"]

    def handle_endtag(self, tag: str) -> None:
        self._in_style = False

    def handle_data(self, data: str) -> None:
        if not self._in_style:
            self.nodes.append(data)


LONG_NAME = "billing-" + "x" * (1 << 20)  # a 1 MB class name


def long_frame() -> LogitFrame:
    rng = np.random.default_rng(3)
    z = rng.normal(size=(80, 3)) * 3
    y = z.argmax(axis=1)
    y[:15] = (y[:15] + 1) % 3
    ids = [f"ticket-{i}-" + "y" * 300 for i in range(80)]
    texts = [f"printer {i} " + "jammed " * 200 for i in range(80)]
    return LogitFrame(z, labels=y, classes=[LONG_NAME, "shipping", "returns"], ids=ids).with_payload(texts=texts)


def test_long_names_ids_and_texts_are_cut_with_the_full_text_on_hover(tmp_path: Path) -> None:
    from logitscope.report.text import HOVER_LIMIT

    path = tmp_path / "long.html"
    write_report(long_frame(), path, target_accuracy=0.9, per_class=True, title="T" * 5000)
    text = path.read_text(encoding="utf-8")
    nodes = _TextNodes(text)
    assert max(len(n) for n in nodes.nodes) <= 400  # longest shown text: an intro paragraph, not a name
    assert any(n.startswith("billing-xxx") and n.endswith("…") for n in nodes.nodes)  # the name, cut
    hovers = [t for t in nodes.titles if t.startswith("billing-")]
    assert hovers and all(len(t) <= HOVER_LIMIT + 40 for t in hovers)  # the full name, up to the hover limit
    assert all(t.endswith(f"({len(LONG_NAME):,} characters in all)") for t in hovers)
    assert any(t.startswith("ticket-0-yyy") and len(t) == len("ticket-0-") + 300 for t in nodes.titles)  # whole id
    assert any(t.startswith("printer 0 jammed") for t in nodes.titles)  # whole text on hover of the snippet
    assert len(text) < 400_000  # one megabyte name, but no megabytes of page


# --------------------------------------------------------------------------- the user's relabel list


def test_relabel_marks_and_notes_are_listed_and_escaped(mailroom: LogitFrame, tmp_path: Path) -> None:
    store_path = tmp_path / "marks.json"
    store = RelabelStore(store_path, mailroom)
    first = int(read_doubtful_row(mailroom))
    store.add(mailroom.ids[first], "three", note="<b>looks like a 3</b> & smudged")
    store.add("card-00005", "two", note="")
    path = tmp_path / "r.html"
    write_report(mailroom, path, target_accuracy=0.98, relabel=store)
    text = path.read_text(encoding="utf-8")
    assert "&lt;b&gt;looks like a 3&lt;/b&gt; &amp; smudged" in text and "<b>looks" not in text
    page = Page(text)
    assert page.value("marks-count") == 2
    marks = store.to_frame()
    for i, rec in marks.iterrows():
        row = page.by_id[f"mark-{i}"]
        assert int(row["attrs"]["data-row"]) == rec["row"]
        cells = [e["text"] for e in page.inside(f"mark-{i}", "td")]
        assert cells[0] == rec["id"] and cells[2:5] == [rec["given_label"], rec["suggested_label"], rec["note"]]
        assert cells[5] == rec["marked_at"]
        assert len(page.inside(f"mark-{i}", "img")) == 1  # the digit, as a data: PNG
    # the doubtful sample the user marked says so
    doubt = next(i for i in page.ids("doubt-") if page.by_id[i]["attrs"].get("data-row") == str(first))
    assert page.inside(doubt, "td")[-1]["text"] == "marked"
    # the same from the path, as the command line gives it
    write_report(mailroom, tmp_path / "p.html", target_accuracy=0.98, relabel=store_path)
    assert _masked(tmp_path / "p.html") == _masked(path)


def read_doubtful_row(frame: LogitFrame) -> int:
    f = collect(frame, *resolve_choices(frame))
    assert f.suspects is not None
    return int(f.suspects.rows[0])


def test_marks_of_ids_the_frame_lacks_are_kept_and_said(mailroom: LogitFrame, tmp_path: Path) -> None:
    store = RelabelStore(tmp_path / "m.json")  # no frame: marks by id, row and labels as given
    store.add("card-99999", "one", row=3, given_label="seven", note="from last week's batch")
    store.add("card-00003", "one", row=3, given_label="three")
    frame = mailroom.with_labels(None)
    with pytest.warns(UserWarning, match="1 of 2 marks"):
        write_report(frame, tmp_path / "u.html", relabel=tmp_path / "m.json")
    page = read_report(tmp_path / "u.html")
    assert page.value("marks-count") == 2 and page.value("marks-unmatched") == 1
    assert "data-row" not in page.by_id["mark-0"]["attrs"]  # id not in this frame: no preview, no row
    assert page.by_id["mark-1"]["attrs"]["data-row"] == "3"
    with pytest.raises(logitscope.errors.FileFormatError, match="does not exist"):
        write_report(frame, tmp_path / "x.html", relabel=tmp_path / "missing.json")


# --------------------------------------------------------------------------- a look and words of our own


def test_figures_and_words_of_our_own(mailroom_page: Page, mailroom: LogitFrame, tmp_path: Path) -> None:
    path = tmp_path / "r.html"
    write_report(mailroom, path, **MAILROOM_OPTIONS)
    text = path.read_text(encoding="utf-8")
    lower = text.lower()
    assert "label issue" not in lower and "<pattern" not in text  # no hatching, no borrowed panel names
    assert not re.search(r"\w+ -(&gt;|>) \w+: \d+", text)  # no "eight -> one: 8" lines
    css = re.search(r"<style>(.*?)</style>", text, flags=re.S).group(1)
    reference = re.search(r"svg \.reference\{([^}]*)\}", css).group(1)
    assert "dasharray" not in reference  # a solid reference line
    # a dot per bin (no bars in the diagram), gaps as thin lines
    diagram = [e for e in mailroom_page.elements if "bin-before" in e["attrs"].get("id", "")]
    assert diagram and all(e["tag"] == "circle" for e in diagram)
    rects = {e["attrs"].get("class", "(clip box)") for e in mailroom_page.inside("calibration", "rect")}
    assert rects == {"bar count", "plot-frame", "(clip box)"}  # the only boxes: the count strip's bars
    # the bins table names each bin by its confidence range
    first = mailroom_page.inside("bins-before", "td")[0]["text"]
    assert re.fullmatch(r"\d\.\d\d–\d\.\d\d", first)
