"""`logitscope compare A B`: numbers against per-sample loops and scipy.stats.binomtest, errors exit 2 in one line."""

from __future__ import annotations

import json

import numpy as np
import pytest
from scipy.stats import binomtest

from logitscope import LogitFrame, cli

TEAMS = ["billing", "password reset", "printer", "network"]


def _run(capsys, *argv: object) -> tuple[int, str, str]:
    code = cli.main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def files(tmp_path, make_logits, rng):
    # help-desk routing, two checkpoints; B's file holds the tickets in another row order
    z, y = make_logits(n=800, k=4, scale=2.0)
    zb = z + rng.normal(0.0, 1.5, z.shape)
    ids = np.array([f"T-{i:05d}" for i in range(800)])
    order = rng.permutation(800)
    a_path, b_path = tmp_path / "epoch3.npz", tmp_path / "epoch9.parquet"
    LogitFrame(z, labels=y, classes=TEAMS, ids=ids).write(a_path)
    LogitFrame(zb[order], labels=y[order], classes=TEAMS, ids=ids[order]).write(b_path)
    return a_path, b_path, z, zb, y


def test_json_numbers_match_per_sample_loops(capsys, files):
    a_path, b_path, z, zb, y = files
    code, out, err = _run(capsys, "compare", a_path, b_path, "--json")
    assert code == 0 and err == ""
    d = json.loads(out)
    pa, pb = z.argmax(1), zb.argmax(1)  # reference: predictions by numpy argmax, rows matched by construction
    cells = {"right_both": 0, "fixed": 0, "broken": 0, "wrong_same": 0, "wrong_different": 0}
    for i in range(y.size):  # reference: every ticket sorted by the definition of the cells
        ra, rb = pa[i] == y[i], pb[i] == y[i]
        cell = ("right_both" if rb else "broken") if ra else ("fixed" if rb else None)
        cells[cell or ("wrong_same" if pa[i] == pb[i] else "wrong_different")] += 1
    assert {c: v["count"] for c, v in d["flips"]["cells"].items()} == cells
    b, c = cells["broken"], cells["fixed"]
    assert d["mcnemar_p"] == pytest.approx(binomtest(b, b + c, 0.5).pvalue, rel=1e-12)  # scipy.stats.binomtest
    assert d["accuracy_a"] == pytest.approx(np.mean(pa == y)) and d["accuracy_b"] == pytest.approx(np.mean(pb == y))
    assert d["names"] == ["epoch3.npz", "epoch9.parquet"] and d["n_samples"] == 800
    per = {r["class"]: r for r in d["per_class"]}
    for k, team in enumerate(TEAMS):
        rows = y == k
        assert per[team]["support"] == rows.sum()
        assert per[team]["change"] == pytest.approx(np.mean(pb[rows] == k) - np.mean(pa[rows] == k))


def test_text_output_names_every_cell(capsys, files):
    a_path, b_path, *_ = files
    code, out, err = _run(capsys, "compare", a_path, b_path)
    assert code == 0 and err == ""
    for phrase in ("right in both", "fixed (wrong under A", "broken (right under A", "wrong in both, same class",
                   "McNemar exact p", "per class", "password reset"):  # fmt: skip
        assert phrase in out


def test_missing_ids_exit_2_in_one_line_and_can_be_dropped(capsys, files, tmp_path):
    a_path, b_path, *_ = files
    short = tmp_path / "short.npz"
    f = LogitFrame.read(b_path)
    f.subset(np.arange(3, f.n_samples)).write(short)
    code, out, err = _run(capsys, "compare", a_path, short)
    assert code == 2 and out == "" and len(err.strip().splitlines()) == 1
    assert "3 ids of epoch3.npz are not in short.npz" in err and "--drop-missing" in err
    code, out, err = _run(capsys, "compare", a_path, short, "--drop-missing", "--json")
    d = json.loads(out)
    assert code == 0 and d["n_samples"] == 797 and d["n_only_in_a"] == 3


def test_bad_input_exits_2(capsys, files, tmp_path):
    a_path, *_ = files
    code, out, err = _run(capsys, "compare", a_path, tmp_path / "absent.npz")
    assert code == 2 and out == "" and len(err.strip().splitlines()) == 1
    other = tmp_path / "other.npz"
    LogitFrame(np.zeros((800, 3)), classes=["a", "b", "c"], ids=[f"T-{i:05d}" for i in range(800)]).write(other)
    code, out, err = _run(capsys, "compare", a_path, other)
    assert code == 2 and "same classes" in err and len(err.strip().splitlines()) == 1


def test_unlabelled_files_report_agreement_only(capsys, tmp_path, make_logits):
    z, _ = make_logits(n=50, k=3)
    a, b = tmp_path / "a.npz", tmp_path / "b.npz"
    LogitFrame(z).write(a)
    LogitFrame(z[:, ::-1].copy()).write(b)
    code, out, _ = _run(capsys, "compare", a, b, "--json")
    d = json.loads(out)
    assert code == 0 and not d["labelled"] and "flips" not in d
    assert d["agreement"] == pytest.approx(np.mean(z.argmax(1) == z[:, ::-1].argmax(1)))
    code, out, _ = _run(capsys, "compare", a, b)
    assert "agreement" in out and "McNemar" not in out
