"""The HTML report: every number read back from the page and checked against an outside reference.

References, named beside each check: scikit-learn (accuracy_score, log_loss, brier_score_loss,
top_k_accuracy_score, confusion_matrix), torchmetrics (multiclass_calibration_error), scipy
(special.softmax, stats.entropy, stats.binomtest(...).proportion_ci, optimize.minimize_scalar),
pandas (cut / groupby for the reliability bins), and a hand-worked example for the threshold rules.
"""

from __future__ import annotations

import math
import os
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
from logitscope.analysis.split import random_split
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
        el = {"tag": tag, "attrs": dict(attrs), "text": ""}
        self.elements.append(el)
        if tag not in self._VOID:
            self._open.append(el)

    def handle_startendtag(self, tag: str, attrs: list) -> None:
        self.elements.append({"tag": tag, "attrs": dict(attrs), "text": ""})

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
    write_report(mailroom, path, fit_temperature=True, target_accuracy=0.98, title="Mail room, week 12")
    return read_report(path)


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
    split = random_split(mailroom.n_samples, 0.5, seed=0, stratify=mailroom.labels)
    z = np.asarray(mailroom.logits, dtype=np.float64)
    y = mailroom.labels
    t_fit = _scipy_fitted_temperature(z[split.fit], y[split.fit])
    assert mailroom_page.value("split-fitted-temperature") == pytest.approx(t_fit, rel=1e-5)
    assert mailroom_page.value("split-fit-n") == split.fit.size
    assert mailroom_page.value("split-held-n") == split.held_out.size
    ph = special.softmax(z[split.held_out] / t_fit, axis=1)
    assert mailroom_page.value("split-held-nll-after") == pytest.approx(log_loss(y[split.held_out], ph), rel=1e-5)
    # the threshold is chosen on the fit part and judged on the held-out part
    t_used = mailroom_page.value("decision-temperature")
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


def test_confused_pairs_match_sklearn_confusion_matrix(mailroom: LogitFrame, mailroom_page: Page) -> None:
    p = _probs(mailroom, mailroom_page.value("decision-temperature"))
    cm = confusion_matrix(mailroom.labels, p.argmax(axis=1), labels=range(10))  # sklearn
    off = cm.copy()
    np.fill_diagonal(off, 0)
    pairs = mailroom_page.ids("pair-")
    shown = [i for i in pairs if i.count("-") == 1]
    assert len(shown) == 10
    counts = [mailroom_page.value(f"{i}-count") for i in shown]
    assert counts == sorted(np.sort(off.ravel())[::-1][:10].tolist(), reverse=True)
    for i in shown:
        a = mailroom_page.by_id[i]["attrs"]
        t, o = int(a["data-true"]), int(a["data-predicted"])
        assert mailroom_page.value(f"{i}-count") == cm[t, o]
        assert mailroom_page.value(f"{i}-rate") == pytest.approx(cm[t, o] / cm[t].sum())


def test_relabel_candidates_show_the_given_label_and_probabilities(mailroom: LogitFrame, mailroom_page: Page) -> None:
    p = _probs(mailroom, mailroom_page.value("decision-temperature"))
    rows = mailroom_page.ids("candidate-")
    cands = [i for i in rows if i.count("-") == 1]
    assert 1 <= len(cands) <= 20
    assert mailroom_page.value("relabel-flagged") >= len(cands)
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
    assert "&quot;quoted&quot; &amp; &#x27;single&#x27;" in text
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
        assert page.value(f"predicted-{k}-count") == counts[k]
    assert page.duplicate_ids == []
    needs = page.text("needs-labels-list")
    for what in ("reliability diagram", "temperature", "threshold", "confused", "relabelling"):
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
        ({"costs": (-1, 1)}, "non-negative"),
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
