"""Checkpoints side by side: flip table, McNemar, per-class change, forgetting events, alignment by id.

References: per-sample Python loops written from the definitions (the five flip-table cells; forgetting
events as in Toneva et al. 2019, never-learned samples counted as forgotten at every checkpoint as in the
paper's released code), scipy.stats.binomtest for McNemar's exact test (McNemar 1947), Holm's step-down
procedure run as the paper states it (Holm 1979), scikit-learn's confusion_matrix for the 2 x 2 table,
and simulated no-effect data for the false-alarm rates.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from scipy.stats import binomtest
from sklearn.datasets import load_digits, load_wine
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import confusion_matrix
from sklearn.model_selection import cross_val_predict
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from logitscope import LogitFrame
from logitscope.alignment import align_frames
from logitscope.analysis import (
    FLIP_CELLS,
    compare_checkpoints,
    flip_table,
    holm_adjust,
    per_class_accuracy_change,
    rank_forgetting,
)
from logitscope.checkpoints import compare_frames, forgetting_across
from logitscope.errors import ClassNameError, InputTypeError, LabelError, ParameterError, ShapeError

CELLARS = ["cellar north", "cellar east", "cellar west"]


def _cell_loop(pa: int, pb: int, y: int) -> str:
    """The flip-table cell of one sample, from the definition."""
    if pa == y and pb == y:
        return "right_both"
    if pa != y and pb == y:
        return "fixed"
    if pa == y and pb != y:
        return "broken"
    return "wrong_same" if pa == pb else "wrong_different"


@pytest.fixture(scope="module")
def wine_checkpoints():
    # two "checkpoints" of a wine-cellar sorting model: weak and strong regularisation, out-of-fold logits
    x, y = load_wine(return_X_y=True)
    weak = make_pipeline(StandardScaler(), LogisticRegression(C=0.003, max_iter=2000))
    strong = make_pipeline(StandardScaler(), LogisticRegression(C=1.0, max_iter=2000))
    za = cross_val_predict(weak, x, y, cv=5, method="decision_function")
    zb = cross_val_predict(strong, x, y, cv=5, method="decision_function")
    return za, zb, y


def _random_predictions(rng, n=600, k=6):
    y = rng.integers(0, k, n)
    pa = np.where(rng.random(n) < 0.6, y, rng.integers(0, k, n))
    pb = np.where(rng.random(n) < 0.7, y, np.where(rng.random(n) < 0.5, pa, rng.integers(0, k, n)))
    return pa, pb, y


# --------------------------------------------------------------------------- flip table


def test_flip_table_matches_a_per_sample_loop(rng):
    pa, pb, y = _random_predictions(rng)
    t = flip_table(pa, pb, y)
    expected = {c: [] for c in FLIP_CELLS}
    for i in range(y.size):  # reference: each sample sorted by the definition, one at a time
        expected[_cell_loop(pa[i], pb[i], y[i])].append(i)
    for cell in FLIP_CELLS:
        assert t.rows(cell).tolist() == expected[cell]
        assert t.count(cell) == len(expected[cell])
    assert all(t.count(c) > 0 for c in FLIP_CELLS)  # every cell exercised
    assert [FLIP_CELLS[c] for c in t.cells] == [_cell_loop(a, b, t_) for a, b, t_ in zip(pa, pb, y, strict=True)]
    df = t.to_frame()
    assert df.index.tolist() == list(FLIP_CELLS) and df["count"].sum() == y.size
    assert df["share"].sum() == pytest.approx(1.0)
    # McNemar's 2 x 2 table against scikit-learn's confusion matrix of (A right, B right)
    ref = confusion_matrix(pa == y, pb == y, labels=[True, False])
    np.testing.assert_array_equal(t.contingency, ref)
    # exact McNemar: two-sided binomial test of the discordant split at 1/2 (scipy.stats.binomtest)
    b, c = t.count("broken"), t.count("fixed")
    assert t.mcnemar_p == pytest.approx(binomtest(b, b + c, 0.5).pvalue, rel=1e-12)
    assert set(t.to_dict()["cells"]) == set(FLIP_CELLS)
    with pytest.raises(ParameterError, match="unknown flip-table cell"):
        t.rows("fixed_both")


def test_compare_checkpoints_carries_the_flip_table_and_per_class(wine_checkpoints):
    za, zb, y = wine_checkpoints
    c = compare_checkpoints(za, zb, y)
    pa, pb = za.argmax(1), zb.argmax(1)  # reference: numpy argmax, the definition of a prediction
    assert c.flips is not None and c.per_class is not None
    for cell in FLIP_CELLS:
        want = [i for i in range(y.size) if _cell_loop(pa[i], pb[i], y[i]) == cell]
        assert c.flips.rows(cell).tolist() == want
    # the older fields say the same
    np.testing.assert_array_equal(c.fixed_rows, c.flips.fixed)
    assert c.only_a_right == c.flips.count("broken") and c.both_right == c.flips.count("right_both")
    assert c.accuracy_change == pytest.approx(np.mean(pb == y) - np.mean(pa == y))
    d = c.to_dict(CELLARS)
    json.dumps(d, allow_nan=False)  # JSON-ready
    assert [r["class"] for r in d["per_class"]] == CELLARS
    assert d["flips"]["cells"]["fixed"]["count"] == c.flips.count("fixed")


def test_without_labels_no_flip_table(wine_checkpoints):
    za, zb, _ = wine_checkpoints
    c = compare_checkpoints(za, zb)
    assert c.flips is None and c.per_class is None and c.accuracy_change is None
    json.dumps(c.to_dict(), allow_nan=False)


def test_flip_table_rejects_bad_input():
    with pytest.raises(ShapeError, match="length 3"):
        flip_table([0, 1], [0, 1, 1], [0, 1, 1])
    with pytest.raises(InputTypeError, match="integer class indices"):
        flip_table([0.5, 1.0], [0, 1], [0, 1])
    with pytest.raises(LabelError, match="negative at row 1"):
        flip_table([0, 1], [0, 1], [0, -1])


# --------------------------------------------------------------------------- McNemar and Holm on no-effect data


def test_mcnemar_holds_its_false_alarm_rate_on_no_effect_data():
    rng = np.random.default_rng(7)
    runs, n, alpha = 2000, 200, 0.05
    rejected = 0
    for _ in range(runs):
        # two equally good checkpoints: a sample is broken or fixed with the same chance (0.08 each)
        u = rng.random(n)
        pa = np.where(u < 0.08, 1, 0)  # A wrong on these ...
        pb = np.where((u >= 0.08) & (u < 0.16), 1, 0)  # ... B wrong on as many others
        rejected += flip_table(pa, pb, np.zeros(n, dtype=int)).mcnemar_p < alpha
    rate = rejected / runs
    # the exact test never exceeds alpha (up to 3 binomial standard errors of the simulation)
    assert rate <= alpha + 3 * np.sqrt(alpha * (1 - alpha) / runs)
    # and it is not vacuous: with a real difference (0.02 broken vs 0.14 fixed) it rejects most of the time
    power = 0
    for _ in range(200):
        u = rng.random(n)
        pa = np.where(u < 0.14, 1, 0)
        pb = np.where((u >= 0.14) & (u < 0.16), 1, 0)
        power += flip_table(pa, pb, np.zeros(n, dtype=int)).mcnemar_p < alpha
    assert power / 200 > 0.8


def _holm_loop(p: np.ndarray, alpha: float) -> set[int]:
    """Holm (1979) as stated: sort, reject H_(i) while p_(i) <= alpha / (m - i + 1), stop at the first failure."""
    order = sorted(range(p.size), key=lambda i: p[i])
    m, out = p.size, set()
    for step, i in enumerate(order, start=1):
        if p[i] <= alpha / (m - step + 1):
            out.add(i)
        else:
            break
    return out


def test_holm_adjustment_matches_the_step_down_procedure(rng):
    for _ in range(200):
        p = rng.random(rng.integers(1, 12)) ** 3
        adj = holm_adjust(p)
        for alpha in (0.01, 0.05, 0.2):
            assert {i for i in range(p.size) if adj[i] <= alpha} == _holm_loop(p, alpha)
    assert np.isnan(holm_adjust([np.nan, 0.2])[0]) and holm_adjust([np.nan, 0.2])[1] == 0.2


def test_per_class_change_matches_a_loop_and_holm_keeps_the_family_wise_rate(rng):
    pa, pb, y = _random_predictions(rng, n=900, k=8)
    c = per_class_accuracy_change(pa, pb, y, n_classes=9)  # class 8 has no samples
    for k in range(8):
        rows = [i for i in range(y.size) if y[i] == k]
        assert c.support[k] == len(rows)
        assert c.accuracy_a[k] == pytest.approx(np.mean([pa[i] == k for i in rows]))
        assert c.accuracy_b[k] == pytest.approx(np.mean([pb[i] == k for i in rows]))
        fixed = sum(pa[i] != k and pb[i] == k for i in rows)
        broken = sum(pa[i] == k and pb[i] != k for i in rows)
        assert (c.fixed[k], c.broken[k]) == (fixed, broken)
        assert c.mcnemar_p[k] == pytest.approx(binomtest(broken, fixed + broken, 0.5).pvalue, rel=1e-12)
    assert c.support[8] == 0 and np.isnan(c.accuracy_a[8]) and np.isnan(c.mcnemar_p_holm[8])
    df = c.to_frame([f"desk {i}" for i in range(9)])
    assert df.loc["desk 3", "support"] == c.support[3]
    json.dumps(c.to_dict(), allow_nan=False)
    # ten classes, no change anywhere: Holm keeps the chance of any false alarm at alpha, raw p-values do not
    runs, alpha, k = 600, 0.05, 10
    any_holm = any_raw = 0
    for _ in range(runs):
        y = np.repeat(np.arange(k), 60)
        u = rng.random(y.size)
        pa = np.where(u < 0.1, (y + 1) % k, y)
        pb = np.where((u >= 0.1) & (u < 0.2), (y + 1) % k, y)
        cc = per_class_accuracy_change(pa, pb, y)
        any_holm += np.nanmin(cc.mcnemar_p_holm) < alpha
        any_raw += np.nanmin(cc.mcnemar_p) < alpha
    assert any_holm / runs <= alpha + 3 * np.sqrt(alpha * (1 - alpha) / runs)
    assert any_raw / runs > any_holm / runs


# --------------------------------------------------------------------------- forgetting events


def _forgetting_loop(correct: np.ndarray):
    e, n = correct.shape
    out = []
    for i in range(n):
        seq = [bool(v) for v in correct[:, i]]
        forgotten = sum(1 for t in range(e - 1) if seq[t] and not seq[t + 1])
        learned = sum(1 for t in range(e - 1) if not seq[t] and seq[t + 1])
        first = seq.index(True) if any(seq) else -1
        score = e if first < 0 else forgotten  # never learned: forgotten at every presentation (released code)
        out.append((forgotten, learned, first, sum(seq), score))
    return out


def test_forgetting_events_match_a_per_sample_loop(rng):
    e, n = 9, 400
    p_right = rng.random(n)
    correct = rng.random((e, n)) < p_right  # samples of every difficulty
    correct[:, :15] = False  # some never learned
    correct[:, 15:30] = True  # some never forgotten
    r = rank_forgetting(correct)
    ref = _forgetting_loop(correct)
    assert r.forgetting_events.tolist() == [x[0] for x in ref]
    assert r.learning_events.tolist() == [x[1] for x in ref]
    assert r.first_learned.tolist() == [x[2] for x in ref]
    assert r.n_correct.tolist() == [x[3] for x in ref]
    assert r.score.tolist() == [x[4] for x in ref]
    # order: most forgotten first, never-learned above every learned sample; ties: fewer right, then row
    want = sorted(range(n), key=lambda i: (-ref[i][4], ref[i][3], i))
    assert r.order.tolist() == want
    assert set(r.order[:15].tolist()) == set(range(15)) and r.never_learned[:15].all()
    assert r.unforgettable[15:30].all() and not r.unforgettable[:15].any()
    assert r.to_frame()["forgetting_events"].tolist() == [ref[i][0] for i in want]


def test_forgetting_rejects_bad_input():
    with pytest.raises(ShapeError, match="at least 2 checkpoints"):
        rank_forgetting([[True, False]])
    with pytest.raises(InputTypeError, match="booleans"):
        rank_forgetting([[0, 2], [1, 0]])
    with pytest.raises(LabelError, match="need labels"):
        forgetting_across([LogitFrame(np.eye(2)), LogitFrame(np.eye(2))])


# --------------------------------------------------------------------------- frames aligned by id


def _shuffled(frame: LogitFrame, rng) -> LogitFrame:
    return frame.subset(rng.permutation(frame.n_samples))


def test_compare_frames_in_any_order_equals_the_aligned_arrays(wine_checkpoints, rng):
    za, zb, y = wine_checkpoints
    ids = np.array([f"bottle-{i:03d}" for i in range(y.size)])
    a = LogitFrame(za, labels=y, classes=CELLARS, ids=ids)
    b = _shuffled(LogitFrame(zb, labels=y, classes=CELLARS, ids=ids), rng)
    c = compare_frames(a, b)
    ref = compare_checkpoints(za, zb, y)
    assert c.flips.counts == ref.flips.counts and c.comparison.mcnemar_p == ref.mcnemar_p
    by_id = {ids[i]: (za[i].argmax(), zb[i].argmax(), y[i]) for i in range(y.size)}  # reference: lookup by id
    for cell in FLIP_CELLS:
        assert all(_cell_loop(*by_id[i]) == cell for i in c.ids_of(cell))
    assert c.per_class_frame().index.tolist() == CELLARS
    d = c.to_dict()
    json.dumps(d, allow_nan=False)
    assert d["n_only_in_a"] == 0 and d["labelled"] and d["names"] == ["A", "B"]


def test_missing_ids_are_named_or_dropped(wine_checkpoints, rng):
    za, zb, y = wine_checkpoints
    a = LogitFrame(za, labels=y, classes=CELLARS)
    b = LogitFrame(zb, labels=y, classes=CELLARS).subset(np.arange(5, y.size))
    with pytest.raises(ShapeError, match=r"5 ids of A are not in B \(first 0, 1, 2, 3, 4\).*missing='drop'"):
        compare_frames(a, b)
    c = compare_frames(a, _shuffled(b, rng), missing="drop")
    assert c.only_in_a.tolist() == [0, 1, 2, 3, 4] and c.only_in_b.size == 0
    assert c.comparison.n_samples == y.size - 5
    np.testing.assert_array_equal(c.ids, np.arange(5, y.size))
    assert c.flips.counts == compare_checkpoints(za[5:], zb[5:], y[5:]).flips.counts
    with pytest.raises(ShapeError, match=r"share no sample id.*different kinds"):
        compare_frames(a, LogitFrame(zb, labels=y, classes=CELLARS, ids=[str(i) for i in range(y.size)]))


def test_alignment_refuses_other_classes_and_other_labels(wine_checkpoints):
    za, zb, y = wine_checkpoints
    a = LogitFrame(za, labels=y, classes=CELLARS)
    with pytest.raises(ClassNameError, match="same names in another order"):
        compare_frames(a, LogitFrame(zb, labels=y, classes=CELLARS[::-1]))
    y2 = y.copy()
    y2[[3, 8]] = (y2[[3, 8]] + 1) % 3
    with pytest.raises(LabelError, match="different labels to 2 shared ids"):
        compare_frames(a, LogitFrame(zb, labels=y2, classes=CELLARS))
    # one frame unlabelled: the other's labels are used
    c = compare_frames(LogitFrame(za, classes=CELLARS), LogitFrame(zb, labels=y, classes=CELLARS))
    assert c.flips.counts == compare_checkpoints(za, zb, y).flips.counts
    assert compare_frames(LogitFrame(za), LogitFrame(zb)).flips is None
    with pytest.raises(ParameterError, match="at least two"):
        align_frames(a)
    with pytest.raises(InputTypeError, match="argument 1 is a ndarray"):
        align_frames(a, zb)


def test_aligned_frames_keep_a_frame_already_in_order(wine_checkpoints):
    za, zb, y = wine_checkpoints
    a, b = LogitFrame(za, labels=y), LogitFrame(zb, labels=y)
    pair = align_frames(a, b)
    assert pair.frames[0] is a and pair.frames[1] is b and len(pair) == 2 and pair.n_samples == y.size


def test_forgetting_across_epochs_of_a_small_torch_model():
    # a mail-room digit reader trained for a few epochs on scikit-learn's digits; the loader shuffles and
    # yields ids, so every epoch's frame comes back in another order and is lined up by id
    torch = pytest.importorskip("torch")
    from torch.utils.data import DataLoader, TensorDataset

    x, y = load_digits(return_X_y=True)
    n, epochs = 300, 4
    x = torch.tensor(x[:n] / 16.0, dtype=torch.float32)
    y = torch.tensor(y[:n])
    data = TensorDataset(x, y, torch.arange(n))
    torch.manual_seed(0)
    net = torch.nn.Sequential(torch.nn.Linear(64, 16), torch.nn.ReLU(), torch.nn.Linear(16, 10))
    opt = torch.optim.SGD(net.parameters(), lr=0.2)
    frames = []
    for _ in range(epochs):
        for xb, yb, _ids in DataLoader(data, batch_size=30, shuffle=True):
            opt.zero_grad()
            torch.nn.functional.cross_entropy(net(xb), yb).backward()
            opt.step()
        frames.append(LogitFrame.from_torch(net, DataLoader(data, batch_size=64, shuffle=True), progress=False))
    f = forgetting_across(frames)
    # reference: each epoch's correctness looked up by id, then the per-sample loop
    correct = np.zeros((epochs, n), dtype=bool)
    order_ids = f.ids.tolist()
    for e, fr in enumerate(frames):
        right = dict(zip(fr.ids.tolist(), (fr.logits.argmax(1) == fr.labels).tolist(), strict=True))
        correct[e] = [right[i] for i in order_ids]
    ref = _forgetting_loop(correct)
    assert f.ranking.forgetting_events.tolist() == [r[0] for r in ref]
    assert f.ranking.forgetting_events.sum() > 0  # the model did forget some samples along the way
    top = f.to_frame().head(5)
    assert top.index.tolist() == f.top_ids(5).tolist() and "label_class" in top.columns


def test_three_frames_name_the_odd_one_out():
    z = np.eye(3)
    a = LogitFrame(z, labels=[0, 1, 2], ids=["P-1", "P-2", "P-3"])
    b = LogitFrame(z[::-1].copy(), labels=[2, 1, 0], ids=["P-3", "P-2", "P-1"])
    c = LogitFrame(np.eye(4)[:, :3], labels=[0, 1, 2, 0], ids=["P-1", "P-2", "P-3", "P-9"])
    with pytest.raises(ShapeError, match=r"1 ids of C are not in A \(first 'P-9'\)"):
        align_frames(a, b, c)
    trio = align_frames(a, b, c, missing="drop", names=["epoch 1", "epoch 2", "epoch 3"])
    assert trio.dropped[2].tolist() == ["P-9"] and [f.ids.tolist() for f in trio.frames] == [["P-1", "P-2", "P-3"]] * 3
    np.testing.assert_array_equal(trio.frames[1].logits, z)  # b's rows put back in a's order
