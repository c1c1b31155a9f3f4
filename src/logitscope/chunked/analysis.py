"""Set-level analysis of a :class:`~logitscope.chunked.ChunkedFrame` as reductions over its chunks.

Every result is one of the in-memory analysis layer's dataclasses, with the
same numbers as the in-memory path on the same data (counts exactly, sums up to
the order of float64 additions):

- one *pass* reads each chunk once, runs the fused per-sample kernel
  (:func:`logitscope.analysis.sample_scores`, which also finds non-finite
  rows) and reduces what each result needs: counts, sums, histograms;
- the temperature fit is the in-memory Newton iteration with each evaluation
  one reduction of :func:`logitscope.analysis.temperature_moments` over the chunks;
- the area under the risk-coverage curve and the thresholds need the global
  order of the confidences. They are exact, without a sort: a pass gathers the
  confidences of the *wrong* samples (sorted), and a second pass counts, for
  each of them, the right samples more confident (each chunk's right samples
  are placed among the sorted errors by binary search). With the errors first
  among ties, the wrong sample ranked ``j``-th among errors sits at position
  ``r_j = j + #(right samples more confident)``, and
  ``AURC = (1/N) sum_j (H_N - H_{r_j - 1})`` (H the harmonic numbers), which is
  the definition ``(1/N) sum_n errors(n) / n`` summed by error rather than by
  position. Memory: 8 bytes per wrong sample for its confidence and 8 for the counts;
- the risk-coverage *curve* comes from a fine histogram of the confidence
  (``RC_MANTISSA_BITS`` bits of mantissa: thresholds every ``2^-12`` relative), exact at
  its thresholds (:class:`BinnedRiskCoverage` states the resolution).

Dask runs the passes: in process on its threaded scheduler, or on a
dask.distributed cluster when a client is active (see :mod:`logitscope.chunked.cluster`).
"""

from __future__ import annotations

import contextlib
import math
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Literal

import numpy as np

from .. import analysis as an
from ..analysis._validation import assume_valid, check_k, check_temperature, find_nonfinite_rows
from ..analysis.label_errors import _confident_assignment, _runner_up
from ..analysis.selective import IntervalMethod, _choice
from ..analysis.temperature import WARM_START_ROWS, newton_fit
from ..errors import LabelError, NonFiniteError, ParameterError, describe_rows

if TYPE_CHECKING:
    from .frame import ChunkedFrame

__all__ = [
    "RC_MANTISSA_BITS",
    "BinnedRiskCoverage",
    "ExactOrder",
    "aurc",
    "class_counts",
    "confusion_matrix",
    "evaluate_threshold",
    "exact_order",
    "fit_temperature",
    "rank_doubtful_labels",
    "reliability_bins",
    "risk_coverage_curve",
    "sample_scores",
    "summarize_chunked",
    "threshold_for_accuracy",
    "threshold_for_cost",
    "top_k_confusion",
]

#: Partial results combined in one reduction task.
SPLIT_EVERY = 8
#: Rows scored at a time inside a chunk task: the per-sample arrays stay small whatever the chunk size.
SUB_ROWS = 1 << 17


# --------------------------------------------------------------------------- running passes


def compute(*objs: Any) -> tuple[Any, ...]:
    """``dask.compute`` on the active dask.distributed client if there is one, else dask's threaded scheduler."""
    import dask

    from .cluster import active_client

    client = active_client()
    return dask.compute(*objs, scheduler=client if client is not None else "threads")


@contextlib.contextmanager
def _one_numba_thread() -> Iterator[None]:
    """Chunks run in parallel tasks; each kernel call then uses one thread (numba's count is per thread)."""
    try:
        import numba
    except ImportError:  # pragma: no cover - numba is a dependency
        yield
        return
    before = numba.get_num_threads()
    numba.set_num_threads(1)
    try:
        yield
    finally:
        numba.set_num_threads(before)


def _checked_block(z: Any, y: Any, offset: int) -> tuple[np.ndarray, np.ndarray | None]:
    """The chunk as numpy arrays with its labels checked; errors name global rows."""
    zb = np.asarray(z)
    if zb.dtype.kind != "f":
        zb = zb.astype(np.float64)
    if y is None:
        return zb, None
    yb = np.asarray(y)
    if yb.dtype.kind not in "iu":
        raise LabelError(f"labels must be integer class indices, got dtype {yb.dtype} (rows {offset} onward)")
    yb = yb.astype(np.int64, copy=False)
    bad = np.flatnonzero((yb < 0) | (yb >= zb.shape[1]))
    if bad.size:
        raise LabelError(
            f"labels must lie in [0, {zb.shape[1]}) for {zb.shape[1]} classes; out of range at "
            f"{describe_rows(bad + offset)} (values {yb[bad[:5]].tolist()})"
        )
    return zb, yb


def _nonfinite(zb: np.ndarray, offset: int) -> NonFiniteError:
    bad = find_nonfinite_rows(zb) + offset
    return NonFiniteError(
        f"logits hold NaN or infinite values in {bad.size} rows of the chunk of rows {offset} to "
        f"{offset + zb.shape[0] - 1}: {describe_rows(bad)}"
    )


def _scores(zb: np.ndarray, yb: np.ndarray | None, t: float, offset: int) -> an.SampleScores:
    """The fused kernel on one chunk; its own pass finds non-finite rows."""
    try:
        with _one_numba_thread():
            return an.sample_scores(zb, yb, temperature=t)
    except NonFiniteError:
        raise _nonfinite(zb, offset) from None


class _Pass:
    """One pass over a chunk: the scores at ``t`` once, then each collector's partial result."""

    def __init__(self, t: float, collectors: Sequence[_Collector]) -> None:
        self.t = t
        self.collectors = tuple(collectors)

    def __call__(self, z: Any, y: Any, offset: int) -> tuple[Any, ...]:
        zb, yb = _checked_block(z, y, offset)
        parts = []
        for a in range(0, zb.shape[0], SUB_ROWS):
            zs, ys = zb[a : a + SUB_ROWS], None if yb is None else yb[a : a + SUB_ROWS]
            s = _scores(zs, ys, self.t, offset + a)
            parts.append(tuple(c.chunk(s, zs, ys, offset + a) for c in self.collectors))
        return parts[0] if len(parts) == 1 else self.combine(parts)

    def combine(self, parts: Sequence[tuple[Any, ...]]) -> tuple[Any, ...]:
        return tuple(c.combine([p[i] for p in parts]) for i, c in enumerate(self.collectors))


def _tree(parts: list[Any], combine: Callable[[Sequence[Any]], Any], split_every: int = SPLIT_EVERY) -> Any:
    """A tree of dask.delayed combine tasks over the partial results (dask schedules it)."""
    import dask

    while len(parts) > 1:
        parts = [dask.delayed(combine)(parts[i : i + split_every]) for i in range(0, len(parts), split_every)]
    return parts[0] if parts else None


def _run(cf: ChunkedFrame, t: float, collectors: Sequence[_Collector]) -> tuple[Any, ...]:
    import dask

    one = _Pass(t, collectors)
    parts = [dask.delayed(one)(z, y, offset) for z, y, offset in cf.blocks()]
    (result,) = compute(_tree(parts, one.combine))
    return tuple(result)


class _Collector:
    """What one result needs from each chunk, and how two chunks' parts combine."""

    def chunk(self, s: an.SampleScores, z: np.ndarray, y: np.ndarray | None, offset: int) -> Any:
        raise NotImplementedError

    def combine(self, parts: Sequence[Any]) -> Any:
        """Sums by default (dicts of arrays and numbers)."""
        out = dict(parts[0])
        for p in parts[1:]:
            for key, value in p.items():
                out[key] = out[key] + value
        return out


class _Totals(_Collector):
    def __init__(self, ks: tuple[int, ...]) -> None:
        self.ks = ks

    def chunk(self, s: an.SampleScores, z: np.ndarray, y: np.ndarray | None, offset: int) -> Any:
        out: dict[str, Any] = {"n": len(s), "confidence": float(s.confidence.sum()), "entropy": float(s.entropy.sum())}
        if y is not None:
            assert s.correct is not None and s.true_rank is not None
            assert s.true_log_probability is not None and s.brier is not None
            out["correct"] = int(s.correct.sum())
            out["log_probability"] = float(s.true_log_probability.sum())
            out["brier"] = float(s.brier.sum())
            out["top_k"] = np.array([int(np.count_nonzero(s.true_rank <= k)) for k in self.ks], dtype=np.int64)
        return out


class _Bins(_Collector):
    def __init__(self, n_bins: int) -> None:
        self.n_bins = n_bins

    def chunk(self, s: an.SampleScores, z: np.ndarray, y: np.ndarray | None, offset: int) -> Any:
        assert s.correct is not None
        edges = np.linspace(0.0, 1.0, self.n_bins + 1)
        b = np.searchsorted(edges[1:-1], s.confidence, side="left")  # as reliability_bins
        m = self.n_bins
        return {
            "count": np.bincount(b, minlength=m),
            "hits": np.bincount(b, weights=s.correct, minlength=m),
            "confidence": np.bincount(b, weights=s.confidence, minlength=m),
        }


class _Confusion(_Collector):
    def __init__(self, k: int) -> None:
        self.k = k

    def chunk(self, s: an.SampleScores, z: np.ndarray, y: np.ndarray | None, offset: int) -> Any:
        k = self.k
        out = {"predicted": np.bincount(s.predicted, minlength=k)}
        if y is not None:
            out["matrix"] = np.bincount(y * k + s.predicted, minlength=k * k)
            out["labels"] = np.bincount(y, minlength=k)
        return out


class _TopKConfusion(_Collector):
    def __init__(self, k: int) -> None:
        self.k = k

    def chunk(self, s: an.SampleScores, z: np.ndarray, y: np.ndarray | None, offset: int) -> Any:
        assert y is not None
        with assume_valid():
            return {"matrix": an.top_k_confusion(z, y, self.k)}


class _Threshold(_Collector):
    """Accepted and wrong counts at fixed thresholds (``confidence >= t``)."""

    def __init__(self, thresholds: np.ndarray) -> None:
        self.thresholds = np.asarray(thresholds, dtype=np.float64)

    def chunk(self, s: an.SampleScores, z: np.ndarray, y: np.ndarray | None, offset: int) -> Any:
        assert s.correct is not None
        acc = s.confidence[None, :] >= self.thresholds[:, None]
        return {"accepted": acc.sum(axis=1), "errors": (acc & ~s.correct[None, :]).sum(axis=1)}


#: Mantissa bits of the risk-coverage histogram: bins of relative width 2^-12 in the confidence.
RC_MANTISSA_BITS = 12
_RC_SHIFT = 52 - RC_MANTISSA_BITS
_RC_LOW_EXPONENT = -64  # confidences below 2^-64 share the first bin


def _rc_bin(conf: np.ndarray) -> np.ndarray:
    # the bits of a positive float64 grow with its value: the top bits are a monotone bin index
    bits = conf.view(np.uint64) >> np.uint64(_RC_SHIFT)
    base = np.float64(2.0**_RC_LOW_EXPONENT).view(np.uint64) >> np.uint64(_RC_SHIFT)
    return (np.maximum(bits, base) - base).astype(np.int64)


def _rc_n_bins() -> int:
    return int(_rc_bin(np.array([1.0]))[0]) + 1


def _rc_lower_edges() -> np.ndarray:
    base = np.float64(2.0**_RC_LOW_EXPONENT).view(np.uint64) >> np.uint64(_RC_SHIFT)
    idx = np.arange(_rc_n_bins(), dtype=np.uint64) + base
    edges = (idx << np.uint64(_RC_SHIFT)).view(np.float64)
    edges[0] = 0.0
    return edges


class _RCHistogram(_Collector):
    def chunk(self, s: an.SampleScores, z: np.ndarray, y: np.ndarray | None, offset: int) -> Any:
        assert s.correct is not None
        b = _rc_bin(s.confidence)
        m = _rc_n_bins()
        return {"count": np.bincount(b, minlength=m), "errors": np.bincount(b[~s.correct], minlength=m)}


class _ErrorConfidences(_Collector):
    """The wrong samples' confidences, unsorted (sorted once, in place, by :func:`_sorted`)."""

    def chunk(self, s: an.SampleScores, z: np.ndarray, y: np.ndarray | None, offset: int) -> Any:
        assert s.correct is not None
        return s.confidence[~s.correct]

    def combine(self, parts: Sequence[Any]) -> Any:
        return np.concatenate(list(parts))


def _sorted(values: np.ndarray) -> np.ndarray:
    values.sort()
    return values


class _RightsAmongErrors:
    """For sorted error confidences ``E``: right samples in each gap ``(E[s-1], E[s])`` and equal to ``E[s]``.

    A chunk's part is sparse (keys ``2 * slot + equal`` and their counts); the
    parts are accumulated into one dense int64 array of ``2 * (m + 1)`` counts
    along a chain, so one dense array exists however many chunks there are.
    """

    def __init__(self, t: float) -> None:
        self.t = t

    def __call__(self, z: Any, y: Any, offset: int, errors: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        zb, yb = _checked_block(z, y, offset)
        rights = []
        for a in range(0, zb.shape[0], SUB_ROWS):
            ys = None if yb is None else yb[a : a + SUB_ROWS]
            s = _scores(zb[a : a + SUB_ROWS], ys, self.t, offset + a)
            assert s.correct is not None
            rights.append(s.confidence[s.correct])
        c = np.concatenate(rights)
        c.sort()  # sorted queries walk the errors in order: cache-friendly
        slot = np.searchsorted(errors, c, side="left")  # errors below c
        equal = np.zeros(c.shape, dtype=np.int64)
        inside = slot < errors.size
        equal[inside] = errors[slot[inside]] == c[inside]
        key = slot * 2 + equal  # ascending, as c is
        cut = np.flatnonzero(np.r_[True, key[1:] != key[:-1]])
        return key[cut], np.diff(np.r_[cut, key.size])


def _accumulate_rights(
    dense: np.ndarray | None, part: tuple[np.ndarray, np.ndarray], size: int, dtype: str
) -> np.ndarray:
    out = np.zeros(2 * size, dtype=dtype) if dense is None else dense
    keys, counts = part
    out[keys] += counts  # keys are unique within a part; the array is this chain's own
    return out


# --------------------------------------------------------------------------- per-sample scores


def sample_scores(cf: ChunkedFrame, temperature: float | None = None) -> an.SampleScores:
    """Per-sample scores as lazy dask arrays (the fused kernel on each chunk, via ``map_blocks``).

    Compute a slice (``s.confidence[:1000].compute()``) or a reduction; nothing is read before.
    """
    import dask.array as da

    t = cf.temperature if temperature is None else check_temperature(temperature)
    labelled = cf.labels is not None
    names = ["predicted", "confidence", "entropy", "margin", "logit_margin", "energy"]
    if labelled:
        names += ["true_log_probability", "brier", "true_rank"]
    width = len(names)

    def block(z: np.ndarray, *rest: Any, block_info: Any = None) -> np.ndarray:
        offset = int(block_info[0]["array-location"][0][0]) if block_info else 0
        zb, yb = _checked_block(z, rest[0][:, 0] if rest else None, offset)
        s = _scores(zb, yb, t, offset)
        return np.column_stack([np.asarray(getattr(s, n), dtype=np.float64) for n in names])

    args = [cf.logits] + ([cf.labels[:, None]] if cf.labels is not None else [])
    table = da.map_blocks(block, *args, dtype=np.float64, chunks=(cf.logits.chunks[0], (width,)))
    col = {n: table[:, i] for i, n in enumerate(names)}
    for n in ("predicted", "true_rank"):
        if n in col:
            col[n] = col[n].astype(np.int64)
    correct = ptrue = None
    if labelled:
        correct = col["predicted"] == cf.labels
        ptrue = da.exp(col["true_log_probability"])
    return an.SampleScores(
        temperature=t, predicted=col["predicted"], confidence=col["confidence"], entropy=col["entropy"],
        margin=col["margin"], logit_margin=col["logit_margin"], energy=col["energy"], true_probability=ptrue,
        true_log_probability=col.get("true_log_probability"), brier=col.get("brier"), true_rank=col.get("true_rank"),
        correct=correct,
    )  # fmt: skip


# --------------------------------------------------------------------------- temperature


def _block_moments(zb: np.ndarray, yb: np.ndarray, beta: float, offset: int) -> tuple[float, float, float]:
    """Sums (not means) of the NLL and its two derivatives in beta over one checked block of rows."""
    n = zb.shape[0]
    if n == 0:
        return 0.0, 0.0, 0.0
    try:
        with _one_numba_thread():
            nll, d1, d2 = an.temperature_moments(zb, yb, beta)
    except NonFiniteError:
        raise _nonfinite(zb, offset) from None
    return nll * n, d1 * n, d2 * n


def _moments_part(beta: float) -> Callable[[Any, Any, int], tuple[float, float, float]]:
    def part(z: Any, y: Any, offset: int) -> tuple[float, float, float]:
        zb, yb = _checked_block(z, y, offset)
        assert yb is not None
        return _block_moments(zb, yb, beta, offset)

    return part


def _sum_moments(parts: Sequence[tuple[float, float, float]]) -> tuple[float, float, float]:
    return (math.fsum(p[0] for p in parts), math.fsum(p[1] for p in parts), math.fsum(p[2] for p in parts))


def _require_labels(cf: ChunkedFrame, what: str) -> None:
    if cf.labels is None:
        raise LabelError(f"{what} needs labels; this store has none")


def fit_temperature(cf: ChunkedFrame, rtol: float = 1e-5, max_iter: int = 50, seed: int = 0) -> an.TemperatureFit:
    """:func:`logitscope.analysis.fit_temperature` over the chunks: the same iteration, each evaluation one reduction.

    The warm start reads the same seeded subsample of rows as the in-memory fit.
    """
    import dask

    _require_labels(cf, "fit_temperature")
    n = cf.n_samples
    blocks = cf.blocks()

    def on_all(beta: float) -> tuple[float, float, float]:
        part = _moments_part(float(beta))
        parts = [dask.delayed(part)(z, y, offset) for z, y, offset in blocks]
        (sums,) = compute(_tree(parts, _sum_moments))
        return sums[0] / n, sums[1] / n, sums[2] / n

    def on_sample(rng: np.random.Generator) -> Any:
        rows = np.sort(rng.choice(n, WARM_START_ROWS, replace=False))  # the in-memory fit's subsample
        assert cf.labels is not None
        zs, ys = compute(cf.logits[rows], cf.labels[rows])

        def on_sub(b: float) -> tuple[float, float, float]:
            with assume_valid():  # the rows were read from the chunks the full passes check
                return an.temperature_moments(zs, ys, b)

        return on_sub

    return newton_fit(on_all, on_sample, n, rtol, max_iter, seed)


_fit = fit_temperature  # summarize_chunked's argument of that name hides the function


# --------------------------------------------------------------------------- counts and bins


def _t(cf: ChunkedFrame, temperature: float | None) -> float:
    return cf.temperature if temperature is None else check_temperature(temperature)


def _bins_result(part: dict[str, Any], n_bins: int, bin_of: Any) -> an.ReliabilityBins:
    edges = np.linspace(0.0, 1.0, n_bins + 1)
    count = part["count"].astype(np.int64)
    with np.errstate(invalid="ignore", divide="ignore"):
        acc = part["hits"] / count
        conf = part["confidence"] / count
    return an.ReliabilityBins(
        lower=edges[:-1], upper=edges[1:], count=count, accuracy=acc, confidence=conf, bin_of=bin_of,
        strategy="uniform",
    )  # fmt: skip


def _lazy_bin_of(cf: ChunkedFrame, t: float, n_bins: int) -> Any:
    import dask.array as da

    edges = np.linspace(0.0, 1.0, n_bins + 1)
    conf = sample_scores(cf, t).confidence
    return da.map_blocks(lambda c: np.searchsorted(edges[1:-1], c, side="left").astype(np.int64), conf, dtype=np.int64)


def reliability_bins(cf: ChunkedFrame, temperature: float | None = None, n_bins: int = 15) -> an.ReliabilityBins:
    """Equal-width reliability bins (Guo et al. 2017) over all chunks; ``bin_of`` is a lazy dask array.

    Equal-mass bins need the global order of the confidences and are offered in memory only.
    """
    _require_labels(cf, "reliability_bins")
    n_bins = int(n_bins)
    if n_bins < 1:
        raise ParameterError(f"n_bins must be a positive integer, got {n_bins!r}")
    t = _t(cf, temperature)
    (part,) = _run(cf, t, [_Bins(n_bins)])
    return _bins_result(part, n_bins, _lazy_bin_of(cf, t, n_bins))


def confusion_matrix(cf: ChunkedFrame, temperature: float | None = None) -> np.ndarray:
    """Counts ``C[i, j]`` of true class ``i`` predicted as ``j`` (as :func:`logitscope.analysis.confusion_matrix`)."""
    _require_labels(cf, "confusion_matrix")
    (part,) = _run(cf, _t(cf, temperature), [_Confusion(cf.n_classes)])
    return part["matrix"].reshape(cf.n_classes, cf.n_classes)


def top_k_confusion(cf: ChunkedFrame, k: int = 3) -> np.ndarray:
    """:func:`logitscope.analysis.top_k_confusion` summed over the chunks."""
    _require_labels(cf, "top_k_confusion")
    k = check_k(k, cf.n_classes)
    (part,) = _run(cf, cf.temperature, [_TopKConfusion(k)])
    return np.asarray(part["matrix"])


def class_counts(cf: ChunkedFrame, temperature: float | None = None) -> dict[str, np.ndarray]:
    """Counts per class of the predicted classes and (with labels) of the labels, for the class-mix tests.

    Feed them to :func:`logitscope.analysis.class_mix_test` or
    :func:`logitscope.analysis.compare_class_mix`.
    """
    (part,) = _run(cf, _t(cf, temperature), [_Confusion(cf.n_classes)])
    out = {"predicted": part["predicted"]}
    if "labels" in part:
        out["labels"] = part["labels"]
    return out


# --------------------------------------------------------------------------- global order, exactly


@dataclass(frozen=True)
class ExactOrder:
    """The order of the confidences as far as errors are concerned, at one temperature.

    ``errors`` holds the confidences of the wrong samples, ascending.
    ``gap[s]`` counts the right samples strictly between ``errors[s-1]`` and
    ``errors[s]`` (``s = 0``: below all errors; ``s = m``: above all), and
    ``equal[s]`` those equal to ``errors[s]``.
    """

    temperature: float
    n_total: int
    errors: np.ndarray
    gap: np.ndarray
    equal: np.ndarray

    @property
    def n_errors(self) -> int:
        return int(self.errors.size)

    def _suffix(self) -> np.ndarray:
        """``suffix[s]``: right samples in slots ``>= s`` (length ``m + 2``, the last 0)."""
        m = self.errors.size
        suffix = np.zeros(m + 2, dtype=np.int64)
        np.cumsum((self.gap + self.equal)[::-1], out=suffix[m::-1])
        return suffix

    def rights_above(self) -> np.ndarray:
        """For each error (ascending), the right samples strictly more confident."""
        upper = np.searchsorted(self.errors, self.errors, side="right")
        return self._suffix()[upper]

    def aurc(self, block: int = 1 << 20) -> float:
        """The area under the risk-coverage curve from the errors' order.

        Equal to :func:`logitscope.analysis.aurc` wherever no two *right* samples share a confidence that no
        wrong sample has: samples tied with a wrong sample are grouped with it, as there; right samples tied
        only among themselves are counted in an order of their own (their tie structure is not gathered,
        which would need a global sort). Such ties are rare with float confidences; each lowers the
        in-memory AURC, never raises it, so this value is an upper bound. Summed in blocks of errors, so the
        temporaries stay small beside the counts.
        """
        from scipy.special import digamma

        e, m, n = self.errors, self.errors.size, self.n_total
        if m == 0:
            return 0.0
        suffix = self._suffix()  # rights in slots >= s
        total = 0.0
        # each distinct error value with the right samples tied to it: one group, accepted together
        lo = np.flatnonzero(np.r_[True, e[1:] != e[:-1]])
        hi = np.r_[lo[1:], m]
        errors_ge = (m - lo).astype(np.float64)
        rights_ge = (suffix[lo] - self.gap[lo]).astype(np.float64)
        size = (hi - lo + self.equal[lo]).astype(np.float64)
        total += float(np.sum(size * errors_ge / (errors_ge + rights_ge)))
        # right samples strictly between errors[s - 1] and errors[s]: the m - s errors above, one by one
        for a in range(0, m, block):
            b = min(m, a + block)
            slots = np.arange(a, b)
            count = self.gap[slots].astype(np.float64)
            above = (m - slots).astype(np.float64) + (suffix[slots] - self.gap[slots])  # accepted above the gap
            # sum_{j=1..count} E / (above + j) = E * (digamma(above + count + 1) - digamma(above + 1))
            total += float(np.sum((m - slots) * (digamma(above + count + 1.0) - digamma(above + 1.0))))
        return total / n

    def candidates(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Every threshold that can be best, ascending: ``(slot, is_gap_bottom, accepted, errors)``.

        A gap's bottom (its least confident right sample) beats every other
        threshold inside the gap (same errors, more accepted); each distinct
        error value is a candidate of its own. Empty gaps are left out.
        """
        e, m = self.errors, self.errors.size
        rights_ge = self._suffix()  # rights in slots >= s
        g = np.flatnonzero(self.gap > 0)
        # just above errors[s-1]: accepts errors[s:], the gap's rights and every right above
        g_acc, g_err = (m - g) + rights_ge[g], m - g
        last = np.flatnonzero(np.r_[e[1:] != e[:-1], True]) if m else np.zeros(0, dtype=np.int64)
        lo = np.searchsorted(e, e[last], side="left")
        # at an error value: errors >= it, rights equal to it (kept at the first slot of the value) and above
        e_acc, e_err = (m - lo) + self.equal[lo] + rights_ge[last + 1], m - lo
        slots = np.r_[g, last].astype(np.int64)
        gaps = np.r_[np.ones(g.size, dtype=bool), np.zeros(last.size, dtype=bool)]
        order = np.argsort(np.r_[2 * g, 2 * lo + 1], kind="stable")
        acc, err = np.r_[g_acc, e_acc].astype(np.int64), np.r_[g_err, e_err].astype(np.int64)
        return slots[order], gaps[order], acc[order], err[order]


def exact_order(cf: ChunkedFrame, temperature: float | None = None) -> ExactOrder:
    """Two passes: gather the wrong samples' confidences, then place every right sample among them."""
    _require_labels(cf, "the risk-coverage analysis")
    t = _t(cf, temperature)
    (errors,) = _run(cf, t, [_ErrorConfidences()])
    return _order_from_errors(cf, t, _sorted(errors))


def _share(value: np.ndarray) -> Any:
    """A large array every chunk task needs: scattered once to a cluster, else kept as is."""
    from .cluster import active_client

    client = active_client()
    if client is None:
        return value
    return client.scatter(value, broadcast=True)


def aurc(cf: ChunkedFrame, temperature: float | None = None) -> float:
    """The exact area under the risk-coverage curve (see the module docstring)."""
    return exact_order(cf, temperature).aurc()


def _min_right_in_gap(cf: ChunkedFrame, t: float, lo: float, hi: float) -> float:
    class _MinRight(_Collector):
        def chunk(self, s: an.SampleScores, z: np.ndarray, y: np.ndarray | None, offset: int) -> Any:
            assert s.correct is not None
            c = s.confidence[s.correct]
            c = c[(c > lo) & (c < hi)]
            return float(c.min()) if c.size else math.inf

        def combine(self, parts: Sequence[Any]) -> Any:
            return min(parts)

    (value,) = _run(cf, t, [_MinRight()])
    return float(value)


def _threshold_value(cf: ChunkedFrame, order: ExactOrder, slot: int, gap: bool) -> float:
    e = order.errors
    if not gap:
        return float(e[slot])
    lo = float(e[slot - 1]) if slot > 0 else -math.inf
    hi = float(e[slot]) if slot < e.size else math.inf
    return _min_right_in_gap(cf, order.temperature, lo, hi)


def threshold_for_accuracy(
    cf: ChunkedFrame,
    target: float,
    temperature: float | None = None,
    level: float = 0.95,
    method: IntervalMethod = "wilson",
    order: ExactOrder | None = None,
) -> an.ThresholdChoice:
    """:func:`logitscope.analysis.threshold_for_accuracy` over the chunks, exactly (one more pass for the value)."""
    if not 0 < target <= 1:
        raise ParameterError(f"target accuracy must lie in (0, 1], got {target!r}")
    order = order or exact_order(cf, temperature)
    n = order.n_total
    rule = f"lowest threshold whose accuracy >= {target:g}"
    slots, gaps, acc, err = order.candidates()
    ok = np.flatnonzero((acc - err) / np.maximum(acc, 1) >= target - 1e-12)
    if ok.size == 0:
        return _choice(np.inf, 0, 0, n, level, method, rule, feasible=False)
    i = int(ok[0])  # candidates ascend: the first feasible is the lowest threshold
    value = _threshold_value(cf, order, int(slots[i]), bool(gaps[i]))
    return _choice(value, int(acc[i]), int(err[i]), n, level, method, rule)


def threshold_for_cost(
    cf: ChunkedFrame,
    error_cost: float,
    review_cost: float,
    temperature: float | None = None,
    level: float = 0.95,
    method: IntervalMethod = "wilson",
    order: ExactOrder | None = None,
) -> an.ThresholdChoice:
    """:func:`logitscope.analysis.threshold_for_cost` over the chunks, exactly."""
    if not (np.isfinite(error_cost) and np.isfinite(review_cost)) or error_cost < 0 or review_cost < 0:
        raise ParameterError(f"costs must be non-negative numbers, got {error_cost!r} and {review_cost!r}")
    order = order or exact_order(cf, temperature)
    n = order.n_total
    slots, gaps, acc, err = order.candidates()
    # candidates from high threshold to low, after "accept nothing", as the in-memory rule scans them
    acc_d, err_d = np.r_[0, acc[::-1]], np.r_[0, err[::-1]]
    cost = (error_cost * err_d + review_cost * (n - acc_d)) / n
    best = int(np.flatnonzero(cost <= cost.min() + 1e-12)[-1])
    rule = f"minimum expected cost with error cost {error_cost:g} and review cost {review_cost:g}"
    if best == 0:
        return _choice(np.inf, 0, 0, n, level, method, rule, cost=float(cost[0]))
    i = slots.size - best
    value = _threshold_value(cf, order, int(slots[i]), bool(gaps[i]))
    return _choice(value, int(acc[i]), int(err[i]), n, level, method, rule, cost=float(cost[best]))


def evaluate_threshold(
    cf: ChunkedFrame,
    threshold: float,
    temperature: float | None = None,
    level: float = 0.95,
    method: IntervalMethod = "wilson",
) -> an.ThresholdChoice:
    """Coverage and accuracy of accepting ``confidence >= threshold`` (one pass)."""
    _require_labels(cf, "evaluate_threshold")
    (part,) = _run(cf, _t(cf, temperature), [_Threshold(np.array([threshold]))])
    n_acc, n_err = int(part["accepted"][0]), int(part["errors"][0])
    return _choice(threshold, n_acc, n_err, cf.n_samples, level, method, f"fixed at {threshold:g}")


@dataclass(frozen=True)
class BinnedRiskCoverage(an.RiskCoverage):
    """A :class:`~logitscope.analysis.RiskCoverage` at the lower edges of fine confidence bins.

    The counts are exact at each listed threshold; thresholds between two
    listed ones are not shown. ``resolution`` is the bins' relative width in
    the confidence.
    """

    resolution: float = 2.0**-RC_MANTISSA_BITS


def risk_coverage_curve(cf: ChunkedFrame, temperature: float | None = None) -> BinnedRiskCoverage:
    """The risk-coverage curve from a fine histogram of the confidence (one pass), most confident first."""
    _require_labels(cf, "risk_coverage_curve")
    (part,) = _run(cf, _t(cf, temperature), [_RCHistogram()])
    return _rc_result(part, cf.n_samples)


def _rc_result(part: dict[str, Any], n: int) -> BinnedRiskCoverage:
    count, errors = part["count"][::-1], part["errors"][::-1]
    edges = _rc_lower_edges()[::-1]
    used = count > 0
    acc, err = np.cumsum(count)[used], np.cumsum(errors)[used]
    return BinnedRiskCoverage(threshold=edges[used], n_accepted=acc, n_errors=err, n_total=n)


# --------------------------------------------------------------------------- doubtful labels


class _CLThresholds(_Collector):
    def __init__(self, k: int, beta: float) -> None:
        self.k, self.beta = k, beta

    def chunk(self, s: an.SampleScores, z: np.ndarray, y: np.ndarray | None, offset: int) -> Any:
        assert s.true_probability is not None and y is not None
        return {"total": np.bincount(y, weights=s.true_probability, minlength=self.k)}


class _DoubtfulCandidates(_Collector):
    def __init__(self, method: str, top: int, beta: float, thresholds: np.ndarray | None) -> None:
        self.method, self.top, self.beta, self.thresholds = method, top, beta, thresholds

    def chunk(self, s: an.SampleScores, z: np.ndarray, y: np.ndarray | None, offset: int) -> Any:
        assert s.true_probability is not None and s.correct is not None and y is not None
        best_other = np.where(s.correct, s.confidence - s.margin, s.confidence)
        nm = s.true_probability - best_other
        suggested = s.predicted.copy()
        if np.any(s.correct):
            rows = np.flatnonzero(s.correct)
            with assume_valid():
                suggested[rows] = _runner_up(z, rows)
        if self.method == "given_probability":
            score, keep = s.true_probability, np.arange(len(s))
        elif self.method == "label_margin":
            score, keep = nm, np.arange(len(s))
        else:
            assert self.thresholds is not None
            with assume_valid():
                assigned = _confident_assignment(z, y, self.beta, self.thresholds)
            keep = np.flatnonzero((assigned >= 0) & (assigned != y))
            score = nm
            suggested[keep] = assigned[keep]
        order = keep[np.argsort(score[keep], kind="stable")][: self.top]
        return score[order], order + offset, suggested[order], int(keep.size)

    def combine(self, parts: Sequence[Any]) -> Any:
        score = np.concatenate([p[0] for p in parts])
        index = np.concatenate([p[1] for p in parts])
        suggested = np.concatenate([p[2] for p in parts])
        order = np.lexsort((index, score))[: self.top]  # by score, ties by row: as a stable sort of all rows
        return score[order], index[order], suggested[order], sum(p[3] for p in parts)


def cl_thresholds(totals: dict[str, Any], confusion: dict[str, Any]) -> np.ndarray:
    """Confident learning's per-class thresholds (mean given-label probability per class) from the sums of
    a ``_CLThresholds`` and a ``_Confusion`` collector of one pass."""
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.asarray(totals["total"] / confusion["labels"])


def rank_doubtful_labels(
    cf: ChunkedFrame,
    method: Literal["confident_learning", "given_probability", "label_margin"] = "confident_learning",
    temperature: float | None = None,
    top: int = 1000,
    count: bool = False,
    class_thresholds: np.ndarray | None = None,
) -> Any:
    """The first ``top`` rows of :func:`logitscope.analysis.rank_doubtful_labels`: each chunk's best, merged.

    Confident learning (Northcutt et al. 2021) first needs its per-class
    thresholds over all rows: one pass more. With ``count``, returns
    ``(ranking, n)``, ``n`` the number of rows the whole ranking holds (the rows
    confident learning flags; every row for the other methods). ``class_thresholds``: confident
    learning's per-class thresholds when a pass of the caller's has summed them (:func:`cl_thresholds`).
    """
    _require_labels(cf, "rank_doubtful_labels")
    if method not in ("confident_learning", "given_probability", "label_margin"):
        raise ParameterError(
            f"method must be 'confident_learning', 'given_probability' or 'label_margin', got {method!r}"
        )
    t = _t(cf, temperature)
    beta = 1.0 / t
    thresholds = class_thresholds
    if method == "confident_learning" and thresholds is None:
        part, conf = _run(cf, t, [_CLThresholds(cf.n_classes, beta), _Confusion(cf.n_classes)])
        thresholds = cl_thresholds(part, conf)
    (found,) = _run(cf, t, [_DoubtfulCandidates(method, int(top), beta, thresholds)])
    score, index, suggested, n_ranked = found
    ranking = an.DoubtfulLabelRanking(method=method, index=index, score=score, suggested=suggested)
    return (ranking, int(n_ranked)) if count else ranking


# --------------------------------------------------------------------------- the summary


def summarize_chunked(
    cf: ChunkedFrame,
    temperature: float | None = None,
    fit_temperature: bool = False,
    target_accuracy: float | None = None,
    n_bins: int = 15,
    interval: IntervalMethod = "wilson",
) -> dict[str, Any]:
    """The summary dict of :func:`logitscope.summary.summarize` for a chunked batch, with the same keys.

    Passes over the data: the temperature fit when asked (a few), one for every
    count and sum, one more for the area under the risk-coverage curve and one
    more for a threshold's value.
    """
    # a chunked store is fully labelled or not labelled at all (a null or negative label is refused)
    n_labelled = cf.n_samples if cf.has_labels else 0
    out: dict[str, Any] = {"n_samples": cf.n_samples, "n_labelled": n_labelled, "n_classes": cf.n_classes}
    fit = None
    if fit_temperature:
        fit = _fit(cf)
        t = fit.temperature
    else:
        t = _t(cf, temperature)
    if target_accuracy is not None and cf.labels is None:
        raise LabelError("a threshold for a target accuracy needs labels")
    ks = an.default_ks(cf.n_classes)
    labelled = cf.labels is not None
    collectors: list[_Collector] = [_Totals(ks)]
    if labelled:
        collectors += [_Bins(n_bins), _ErrorConfidences()]
    parts = _run(cf, t, collectors)
    totals = parts[0]
    n = totals["n"]
    order = None
    if labelled:
        bins = _bins_result(parts[1], n_bins, None)
        out["accuracy"] = totals["correct"] / n
        out["top_k_accuracy"] = {str(k): int(v) / n for k, v in zip(ks, totals["top_k"], strict=True)}
        out["nll"] = -totals["log_probability"] / n
        out["brier"] = totals["brier"] / n
        out["ece"] = bins.ece
        out["mce"] = bins.mce
    out["mean_confidence"] = totals["confidence"] / n
    out["mean_entropy"] = totals["entropy"] / n
    if labelled:
        order = _order_from_errors(cf, t, _sorted(parts[2]))
        out["aurc"] = order.aurc()
    out["temperature"] = t
    if fit is not None:
        out["fitted_temperature"] = fit.temperature
        out["nll_before_fit"] = fit.nll_before
    if target_accuracy is not None:
        choice = threshold_for_accuracy(cf, target_accuracy, t, method=interval, order=order)
        out["threshold"] = choice.to_dict()
        out["threshold"]["target_accuracy"] = target_accuracy
        out["caution"] = an.CAUTION
    return out


def _order_from_errors(cf: ChunkedFrame, t: float, errors: np.ndarray) -> ExactOrder:
    import dask

    m = int(errors.size)
    shared = _share(errors)
    rights = _RightsAmongErrors(t)
    dense: Any = None
    for z, y, offset in cf.blocks():
        part = dask.delayed(rights)(z, y, offset, shared)
        dense = dask.delayed(_accumulate_rights)(dense, part, m + 1, "int32" if cf.n_samples < 2**31 else "int64")
    (counts,) = compute(dense)
    counts = counts.reshape(m + 1, 2)
    return ExactOrder(temperature=t, n_total=cf.n_samples, errors=errors, gap=counts[:, 0], equal=counts[:, 1])
