"""The chunked analysis on a dask.distributed cluster: two worker processes on 127.0.0.1.

Every number must equal the in-memory path on the same data at the same temperature (counts exactly,
floats to 1e-9 relative, the fitted temperature to the fit's tolerance); the in-memory path is checked
against scipy / scikit-learn elsewhere. The data: scikit-learn's digits scored by a logistic regression.
"""

import json

import numpy as np
import pytest
from sklearn.datasets import load_digits
from sklearn.linear_model import LogisticRegression

from logitscope import LogitFrame
from logitscope import chunked as ck
from logitscope.cli import main

distributed = pytest.importorskip("distributed")

from test_chunked import assert_summary_equal, fitted_reference  # noqa: E402


@pytest.fixture(scope="module")
def cluster():
    with distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1", dashboard_address=None,
        worker_dashboard_address=None,
    ) as c:  # fmt: skip
        yield c


@pytest.fixture(scope="module")
def store(tmp_path_factory):
    x, y = load_digits(return_X_y=True)
    x = x / 16.0
    half = len(y) // 2
    z = LogisticRegression(max_iter=500).fit(x[:half], y[:half]).decision_function(x[half:]).astype(np.float32)
    frame = LogitFrame(z, labels=y[half:], classes=[f"digit {d}" for d in range(10)])
    path = tmp_path_factory.mktemp("cluster") / "mailroom.zarr"
    ck.write_zarr(frame, path, chunk_rows=120)
    return frame, path


def test_summary_on_the_cluster_equals_the_in_memory_one(cluster, store, monkeypatch):
    import zarr

    frame, path = store
    cf = ck.open_chunked(path)

    def no_reading_here(*args, **kwargs):
        raise AssertionError("the client read a chunk of the store")

    # chunks are read by the worker processes: reading one in this (the client's) process would fail
    monkeypatch.setattr(zarr.Array, "__getitem__", no_reading_here)
    with ck.connected(cluster.scheduler_address) as client:
        assert ck.active_client() is client
        got = cf.summary(fit_temperature=True, target_accuracy=0.95)
        plain = cf.summary(temperature=0.8)
        cm = ck.confusion_matrix(cf)
        issues = ck.rank_doubtful_labels(cf, top=25)
    assert ck.active_client() is None
    assert_summary_equal(got, fitted_reference(frame, got, target_accuracy=0.95))
    assert_summary_equal(plain, frame.summary(temperature=0.8))
    s = frame.sample_scores()
    np.testing.assert_array_equal(cm, np.bincount(frame.labels * 10 + s.predicted, minlength=100).reshape(10, 10))
    from logitscope import analysis as an

    np.testing.assert_array_equal(issues.index, an.rank_doubtful_labels(frame.logits, frame.labels).top(25).index)


def test_cli_sends_the_work_to_the_cluster_and_leaves_it_running(cluster, store, capsys, monkeypatch):
    frame, path = store
    monkeypatch.setenv("LOGITSCOPE_SCHEDULER", "tcp://127.0.0.1:9")  # a wrong address: the flag must win
    assert main(["summary", str(path), "--scheduler", cluster.scheduler_address, "--json"]) == 0
    assert_summary_equal(json.loads(capsys.readouterr().out), json.loads(json.dumps(frame.summary())))
    monkeypatch.setenv("LOGITSCOPE_SCHEDULER", cluster.scheduler_address)  # the environment alone
    assert main(["summary", str(path), "--temperature", "1.7", "--json"]) == 0
    assert_summary_equal(json.loads(capsys.readouterr().out), json.loads(json.dumps(frame.summary(temperature=1.7))))
    with distributed.Client(cluster.scheduler_address, timeout=10) as client:  # still there, both workers
        assert len(client.scheduler_info()["workers"]) == 2


def test_the_flag_wins_over_the_environment(monkeypatch):
    monkeypatch.setenv("LOGITSCOPE_SCHEDULER", "tcp://127.0.0.2:8786")
    assert ck.scheduler_address("tcp://127.0.0.1:8786") == "tcp://127.0.0.1:8786"
    assert ck.scheduler_address(None) == "tcp://127.0.0.2:8786"
    monkeypatch.delenv("LOGITSCOPE_SCHEDULER")
    assert ck.scheduler_address(None) is None


def test_the_report_on_the_cluster_equals_the_in_memory_one(cluster, store, tmp_path, monkeypatch):
    import zarr

    from logitscope.findings import collect, resolve_choices
    from logitscope.findings.chunked import collect_chunked, resolve_chunked
    from test_chunked_report import differences, page_differences

    frame, path = store
    cf = ck.open_chunked(path)
    frame.write(tmp_path / "mailroom.npz")
    args = ["--fit-temperature", "--target-accuracy", "0.97", "--per-class"]
    assert main(["report", str(tmp_path / "mailroom.npz"), "-o", str(tmp_path / "m.html"), *args]) == 0

    def no_reading_here(*args, **kwargs):
        raise AssertionError("the client read a chunk of the store")

    monkeypatch.setattr(zarr.Array, "__getitem__", no_reading_here)  # the workers read every chunk
    with ck.connected(cluster.scheduler_address):
        choices, temps = resolve_chunked(cf, costs=(10.0, 1.0), per_class=False)
        got = collect_chunked(cf, choices, temps)
    ref = collect(frame, *resolve_choices(frame, costs=(10.0, 1.0), fitted=temps.fitted))
    assert differences(ref, got) == []
    out = tmp_path / "c.html"
    assert main(["report", str(path), "-o", str(out), "--scheduler", cluster.scheduler_address, *args]) == 0
    assert page_differences(tmp_path / "m.html", out) == []
    with distributed.Client(cluster.scheduler_address, timeout=10) as client:  # left running, both workers
        assert len(client.scheduler_info()["workers"]) == 2
