"""The report's comparison with another checkpoint (``write_report(..., compare=B)``, ``report --compare B``).

The counts are checked against a per-sample loop over the two checkpoints' predictions, the exact
McNemar test against ``scipy.stats.binomtest`` on the discordant pairs (McNemar 1947; the exact
form is the binomial test of ``fixed`` against ``fixed + broken`` at p = 1/2), the accuracies
against ``sklearn.metrics.accuracy_score``.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest
from scipy import stats
from sklearn.metrics import accuracy_score

from logitscope import LogitFrame, ShapeError, cli, load_demo
from logitscope.report import write_report


def _values(page: str) -> dict[str, str]:
    return dict(re.findall(r'id="([^"]+)" class="num" data-value="([^"]*)"', page))


@pytest.fixture(scope="module")
def checkpoints() -> tuple[LogitFrame, LogitFrame]:
    a = load_demo("mailroom")
    rng = np.random.default_rng(7)
    z = np.asarray(a.logits, dtype=np.float64) + rng.normal(scale=1.5, size=a.logits.shape)  # a later checkpoint
    order = rng.permutation(a.n_samples)  # the same samples in another order
    b = LogitFrame(z[order], labels=a.labels[order], classes=a.classes, ids=a.ids[order])
    return a, b


def test_the_section_counts_each_sample_as_a_loop_does(checkpoints, tmp_path: Path) -> None:
    a, b = checkpoints
    out = tmp_path / "r.html"
    write_report(a, out, compare=b, compare_name="<epoch 8>")
    page = out.read_text()
    assert "&lt;epoch 8&gt;" in page and "<epoch 8>" not in page  # user text is escaped
    v = _values(page)
    # per-sample loop over the ids: right under A? right under B?
    pos = {i: r for r, i in enumerate(b.ids.tolist())}
    pa, pb = np.argmax(a.logits, axis=1), np.argmax(b.logits, axis=1)
    counts = dict.fromkeys(("right_both", "fixed", "broken", "wrong_same", "wrong_different"), 0)
    for r, i in enumerate(a.ids.tolist()):
        y, p, q = a.labels[r], pa[r], pb[pos[i]]
        if p == y and q == y:
            counts["right_both"] += 1
        elif q == y:
            counts["fixed"] += 1
        elif p == y:
            counts["broken"] += 1
        else:
            counts["wrong_same" if p == q else "wrong_different"] += 1
    assert {k: int(v[f"cmp-count-{k}"]) for k in counts} == counts
    assert counts["fixed"] + counts["broken"] > 0  # the checkpoints differ: the test sees both kinds
    ref_p = stats.binomtest(counts["fixed"], counts["fixed"] + counts["broken"], 0.5).pvalue
    assert float(v["cmp-mcnemar"]) == pytest.approx(ref_p, rel=1e-12)
    assert float(v["cmp-accuracy-a"]) == pytest.approx(accuracy_score(a.labels, pa))
    assert float(v["cmp-accuracy-b"]) == pytest.approx(accuracy_score(b.labels, pb))
    assert int(v["cmp-n"]) == a.n_samples and 'href="#comparison"' in page


def test_the_cli_writes_the_section_and_names_ids_missing_on_one_side(checkpoints, tmp_path: Path, capsys) -> None:
    a, b = checkpoints
    a.write(tmp_path / "a.npz")
    b.subset(np.arange(100, b.n_samples)).write(tmp_path / "b.npz")  # B lacks 100 samples
    code = cli.main(
        ["report", str(tmp_path / "a.npz"), "-o", str(tmp_path / "r.html"), "--compare", str(tmp_path / "b.npz")]
    )
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1 and "--drop-missing" in err, err
    code = cli.main([
        "report", str(tmp_path / "a.npz"), "-o", str(tmp_path / "r.html"),
        "--compare", str(tmp_path / "b.npz"), "--drop-missing",
    ])  # fmt: skip
    assert code == 0
    v = _values((tmp_path / "r.html").read_text())
    assert int(v["cmp-n"]) == a.n_samples - 100 and int(v["cmp-only-a"]) == 100 and int(v["cmp-only-b"]) == 0
    assert "b.npz</span>" in (tmp_path / "r.html").read_text()  # the other checkpoint named by its file
    code = cli.main(["report", str(tmp_path / "a.npz"), "-o", str(tmp_path / "r.html"), "--drop-missing"])
    assert code == 2 and "--drop-missing goes with --compare" in capsys.readouterr().err


def test_bad_comparison_arguments_are_named(checkpoints, tmp_path: Path) -> None:
    a, b = checkpoints
    with pytest.raises(ShapeError, match="missing='drop'"):
        write_report(a, tmp_path / "r.html", compare=b.subset(np.arange(10)))
    with pytest.raises(Exception, match="compare must be a LogitFrame"):
        write_report(a, tmp_path / "r.html", compare=np.zeros((3, 10)))  # type: ignore[arg-type]
    with pytest.raises(Exception, match="compare_missing must be"):
        write_report(a, tmp_path / "r.html", compare=b, compare_missing="skip")
