"""The chunked path (Zarr store, Parquet folder, memmaps) against the in-memory path on the same data.

The in-memory path is itself checked against scipy / scikit-learn / torch in the other test files; here
every chunked number must equal it (counts exactly, floats to 1e-9 relative, the fitted temperature to the
fit's tolerance). A few numbers are also checked against scikit-learn directly. Data: scikit-learn's
digits (an open dataset it ships) scored by a logistic regression, and simulated logits with many ties.
"""

import json

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_digits
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import confusion_matrix as sk_confusion_matrix
from sklearn.metrics import log_loss

from logitscope import LogitFrame
from logitscope import analysis as an
from logitscope import chunked as ck
from logitscope.cli import main
from logitscope.errors import ClassNameError, FileFormatError, LabelError, NonFiniteError, ShapeError

RTOL = 1e-9


@pytest.fixture(scope="module")
def digits_frame():
    x, y = load_digits(return_X_y=True)
    half = len(y) // 2  # fit on one half, score the other: out-of-sample logits with real mistakes
    x = x / 16.0  # pixel values 0..16 scaled to [0, 1]: the solver converges in few steps
    model = LogisticRegression(max_iter=500).fit(x[:half], y[:half])
    z = model.decision_function(x[half:]).astype(np.float32)
    return LogitFrame(z, labels=y[half:], classes=[f"digit {d}" for d in range(10)])


@pytest.fixture(scope="module")
def tied_frame():
    # whole-number logits: confidences tie often, between right and wrong samples too
    rng = np.random.default_rng(7)
    n, k = 3000, 4
    y = rng.integers(0, k, n)
    z = rng.integers(-2, 3, size=(n, k)).astype(np.float64)
    z[np.arange(n), y] += rng.integers(0, 2, n)
    return LogitFrame(z, labels=y, ids=[f"ticket-{i}" for i in range(n)], classes=["billing", "login", "outage", "x"])


def fitted_reference(frame, chunked, **options):
    """The in-memory summary at the temperature the chunked fit found, with the in-memory fit's own numbers.

    The two fits agree to their tolerance, not to the last bit, and where confidences of right and wrong
    samples nearly tie, the last bit decides their order: so the other numbers are compared at one temperature.
    """
    fit = frame.fit_temperature()
    assert chunked["fitted_temperature"] == pytest.approx(fit.temperature, rel=1e-5)  # the fit's rtol
    ref = frame.summary(temperature=chunked["temperature"], **options)
    ref["fitted_temperature"], ref["nll_before_fit"] = chunked["fitted_temperature"], fit.nll_before
    return {key: ref[key] for key in chunked}


def _store(frame, tmp_path, name="batch.zarr", chunk_rows=128):
    path = tmp_path / name
    ck.write_zarr(frame, path, chunk_rows=chunk_rows)
    return ck.open_chunked(path)


def aurc_rights_ordered(conf, correct):
    """AURC with samples tied to a wrong sample grouped (as logitscope.analysis.aurc) and right samples tied only
    among themselves counted one by one: the rule ExactOrder.aurc documents. Written from the definition
    (Geifman, Uziel and El-Yaniv 2019: the mean over samples of the selective risk at each one's threshold)."""
    conf, correct = np.asarray(conf, dtype=np.float64), np.asarray(correct, dtype=bool)
    n = conf.size
    total = 0.0
    wrong_values = set(conf[~correct].tolist())
    for v in np.unique(conf):
        at = conf == v
        accepted_above = int(np.sum(conf > v))
        errors = int(np.sum(~correct & (conf >= v)))
        t = int(at.sum())
        if v in wrong_values:
            total += t * errors / (accepted_above + t)
        else:
            total += sum(errors / (accepted_above + j) for j in range(1, t + 1))
    return total / n


def with_chunked_aurc(frame, summary):
    """The in-memory summary with its AURC by the rule of ExactOrder.aurc (see aurc_rights_ordered)."""
    s = frame.sample_scores(summary["temperature"])
    return {**summary, "aurc": aurc_rights_ordered(s.confidence, s.correct)} if "aurc" in summary else summary


def assert_summary_equal(chunked, memory):
    assert set(chunked) == set(memory)
    for key, value in memory.items():
        got = chunked[key]
        if key == "threshold":
            for k2, v2 in value.items():
                if isinstance(v2, float):
                    assert got[k2] == pytest.approx(v2, rel=RTOL, abs=1e-15), k2
                elif isinstance(v2, list):
                    np.testing.assert_allclose(got[k2], v2, rtol=RTOL)
                else:
                    assert got[k2] == v2, k2
        elif key == "top_k_accuracy":
            assert got == value  # counts over N: exact
        elif key in ("fitted_temperature", "temperature"):
            assert got == pytest.approx(value, rel=1e-5)  # the fit's rtol
        elif isinstance(value, float):
            assert got == pytest.approx(value, rel=RTOL, abs=1e-15), key
        else:
            assert got == value, key


# --------------------------------------------------------------------------- the store


def test_zarr_round_trip_keeps_everything(tied_frame, tmp_path):
    cf = _store(tied_frame, tmp_path, chunk_rows=500)
    assert cf.n_chunks == 6 and cf.classes == tied_frame.classes
    logits, labels, ids = ck.analysis.compute(cf.logits, cf.labels, cf.ids)
    np.testing.assert_array_equal(logits, tied_frame.logits)
    assert logits.dtype == tied_frame.logits.dtype
    np.testing.assert_array_equal(labels, tied_frame.labels)
    assert [str(i) for i in ids] == list(tied_frame.ids)


def test_appender_commits_whole_batches_and_resumes(digits_frame, tmp_path):
    path = tmp_path / "predicting.zarr"
    z, y = digits_frame.logits, digits_frame.labels
    with ck.ZarrAppender(path, digits_frame.classes, chunk_rows=100) as out:
        out.append(z[:250], labels=y[:250])
        with pytest.raises(NonFiniteError, match="row 3"):
            bad = z[250:260].copy()
            bad[3, 1] = np.nan
            out.append(bad, labels=y[250:260])
        with pytest.raises(LabelError, match=r"\[0, 10\)"):
            out.append(z[250:260], labels=np.full(10, 12))
        with pytest.raises(ShapeError, match="10 classes"):
            out.append(z[250:260, :4], labels=y[250:260])
        assert out.rows == 250  # the rejected batches left nothing behind
    with ck.ZarrAppender(path, digits_frame.classes) as out:  # a later run appends after the committed rows
        out.append(z[250:], labels=y[250:])
    cf = ck.open_chunked(path)
    assert cf.n_samples == digits_frame.n_samples
    np.testing.assert_array_equal(ck.analysis.compute(cf.logits)[0], z)
    assert_summary_equal(cf.summary(), digits_frame.summary())
    with pytest.raises(ClassNameError, match="holds classes"):
        ck.ZarrAppender(path, [f"c{i}" for i in range(10)])


def test_a_batch_written_but_not_committed_is_not_read(digits_frame, tmp_path):
    import zarr

    path = tmp_path / "crashed.zarr"
    out = ck.ZarrAppender(path, digits_frame.classes, chunk_rows=64)
    out.append(digits_frame.logits[:300], labels=digits_frame.labels[:300])
    # a writer that died after writing rows 300..400 but before committing them
    group = zarr.open_group(path, mode="r+")
    for name, values in (("logits", digits_frame.logits[300:400]), ("labels", digits_frame.labels[300:400])):
        group[name].resize((400, *group[name].shape[1:]))
        group[name][300:400] = values
    assert ck.open_chunked(path).n_samples == 300


def test_not_a_store(tmp_path):
    (tmp_path / "empty.zarr").mkdir()
    with pytest.raises(FileFormatError, match=r"not a readable Zarr group|without logitscope attributes"):
        ck.open_chunked(tmp_path / "empty.zarr")
    with pytest.raises(FileFormatError, match="no such"):
        ck.open_chunked(tmp_path / "missing.zarr")


# --------------------------------------------------------------------------- numbers against the in-memory path


@pytest.mark.parametrize("fixture", ["digits_frame", "tied_frame"])
def test_summary_equals_the_in_memory_summary(request, fixture, tmp_path):
    frame = request.getfixturevalue(fixture)
    cf = _store(frame, tmp_path)

    def reference(summary):  # the in-memory summary, with the AURC of the chunked rule for tied right samples
        s = frame.sample_scores(summary["temperature"])
        rule = aurc_rights_ordered(s.confidence, s.correct)
        assert rule >= summary["aurc"] - 1e-12  # an upper bound of the grouped AURC, equal without such ties
        if fixture == "digits_frame":
            assert rule == pytest.approx(summary["aurc"], rel=1e-12)
        return {**summary, "aurc": rule}

    assert_summary_equal(cf.summary(), reference(frame.summary()))
    assert_summary_equal(cf.summary(temperature=0.7, n_bins=10), reference(frame.summary(temperature=0.7, n_bins=10)))
    got = cf.summary(fit_temperature=True, target_accuracy=0.9)
    assert_summary_equal(got, reference(fitted_reference(frame, got, target_accuracy=0.9)))
    impossible = cf.summary(target_accuracy=1.0)["threshold"]
    assert impossible == frame.summary(target_accuracy=1.0)["threshold"]


def test_summary_numbers_against_scikit_learn(digits_frame, tmp_path):
    s = _store(digits_frame, tmp_path).summary()
    p = digits_frame.probabilities().astype(np.float64)
    # scikit-learn's log_loss renormalises float32 rows; the reference is float64 probabilities
    assert s["nll"] == pytest.approx(log_loss(digits_frame.labels, p / p.sum(axis=1, keepdims=True)), rel=1e-6)
    assert s["accuracy"] == pytest.approx(np.mean(digits_frame.logits.argmax(axis=1) == digits_frame.labels))


def test_unlabelled_store(digits_frame, tmp_path):
    frame = digits_frame.with_labels(None)
    cf = _store(frame, tmp_path)
    assert not cf.has_labels
    assert_summary_equal(cf.summary(), frame.summary())
    with pytest.raises(LabelError, match="needs labels"):
        cf.fit_temperature()


def test_temperature_fit_on_a_large_batch_uses_the_same_warm_start(tmp_path):
    # above 8 x 32768 rows the fit starts from a subsample: the same seeded rows as the in-memory fit
    rng = np.random.default_rng(11)
    n, k = 300_000, 3
    y = rng.integers(0, k, n)
    z = (rng.normal(size=(n, k)) * 3).astype(np.float32)
    z[np.arange(n), y] += 2.0
    frame = LogitFrame(z, labels=y)
    cf = _store(frame, tmp_path, chunk_rows=40_000)
    a, b = frame.fit_temperature(), cf.fit_temperature()
    assert b.temperature == pytest.approx(a.temperature, rel=1e-5)
    assert b.nll_before == pytest.approx(a.nll_before, rel=RTOL)
    assert b.nll_after == pytest.approx(a.nll_after, rel=RTOL)
    assert b.iterations == a.iterations and b.converged == a.converged


@pytest.mark.parametrize("fixture", ["digits_frame", "tied_frame"])
def test_thresholds_and_curves_equal_the_in_memory_ones(request, fixture, tmp_path):
    frame = request.getfixturevalue(fixture)
    cf = _store(frame, tmp_path)
    t = 1.3
    s = frame.sample_scores(t)
    order = ck.exact_order(cf, t)
    assert order.aurc() == pytest.approx(aurc_rights_ordered(s.confidence, s.correct), rel=RTOL)
    if fixture == "digits_frame":  # continuous confidences: no right-only ties, the grouped AURC itself
        assert order.aurc() == pytest.approx(an.aurc(s.confidence, s.correct), rel=RTOL)
    for target in (0.5, 0.8, 0.95, 0.999):
        got = ck.threshold_for_accuracy(cf, target, t, order=order)
        assert got == an.threshold_for_accuracy(s.confidence, s.correct, target)
    for costs in ((5.0, 1.0), (1.0, 0.0), (0.0, 1.0), (20.0, 1.0)):
        got = ck.threshold_for_cost(cf, *costs, temperature=t, order=order)
        ref = an.threshold_for_cost(s.confidence, s.correct, *costs)
        assert got.threshold == ref.threshold and got.n_accepted == ref.n_accepted
        assert got.expected_cost == pytest.approx(ref.expected_cost, rel=RTOL)
    thr = float(np.median(s.confidence))
    assert ck.evaluate_threshold(cf, thr, t) == an.evaluate_threshold(s.confidence, s.correct, thr)
    rc = ck.risk_coverage_curve(cf, t)
    assert isinstance(rc, an.RiskCoverage) and rc.resolution == 2.0**-12
    for i in np.linspace(0, len(rc.threshold) - 1, 25).astype(int):
        ref = an.evaluate_threshold(s.confidence, s.correct, float(rc.threshold[i]))
        assert (rc.n_accepted[i], rc.n_accepted[i] - rc.n_errors[i]) == (
            ref.n_accepted,
            round(ref.accuracy * ref.n_accepted),
        )


def test_counts_bins_and_scores_equal_the_in_memory_ones(digits_frame, tmp_path):
    cf = _store(digits_frame, tmp_path)
    s = digits_frame.sample_scores()
    cm = ck.confusion_matrix(cf)
    np.testing.assert_array_equal(cm, sk_confusion_matrix(digits_frame.labels, s.predicted, labels=range(10)))
    with an.assume_valid():
        np.testing.assert_array_equal(
            ck.top_k_confusion(cf, 3), an.top_k_confusion(digits_frame.logits, digits_frame.labels, 3)
        )
    counts = ck.class_counts(cf)
    np.testing.assert_array_equal(counts["labels"], np.bincount(digits_frame.labels, minlength=10))
    np.testing.assert_array_equal(counts["predicted"], np.bincount(s.predicted, minlength=10))
    got, ref = ck.reliability_bins(cf, n_bins=12), an.reliability_bins(s.confidence, s.correct, 12)
    np.testing.assert_array_equal(got.count, ref.count)
    np.testing.assert_allclose(got.accuracy, ref.accuracy, rtol=RTOL)
    np.testing.assert_allclose(got.confidence, ref.confidence, rtol=RTOL)
    np.testing.assert_array_equal(np.asarray(got.bin_of), ref.bin_of)
    lazy = ck.sample_scores(cf, 0.8)
    eager = digits_frame.sample_scores(0.8)
    for name, value in eager.to_dict().items():
        np.testing.assert_allclose(np.asarray(getattr(lazy, name)), value, rtol=RTOL, atol=1e-15, err_msg=name)


@pytest.mark.parametrize("method", ["confident_learning", "given_probability", "label_margin"])
def test_doubtful_label_candidates_merged_across_chunks(digits_frame, tmp_path, method):
    cf = _store(digits_frame, tmp_path, chunk_rows=90)
    ref = an.rank_doubtful_labels(digits_frame.logits, digits_frame.labels, method=method).top(40)
    got = ck.rank_doubtful_labels(cf, method=method, top=40)
    np.testing.assert_array_equal(got.index, ref.index)
    np.testing.assert_allclose(got.score, ref.score, rtol=RTOL)
    np.testing.assert_array_equal(got.suggested, ref.suggested)


# --------------------------------------------------------------------------- other sources and bad input


def test_parquet_folder(tied_frame, tmp_path):
    folder = tmp_path / "batches"
    folder.mkdir()
    for i, start in enumerate(range(0, tied_frame.n_samples, 700)):  # one file per batch, in the io.py layout
        tied_frame.subset(np.arange(start, min(start + 700, tied_frame.n_samples))).write(
            folder / f"part-{i:03d}.parquet"
        )
    cf = ck.open_chunked(folder)
    assert cf.n_chunks == 5 and cf.classes == tied_frame.classes
    assert_summary_equal(
        cf.summary(target_accuracy=0.6), with_chunked_aurc(tied_frame, tied_frame.summary(target_accuracy=0.6))
    )


def test_memmaps(digits_frame, tmp_path):
    np.save(tmp_path / "logits.npy", np.asarray(digits_frame.logits))
    np.save(tmp_path / "labels.npy", np.asarray(digits_frame.labels))
    cf = ck.ChunkedFrame.from_memmap(
        np.load(tmp_path / "logits.npy", mmap_mode="r"), labels=tmp_path / "labels.npy", chunk_rows=77
    )
    assert cf.n_chunks == int(np.ceil(digits_frame.n_samples / 77))
    got = cf.summary(fit_temperature=True)
    assert_summary_equal(got, fitted_reference(digits_frame, got))


def test_bad_rows_are_named_by_their_global_position(digits_frame, tmp_path):
    z = np.array(digits_frame.logits)
    z[613, 4] = np.inf
    np.save(tmp_path / "logits.npy", z)
    np.save(tmp_path / "labels.npy", digits_frame.labels)
    cf = ck.ChunkedFrame.from_memmap(tmp_path / "logits.npy", labels=tmp_path / "labels.npy", chunk_rows=100)
    with pytest.raises(NonFiniteError, match=r"rows 600 to 699: row 613\b"):
        cf.summary()
    with pytest.raises(NonFiniteError, match=r"row 613\b"):
        cf.fit_temperature()
    y = np.array(digits_frame.labels)
    y[250] = 10
    np.save(tmp_path / "logits.npy", np.asarray(digits_frame.logits))
    np.save(tmp_path / "labels.npy", y)
    cf = ck.ChunkedFrame.from_memmap(tmp_path / "logits.npy", labels=tmp_path / "labels.npy", chunk_rows=100)
    with pytest.raises(LabelError, match=r"row 250\b"):
        cf.summary()


def test_cli_summary_of_a_store(digits_frame, tmp_path, capsys, monkeypatch):
    monkeypatch.delenv("LOGITSCOPE_SCHEDULER", raising=False)
    path = tmp_path / "mailroom.zarr"
    ck.write_zarr(digits_frame, path, chunk_rows=200)
    assert main(["summary", str(path), "--fit-temperature", "--target-accuracy", "0.95", "--json"]) == 0
    got = json.loads(capsys.readouterr().out)
    assert_summary_equal(got, json.loads(json.dumps(fitted_reference(digits_frame, got, target_accuracy=0.95))))
    assert main(["summary", str(tmp_path / "nothing.zarr")]) == 2
    assert "no such" in capsys.readouterr().err


def test_write_zarr_replaces_a_store_only_when_complete(digits_frame, tied_frame, tmp_path):
    path = tmp_path / "batch.zarr"
    ck.write_zarr(digits_frame, path)
    ck.write_zarr(tied_frame, path)
    assert ck.open_chunked(path).classes == tied_frame.classes
    (tmp_path / "notes.zarr").mkdir()
    (tmp_path / "notes.zarr" / "mine.txt").write_text("keep me")
    with pytest.raises(FileFormatError, match="not a Zarr store"):
        ck.write_zarr(digits_frame, tmp_path / "notes.zarr")
    assert (tmp_path / "notes.zarr" / "mine.txt").read_text() == "keep me"
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]  # no temporary directories left


def test_meta_is_not_lost_silently(digits_frame, tmp_path):
    frame = digits_frame.with_meta(pd.DataFrame({"tray": np.arange(digits_frame.n_samples) % 3}))
    with pytest.raises(FileFormatError, match="metadata"):
        ck.write_zarr(frame, tmp_path / "with_meta.zarr")


def test_frame_write_and_read_a_zarr_store(tied_frame, tmp_path):
    tied_frame.write(tmp_path / "tickets.zarr")
    back = LogitFrame.read(tmp_path / "tickets.zarr")
    np.testing.assert_array_equal(back.logits, tied_frame.logits)
    np.testing.assert_array_equal(back.labels, tied_frame.labels)
    assert back.classes == tied_frame.classes and list(back.ids) == list(tied_frame.ids)


def test_sub_blocks_inside_a_chunk_give_the_same_numbers(tied_frame, tmp_path, monkeypatch):
    # each chunk task scores its rows SUB_ROWS at a time; small sub-blocks must not change a number
    cf = _store(tied_frame, tmp_path, chunk_rows=1000)
    monkeypatch.setattr(ck.analysis, "SUB_ROWS", 70)
    assert_summary_equal(
        cf.summary(target_accuracy=0.7), with_chunked_aurc(tied_frame, tied_frame.summary(target_accuracy=0.7))
    )
    got = ck.rank_doubtful_labels(cf, top=30)
    ref = an.rank_doubtful_labels(tied_frame.logits, tied_frame.labels).top(30)
    np.testing.assert_array_equal(got.index, ref.index)
