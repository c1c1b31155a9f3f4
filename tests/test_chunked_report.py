"""The report of a batch read in chunks against the report of the same rows in memory.

The in-memory findings and report are checked against scipy / scikit-learn / torchmetrics in
tests/test_findings.py and tests/test_report.py; here every field of the chunked ``Findings`` must equal
the in-memory one on the same data at the same temperature (counts exactly, floats to 1e-9 relative), and
so must every number of the two rendered pages. A few numbers are also checked against scikit-learn
directly. Data: scikit-learn's digits scored by a logistic regression (an open dataset it ships), and
simulated logits with many ties.
"""

from __future__ import annotations

import dataclasses
import math
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from sklearn.datasets import load_digits
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import accuracy_score, log_loss

from logitscope import LogitFrame
from logitscope import chunked as ck
from logitscope.cli import main
from logitscope.findings import Findings, collect, resolve_choices
from logitscope.findings.chunked import collect_chunked, resolve_chunked
from logitscope.report import write_chunked_report, write_report
from test_report import read_report

RTOL = 1e-9
#: Per-row arrays a chunked batch does not keep, and the drawn curve (a histogram there; checked apart).
NOT_KEPT = {"bin_of", "rows", "split", "curve"}

OPTIONS = [
    {"fit_temperature": True, "target_accuracy": 0.98, "per_class": True},
    {"costs": (10.0, 1.0)},
    {"temperature": 1.7, "target_accuracy": 0.99, "use_lower_bound": True, "interval": "clopper-pearson"},
    {"threshold": 0.8, "n_bins": 10},
    {},
]


def differences(a: Any, b: Any, path: str = "findings", skip: frozenset[str] = frozenset()) -> list[str]:
    """Where two findings differ: ints and counts exactly, floats to RTOL (NaN equal to NaN)."""
    out: list[str] = []
    if dataclasses.is_dataclass(a) and not isinstance(a, type):
        if type(a) is not type(b) and not isinstance(b, type(a)):
            return [f"{path}: {type(a).__name__} != {type(b).__name__}"]
        for f in dataclasses.fields(a):
            if f.name not in NOT_KEPT and f.name not in skip:
                out += differences(getattr(a, f.name), getattr(b, f.name), f"{path}.{f.name}", skip)
    elif isinstance(a, dict):
        if set(a) != set(b):
            return [f"{path}: keys {sorted(a)} != {sorted(b)}"]
        for key in a:
            out += differences(a[key], b[key], f"{path}[{key}]", skip)
    elif isinstance(a, tuple | list):
        if len(a) != len(b):
            return [f"{path}: length {len(a)} != {len(b)}"]
        for i, (x, y) in enumerate(zip(a, b, strict=True)):
            out += differences(x, y, f"{path}[{i}]", skip)
    elif isinstance(a, np.ndarray) or isinstance(b, np.ndarray):
        x, y = np.asarray(a), np.asarray(b)
        if x.shape != y.shape:
            out.append(f"{path}: shape {x.shape} != {y.shape}")
        elif x.dtype.kind in "iub" and y.dtype.kind in "iub":
            if not np.array_equal(x, y):
                out.append(f"{path}: counts differ")
        elif not np.allclose(x, y, rtol=RTOL, atol=1e-15, equal_nan=True):
            out.append(f"{path}: floats differ")
    elif isinstance(a, float) or isinstance(b, float):
        if a is None or b is None or not (math.isclose(a, b, rel_tol=RTOL, abs_tol=1e-15) or (a != a and b != b)):
            out.append(f"{path}: {a!r} != {b!r}")
    elif a != b:
        out.append(f"{path}: {a!r} != {b!r}")
    return out


def page_differences(memory: Path, chunked: Path, skip: tuple[str, ...] = ()) -> list[str]:
    """Every number of the two pages (``data-value`` by element id) and the doubtful rows' positions."""
    a, b = read_report(memory), read_report(chunked)
    va = {i: e["attrs"]["data-value"] for i, e in a.by_id.items() if "data-value" in e["attrs"]}
    vb = {i: e["attrs"]["data-value"] for i, e in b.by_id.items() if "data-value" in e["attrs"]}
    out = [f"ids only in one page: {sorted(set(va) ^ set(vb))[:10]}"] if set(va) != set(vb) else []
    for i in sorted(set(va) & set(vb)):
        if any(i.endswith(s) for s in skip):
            continue
        x, y = va[i], vb[i]
        if x == y:
            continue
        try:
            fx, fy = float(x), float(y)
        except ValueError:
            out.append(f"{i}: {x!r} != {y!r}")
            continue
        if not math.isclose(fx, fy, rel_tol=RTOL, abs_tol=1e-15):
            out.append(f"{i}: {x} != {y}")
    rows_a = [e["attrs"].get("data-row") for e in a.elements if e["attrs"].get("id", "").startswith("doubt-")]
    rows_b = [e["attrs"].get("data-row") for e in b.elements if e["attrs"].get("id", "").startswith("doubt-")]
    if rows_a != rows_b:
        out.append(f"doubtful rows {rows_a} != {rows_b}")
    names_a = [e["text"] for e in a.elements if "sample-id" in e["attrs"].get("class", "")]
    names_b = [e["text"] for e in b.elements if "sample-id" in e["attrs"].get("class", "")]
    if names_a != names_b:
        out.append(f"doubtful ids {names_a[:5]} != {names_b[:5]}")
    return out


@pytest.fixture(scope="module")
def digits_frame() -> LogitFrame:
    x, y = load_digits(return_X_y=True)
    half = len(y) // 2  # fit on one half, score the other: out-of-sample logits with real mistakes
    model = LogisticRegression(max_iter=500).fit(x[:half] / 16.0, y[:half])
    z = model.decision_function(x[half:] / 16.0).astype(np.float32)
    return LogitFrame(z, labels=y[half:], ids=[f"card-{i}" for i in range(z.shape[0])],
                      classes=[f"digit {d}" for d in range(10)])  # fmt: skip


@pytest.fixture(scope="module")
def digits_store(digits_frame: LogitFrame, tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("chunked-report") / "postcodes.zarr"
    ck.write_zarr(digits_frame, path, chunk_rows=97)  # 10 chunks, the last one short
    return path


def both(frame: LogitFrame, cf: ck.ChunkedFrame, **options: Any) -> tuple[Findings, Findings]:
    """The findings in memory and over the chunks, at the temperature the chunked fit found."""
    choices, temps = resolve_chunked(cf, **options)
    got = collect_chunked(cf, choices, temps)
    ref = collect(frame, *resolve_choices(frame, **options, fitted=temps.fitted))
    return ref, got


@pytest.mark.parametrize("options", OPTIONS)
def test_chunked_findings_equal_the_in_memory_ones_field_by_field(digits_frame, digits_store, options) -> None:
    cf = ck.open_chunked(digits_store)
    assert cf.n_chunks == 10
    ref, got = both(digits_frame, cf, **options)
    assert differences(ref, got) == []
    assert ref.held_out is not None and got.held_out is not None and ref.split is not None
    # the own split holds the same rows: the in-memory one is a row list, the chunked one its counts
    assert (got.held_out.n_fit, got.held_out.n_held) == (ref.split.fit.size, ref.split.held_out.size)
    # outside references for a few of the numbers: scikit-learn's accuracy and log loss
    z = np.asarray(digits_frame.logits, dtype=np.float64) / got.choices.temperature
    p = np.exp(z - z.max(axis=1, keepdims=True))
    p /= p.sum(axis=1, keepdims=True)
    assert got.decision.accuracy == pytest.approx(accuracy_score(digits_frame.labels, p.argmax(axis=1)), rel=RTOL)
    assert got.decision.nll == pytest.approx(log_loss(digits_frame.labels, p, labels=range(10)), rel=1e-7)


def test_the_fitted_temperatures_agree_to_the_fit_tolerance(digits_frame, digits_store) -> None:
    cf = ck.open_chunked(digits_store)
    _, temps = resolve_chunked(cf, fit_temperature=True)
    _, mem = resolve_choices(digits_frame, fit_temperature=True)
    assert temps.fitted is not None and mem.fitted is not None
    assert temps.fitted.temperature == pytest.approx(mem.fitted.temperature, rel=1e-5)  # the fit's rtol
    ref, got = both(digits_frame, cf, fit_temperature=True)
    assert got.held_out.fitted.temperature == pytest.approx(ref.held_out.fitted.temperature, rel=1e-5)


def test_the_drawn_curve_counts_exactly_at_its_thresholds(digits_frame, digits_store) -> None:
    cf = ck.open_chunked(digits_store)
    _, got = both(digits_frame, cf, target_accuracy=0.97)
    curve = got.threshold.curve
    assert curve.resolution == 2.0**-12
    s = digits_frame.sample_scores(got.choices.temperature)
    # reference: a direct count with numpy of the accepted and wrong samples at each drawn threshold
    accepted = (s.confidence[None, :] >= curve.threshold[:, None]).sum(axis=1)
    wrong = ((s.confidence[None, :] >= curve.threshold[:, None]) & ~s.correct[None, :]).sum(axis=1)
    assert np.array_equal(curve.n_accepted, accepted) and np.array_equal(curve.n_errors, wrong)
    assert np.all(np.diff(curve.threshold) < 0) and curve.n_accepted[-1] == digits_frame.n_samples


def test_ties_leave_every_number_equal_but_the_aurc_an_upper_bound(tmp_path: Path) -> None:
    # whole-number logits: confidences tie often, between right and wrong samples and among right ones
    rng = np.random.default_rng(7)
    n, k = 3000, 4
    y = rng.integers(0, k, n)
    z = rng.integers(-2, 3, size=(n, k)).astype(np.float64)
    z[np.arange(n), y] += rng.integers(0, 2, n)
    frame = LogitFrame(z, labels=y, classes=["billing", "login", "outage", "refund"])
    ck.write_zarr(frame, tmp_path / "tickets.zarr", chunk_rows=500)
    ref, got = both(frame, ck.open_chunked(tmp_path / "tickets.zarr"), target_accuracy=0.6, per_class=True)
    assert differences(ref, got, skip=frozenset({"aurc"})) == []
    for a, b in [(ref.before, got.before), (ref.threshold, got.threshold), (ref.held_out.fit["given"],
                 got.held_out.fit["given"])]:  # fmt: skip
        assert b.aurc >= a.aurc - 1e-15  # the documented bound (logitscope.chunked.analysis.ExactOrder.aurc)


def test_an_unlabelled_store_gets_the_label_free_findings(digits_frame, tmp_path: Path) -> None:
    bare = LogitFrame(digits_frame.logits, classes=digits_frame.classes)
    ck.write_zarr(bare, tmp_path / "bare.zarr", chunk_rows=300)
    cf = ck.open_chunked(tmp_path / "bare.zarr")
    got = collect_chunked(cf, *resolve_chunked(cf, temperature=1.3))
    ref = collect(bare, *resolve_choices(bare, temperature=1.3))
    assert not got.labelled and differences(ref, got) == []


def test_the_rendered_pages_say_the_same_numbers(digits_frame, digits_store, tmp_path: Path) -> None:
    digits_frame.write(tmp_path / "postcodes.npz")
    args = ["--fit-temperature", "--target-accuracy", "0.98", "--per-class"]
    assert main(["report", str(tmp_path / "postcodes.npz"), "-o", str(tmp_path / "m.html"), *args]) == 0
    assert main(["report", str(digits_store), "-o", str(tmp_path / "c.html"), *args]) == 0
    assert page_differences(tmp_path / "m.html", tmp_path / "c.html") == []
    page = read_report(tmp_path / "c.html")
    assert "1/4,096" in page.text("curve-resolution") and "upper bound" not in page.text("curve-resolution")
    assert "read in chunks" in page.text("chunked-note")


def test_a_parquet_folder_and_an_npy_file_give_the_same_report(digits_frame, tmp_path: Path) -> None:
    folder = tmp_path / "parts"
    folder.mkdir()
    half = digits_frame.n_samples // 2
    z, y, ids = np.asarray(digits_frame.logits), digits_frame.labels, digits_frame.ids
    for name, part in (("a", slice(0, half)), ("b", slice(half, None))):
        piece = LogitFrame(z[part], labels=y[part], ids=ids[part], classes=digits_frame.classes)
        piece.write(folder / f"{name}.parquet")
    np.save(tmp_path / "logits.npy", np.asarray(digits_frame.logits))
    ref = tmp_path / "m.html"
    write_report(digits_frame, ref, temperature=0.9, costs=(5.0, 1.0))
    write_chunked_report(ck.open_chunked(folder), tmp_path / "p.html", temperature=0.9, costs=(5.0, 1.0))
    assert page_differences(ref, tmp_path / "p.html") == []
    cf = ck.ChunkedFrame.from_memmap(tmp_path / "logits.npy", labels=None, classes=digits_frame.classes,
                                     chunk_rows=200)  # fmt: skip
    bare = LogitFrame(digits_frame.logits, classes=digits_frame.classes)
    write_report(bare, tmp_path / "bare.html", temperature=0.9)
    write_chunked_report(cf, tmp_path / "npy.html", temperature=0.9)
    assert page_differences(tmp_path / "bare.html", tmp_path / "npy.html") == []


@pytest.mark.parametrize(
    ("make", "argv", "words"),
    [
        ("bare", ["--target-accuracy", "0.9"], "needs labels"),
        ("bare", ["--fit-temperature"], "needs labels"),
        ("missing", [], "no such file or directory"),
        ("labelled", ["--relabel", "marks.json"], "--relabel needs the file read in memory"),
    ],
)
def test_bad_input_gets_one_line_and_exit_2(digits_frame, tmp_path: Path, capsys, make, argv, words) -> None:
    path = tmp_path / f"{make}.zarr"
    if make == "bare":
        ck.write_zarr(LogitFrame(digits_frame.logits), path)
    elif make == "labelled":
        ck.write_zarr(digits_frame, path)
    assert main(["report", str(path), "-o", str(tmp_path / "r.html"), *argv]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("logitscope: error:") and words in err and "\n" not in err
    assert not (tmp_path / "r.html").exists()


def test_the_doubtful_rows_carry_their_stored_ids(digits_frame, digits_store, tmp_path: Path) -> None:
    found = write_chunked_report(ck.open_chunked(digits_store), tmp_path / "c.html", temperature=1.0)
    page = read_report(tmp_path / "c.html")
    shown = [e["text"] for e in page.elements if "sample-id" in e["attrs"].get("class", "")]
    assert found.suspects is not None and len(shown) == len(found.suspects) > 0
    assert shown == [str(digits_frame.ids[r]) for r in found.suspects.rows]  # the ids the frame was written with
