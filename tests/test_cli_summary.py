"""The command line: `logitscope summary` numbers against scikit-learn / scipy / torchmetrics, errors, demo data."""

from __future__ import annotations

import json
import subprocess
import sys
import time

import numpy as np
import pytest
from scipy import optimize, special, stats
from scipy.stats import binomtest
from sklearn.metrics import accuracy_score, log_loss, top_k_accuracy_score

from logitscope import LogitFrame, cli

LABELLED_KEYS = {
    "n_samples", "n_labelled", "n_classes", "accuracy", "top_k_accuracy", "nll", "brier", "ece", "mce",
    "mean_confidence", "mean_entropy", "aurc", "temperature",
}  # fmt: skip


@pytest.fixture
def batch(tmp_path, make_logits):
    z, y = make_logits(n=1500, k=7, scale=3.0, true_temperature=1.8)
    path = tmp_path / "batch.npz"
    LogitFrame(z, labels=y, classes=[f"desk {i}" for i in range(7)]).write(path)
    return path, z, y


def _run(capsys, *argv: str) -> tuple[int, str, str]:
    code = cli.main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def _torchmetrics_ce(p: np.ndarray, y: np.ndarray, norm: str) -> float:
    torch = pytest.importorskip("torch")
    tm = pytest.importorskip("torchmetrics.functional.classification")
    assert np.all(
        p.max(axis=1).astype(np.float32) < 1.0
    )  # torchmetrics' float32 cast keeps the bins (see test_calibration)
    value = tm.multiclass_calibration_error(
        torch.from_numpy(p), torch.from_numpy(y), num_classes=p.shape[1], n_bins=15, norm=norm
    )
    return float(value)


def _aurc_loop(conf: np.ndarray, ok: np.ndarray) -> float:
    order = sorted(range(conf.size), key=lambda i: (-conf[i], bool(ok[i])))
    errors, total = 0, 0.0
    for n, i in enumerate(order, start=1):
        errors += not ok[i]
        total += errors / n
    return total / conf.size  # (1/N) sum_n errors among the n most confident / n (Geifman and El-Yaniv)


def _check_numbers(s: dict, z: np.ndarray, y: np.ndarray, t: float) -> None:
    k = z.shape[1]
    p = special.softmax(z / t, axis=1)
    assert s["n_samples"] == z.shape[0] and s["n_classes"] == k
    assert s["accuracy"] == pytest.approx(accuracy_score(y, z.argmax(axis=1)), abs=1e-15)  # sklearn
    assert s["top_k_accuracy"] == pytest.approx(
        {str(kk): top_k_accuracy_score(y, z, k=kk, labels=np.arange(k)) for kk in (2, 3, 5)}, abs=1e-15
    )  # sklearn, k in (2, 3, 5) below K
    assert s["nll"] == pytest.approx(log_loss(y, p, labels=np.arange(k)), rel=1e-12)  # sklearn
    assert s["brier"] == pytest.approx(np.mean(np.sum((p - np.eye(k)[y]) ** 2, axis=1)), rel=1e-12)  # Brier 1950
    assert s["ece"] == pytest.approx(_torchmetrics_ce(p, y, "l1"), abs=1e-6)  # torchmetrics, float32 inside
    assert s["mce"] == pytest.approx(_torchmetrics_ce(p, y, "max"), abs=1e-6)
    assert s["mean_confidence"] == pytest.approx(np.mean(p.max(axis=1)), rel=1e-12)
    assert s["mean_entropy"] == pytest.approx(np.mean(stats.entropy(p, axis=1)), rel=1e-12)  # scipy
    assert s["aurc"] == pytest.approx(_aurc_loop(p.max(axis=1), z.argmax(axis=1) == y), rel=1e-12)
    assert s["temperature"] == pytest.approx(t, rel=1e-15)


def test_summary_json_numbers(capsys, batch):
    path, z, y = batch
    code, out, _ = _run(capsys, "summary", path, "--json")
    assert code == 0
    s = json.loads(out)
    assert set(s) == LABELLED_KEYS
    _check_numbers(s, z, y, 1.0)


def test_summary_at_a_temperature(capsys, batch):
    path, z, y = batch
    code, out, _ = _run(capsys, "summary", path, "--json", "--temperature", "2.5")
    assert code == 0
    _check_numbers(json.loads(out), z, y, 2.5)


def test_summary_fit_temperature(capsys, batch):
    path, z, y = batch
    code, out, _ = _run(capsys, "summary", path, "--json", "--fit-temperature")
    s = json.loads(out)
    assert code == 0 and {"fitted_temperature", "nll_before_fit"} <= set(s)

    def nll(t: float) -> float:
        return float(-np.mean(special.log_softmax(z / t, axis=1)[np.arange(y.size), y]))

    # reference: scipy.optimize.minimize_scalar, bounded, tight xatol
    ref = optimize.minimize_scalar(nll, bounds=(0.05, 20), method="bounded", options={"xatol": 1e-10}).x
    assert s["fitted_temperature"] == pytest.approx(ref, rel=1e-4)
    assert s["temperature"] == s["fitted_temperature"]
    assert s["nll"] <= s["nll_before_fit"] == pytest.approx(nll(1.0), rel=1e-12)
    _check_numbers(s, z, y, s["fitted_temperature"])


@pytest.mark.parametrize(("method", "scipy_method"), [("wilson", "wilson"), ("clopper-pearson", "exact")])
def test_summary_threshold(capsys, batch, method, scipy_method):
    path, z, y = batch
    code, out, _ = _run(capsys, "summary", path, "--json", "--target-accuracy", "0.95", "--interval", method)
    assert code == 0
    th = json.loads(out)["threshold"]
    assert {"value", "coverage", "accuracy", "interval"} <= set(th)
    conf = special.softmax(z, axis=1).max(axis=1)
    ok = z.argmax(axis=1) == y
    # brute force: the lowest confidence t with accuracy(conf >= t) >= 0.95
    t = min(c for c in np.unique(conf) if ok[conf >= c].mean() >= 0.95)
    m = conf >= t
    assert th["value"] == pytest.approx(t, rel=1e-12)
    assert th["coverage"] == pytest.approx(m.mean()) and th["accuracy"] == pytest.approx(ok[m].mean())
    ref = binomtest(int(ok[m].sum()), int(m.sum())).proportion_ci(method=scipy_method)  # scipy
    assert th["interval"] == pytest.approx([ref.low, ref.high], abs=1e-12)


def test_summary_without_labels(capsys, tmp_path, make_logits):
    z, _ = make_logits(n=100, k=4)
    LogitFrame(z).write(tmp_path / "u.parquet")
    code, out, _ = _run(capsys, "summary", tmp_path / "u.parquet", "--json")
    s = json.loads(out)
    assert code == 0
    assert set(s) == {"n_samples", "n_labelled", "n_classes", "mean_confidence", "mean_entropy", "temperature"}
    p = special.softmax(z, axis=1)
    assert s["mean_entropy"] == pytest.approx(np.mean(stats.entropy(p, axis=1)), rel=1e-12)  # scipy


def test_summary_text(capsys, batch):
    path, z, y = batch
    code, out, _ = _run(capsys, "summary", path, "--target-accuracy", "0.9")
    assert code == 0
    lines = dict(line.split(None, 1) for line in out.splitlines() if line and not line.startswith(("Caution", " ")))
    assert float(lines["accuracy"]) == pytest.approx(accuracy_score(y, z.argmax(axis=1)), abs=5e-5)
    assert "top-5 accuracy" in out and "Caution:" in out and "sent for review" in out
    # the most confident sample wrong: no threshold reaches accuracy 1
    np.savez(path.with_name("wrong.npz"), logits=np.array([[5.0, 0.0], [1.0, 0.0]]), labels=np.array([1, 0]))
    code, out, _ = _run(capsys, "summary", path.with_name("wrong.npz"), "--target-accuracy", "1.0")
    assert code == 0 and "none reaches accuracy 1.0" in out


def test_json_stdout_stays_pure_while_progress_prints(capsys, batch, monkeypatch):
    path, _, _ = batch

    class EagerProgress(cli._Progress):
        """Announces every step at once and lets it take a moment, so progress lines are printed."""

        def __init__(self, label: str, delay: float = 1.0, stream: object = None) -> None:
            super().__init__(label, delay=0.0, stream=stream)

        def run(self, fn):
            return super().run(lambda: (time.sleep(0.05), fn())[1])

    monkeypatch.setattr(cli, "_Progress", EagerProgress)
    monkeypatch.setenv("LOGITSCOPE_PROGRESS", "1")  # progress is for terminals; force it under capsys
    code, out, err = _run(capsys, "summary", path, "--json")
    assert code == 0
    assert "logitscope: reading" in err and "logitscope: computing scores" in err
    assert json.loads(out)["n_samples"] == 1500  # stdout is one JSON document, nothing else


def test_no_progress_lines_off_a_terminal(capsys, batch, monkeypatch):
    # stderr captured (not a terminal): even a slow step prints nothing but errors
    path, _, _ = batch
    monkeypatch.delenv("LOGITSCOPE_PROGRESS", raising=False)

    class SlowProgress(cli._Progress):
        def __init__(self, label: str, delay: float = 1.0, stream: object = None) -> None:
            super().__init__(label, delay=0.0, stream=stream)

    monkeypatch.setattr(cli, "_Progress", SlowProgress)
    code, _, err = _run(capsys, "summary", path, "--json")
    assert code == 0 and err == ""


def test_demo_data_command(capsys, tmp_path):
    code, out, _ = _run(capsys, "demo-data", tmp_path / "mail.npz")
    assert code == 0 and "1797 samples x 10 classes" in out
    f = LogitFrame.read(tmp_path / "mail.npz")
    assert f.n_samples == 1797 and f.classes[:2] == ("zero", "one") and f.payload.kind == "images"
    code, out, _ = _run(capsys, "demo-data", tmp_path / "desk.parquet", "--name", "helpdesk")
    assert code == 0
    g = LogitFrame.read(tmp_path / "desk.parquet")
    assert g.n_classes == 5 and g.payload.kind == "texts"


def _bad_inputs(tmp_path):
    (tmp_path / "junk.npz").write_bytes(b"not an archive")
    np.savez(tmp_path / "nan.npz", logits=np.array([[0.0, 1.0], [np.nan, 0.0], [0.0, np.inf]]), labels=[0, 1, 0])
    np.savez(tmp_path / "lab.npz", logits=np.zeros((3, 2)), labels=np.array([0, 1, 7]))
    np.savez(tmp_path / "prob.npz", probabilities=np.array([[0.5, 0.6]]))
    np.savez(tmp_path / "nolab.npz", logits=np.zeros((3, 2)))
    np.savez(tmp_path / "ok.npz", logits=np.zeros((3, 2)), labels=np.array([0, 1, 0]))
    return [
        (["summary", tmp_path / "missing.npz"], "missing.npz: no such file"),
        (["summary", tmp_path / "junk.npz"], "not an .npz archive"),
        (["summary", tmp_path / "nan.npz"], "NaN or infinite values in 2 of 3 rows: rows 1, 2"),
        (["summary", tmp_path / "lab.npz"], "out of range at row 2"),
        (["summary", tmp_path / "prob.npz"], "rows must sum to 1"),
        (["summary", tmp_path / "nolab.npz", "--target-accuracy", "0.9"], "needs labels"),
        (["summary", tmp_path / "nolab.npz", "--fit-temperature"], "needs labels"),
        (["summary", tmp_path / "ok.npz", "--temperature", "-1"], "temperature must lie in [0.001, 1000]"),
        (["summary", tmp_path / "ok.npz", "--target-accuracy", "1.5"], "target accuracy must lie in"),
        (["demo-data", tmp_path / "demo.csv"], "unknown file type '.csv'"),
    ]


def test_bad_input_exits_2_with_one_line(capsys, tmp_path):
    for argv, needle in _bad_inputs(tmp_path):
        code, out, err = _run(capsys, *argv)
        assert code == 2, argv
        assert out == ""
        assert err.count("\n") == 1 and err.startswith("logitscope: error: "), err
        assert needle in err, (needle, err)
        assert "Traceback" not in err


def test_bad_input_in_a_real_process(tmp_path):
    # the installed entry point's module, run as its own process: exit status and streams as a shell sees them
    np.savez(tmp_path / "nan.npz", logits=np.array([[0.0, 1.0], [np.nan, 0.0]]))
    argv = [sys.executable, "-m", "logitscope.cli", "summary", str(tmp_path / "nan.npz"), "--json"]
    r = subprocess.run(argv, capture_output=True, text=True, timeout=300)
    assert r.returncode == 2 and r.stdout == ""
    assert r.stderr.splitlines() == [f"logitscope: error: {tmp_path / 'nan.npz'}: logits hold NaN or infinite "
                                     "values in 1 of 2 rows: row 1 (NonFiniteError)"]  # fmt: skip
