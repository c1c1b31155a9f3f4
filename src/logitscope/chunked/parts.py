"""Reductions over the parts of a chunked batch: the report's findings, chunk by chunk.

The report of a batch read in chunks (:func:`logitscope.findings.collect_chunked`)
needs, beside the whole batch, the two parts of its own held-out split. That
split is by row hash (:func:`logitscope.analysis.held_out_by_hash`), so each
chunk knows which of its rows are held out from their positions alone. Here:

- :class:`PartStats`: per part, every count and sum of a calibration summary
  (accuracy, top-k, NLL, Brier, equal-width bins, mean confidence and entropy);
- :class:`ErrorRecords` and :func:`grouped_orders`: the exact order of the
  confidences (:class:`~logitscope.chunked.analysis.ExactOrder`) of each part,
  and of each predicted class within a part, from two passes for all groups at
  once (the wrong samples gathered, then every right sample placed among the
  wrong ones of its own group);
- :func:`pick_threshold` and :func:`gap_minima`: a threshold rule applied to such
  an order exactly, the threshold's value read in one more pass;
- :class:`AtThresholds`: accepted and wrong counts per predicted class at given
  thresholds; :class:`SweepCollector`: the temperature sweep's sums
  (:class:`logitscope.analysis._sweep.SweepSums`); :class:`ConfidenceCounts`:
  the report's confidence histogram;
- :func:`fit_temperature_on_part`: the temperature fit on one part, each Newton
  step one reduction over the chunks.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Any, Literal

import numpy as np

from .. import analysis as an
from ..analysis._sweep import SweepSums, sweep_sums
from ..analysis._validation import assume_valid
from ..analysis.selective import IntervalMethod, _choice, _last_lower_bound_reaching
from ..analysis.split import held_out_by_hash
from ..analysis.temperature import WARM_START_ROWS, newton_fit
from .analysis import (
    SUB_ROWS,
    ExactOrder,
    _block_moments,
    _checked_block,
    _Collector,
    _one_numba_thread,
    _rc_bin,
    _rc_n_bins,
    _rc_result,
    _scores,
    _share,
    _tree,
    compute,
)

if TYPE_CHECKING:
    from .frame import ChunkedFrame

__all__ = [
    "SPLIT_FRACTION",
    "SPLIT_SEED",
    "AtThresholds",
    "ConfidenceCounts",
    "ErrorRecords",
    "PartRCHistogram",
    "PartStats",
    "Pending",
    "SweepCollector",
    "fit_temperature_on_part",
    "gap_minima",
    "grouped_orders",
    "part_mask",
    "part_size",
    "pick_threshold",
]

Part = Literal["all", "fit", "held"]
#: The report's own split: half held out, seed 0 (as :func:`logitscope.findings.collect` makes it in memory).
SPLIT_FRACTION = 0.5
SPLIT_SEED = 0


def part_mask(part: str, offset: int, n: int) -> np.ndarray | None:
    """Rows ``offset .. offset + n - 1`` in ``part`` (None: all of them).

    Examples
    --------
    >>> part_mask("held", 0, 8).astype(int).tolist(), part_mask("all", 0, 8) is None
    ([0, 0, 0, 1, 1, 1, 0, 1], True)
    """
    if part == "all":
        return None
    held = held_out_by_hash(offset, offset + n, SPLIT_FRACTION, SPLIT_SEED)
    return held if part == "held" else ~held


def part_size(part: str, n_samples: int, block: int = 1 << 22) -> int:
    """Rows of ``part`` among ``n_samples`` (hashes only; no data read).

    Examples
    --------
    >>> part_size("fit", 8) + part_size("held", 8)
    8
    """
    if part == "all":
        return int(n_samples)
    total = 0
    for a in range(0, n_samples, block):
        m = part_mask(part, a, min(block, n_samples - a))
        assert m is not None
        total += int(np.count_nonzero(m))
    return total


def _take(s: an.SampleScores, m: np.ndarray | None) -> an.SampleScores:
    """The scores of the rows in mask ``m`` (all for None)."""
    if m is None:
        return s
    names = ("predicted", "confidence", "entropy", "margin", "logit_margin", "energy", "true_probability",
             "true_log_probability", "brier", "true_rank", "correct")  # fmt: skip
    changes = {name: getattr(s, name)[m] for name in names if getattr(s, name) is not None}
    return replace(s, **changes)


class PartStats(_Collector):
    """Per part: counts and sums of a calibration summary (keys ``"part/name"``)."""

    def __init__(self, parts: Sequence[str], ks: tuple[int, ...], n_bins: int) -> None:
        self.parts, self.ks, self.n_bins = tuple(parts), ks, n_bins

    def chunk(self, s: an.SampleScores, z: np.ndarray, y: np.ndarray | None, offset: int) -> Any:
        assert s.correct is not None and s.true_rank is not None
        assert s.true_log_probability is not None and s.brier is not None
        edges = np.linspace(0.0, 1.0, self.n_bins + 1)[1:-1]  # as reliability_bins places a confidence
        k, m = z.shape[1], self.n_bins
        split = any(p != "all" for p in self.parts)
        # each sum once per part (0: fit, 1: held out) by bincount; "all" is their sum
        g = part_mask("held", offset, len(s)).astype(np.int64) if split else np.zeros(len(s), dtype=np.int64)  # type: ignore[union-attr]
        b = np.searchsorted(edges, s.confidence, side="left")

        def per(w: np.ndarray | None = None) -> np.ndarray:
            return np.bincount(g, weights=w, minlength=2)

        rank = np.minimum(s.true_rank, k)
        sums = {
            "n": per(),
            "correct": per(s.correct.astype(np.float64)),
            "log_probability": per(s.true_log_probability),
            "brier": per(s.brier),
            "confidence": per(s.confidence),
            "entropy": per(s.entropy),
        }
        ranks = np.cumsum(np.bincount(g * (k + 1) + rank, minlength=2 * (k + 1)).reshape(2, k + 1), axis=1)
        pred = np.bincount(g * k + s.predicted, minlength=2 * k).reshape(2, k)
        bins = g * m + b
        bc = np.bincount(bins, minlength=2 * m).reshape(2, m)
        bh = np.bincount(bins, weights=s.correct, minlength=2 * m).reshape(2, m)
        bf = np.bincount(bins, weights=s.confidence, minlength=2 * m).reshape(2, m)
        out: dict[str, Any] = {}
        for p in self.parts:
            rows = [0, 1] if p == "all" else [1] if p == "held" else [0]
            for key, v in sums.items():
                out[f"{p}/{key}"] = float(v[rows].sum())
            out[f"{p}/n"] = round(out[f"{p}/n"])
            out[f"{p}/correct"] = round(out[f"{p}/correct"])
            out[f"{p}/top_k"] = ranks[rows].sum(axis=0)[list(self.ks)].astype(np.int64)
            out[f"{p}/predicted"] = pred[rows].sum(axis=0)
            out[f"{p}/bin_count"] = bc[rows].sum(axis=0)
            out[f"{p}/bin_hits"] = bh[rows].sum(axis=0)
            out[f"{p}/bin_confidence"] = bf[rows].sum(axis=0)
        return out


class ErrorRecords(_Collector):
    """The wrong samples: confidence, predicted class and whether held out (concatenated, unsorted)."""

    def chunk(self, s: an.SampleScores, z: np.ndarray, y: np.ndarray | None, offset: int) -> Any:
        assert s.correct is not None
        wrong = ~s.correct
        held = part_mask("held", offset, len(s))
        assert held is not None
        return s.confidence[wrong], s.predicted[wrong].astype(np.int32), held[wrong]

    def combine(self, parts: Sequence[Any]) -> Any:
        return tuple(np.concatenate([p[i] for p in parts]) for i in range(3))


def _groups(grouping: str, predicted: np.ndarray, held: np.ndarray) -> np.ndarray:
    """Group of each sample under ``grouping`` (-1: not in any group).

    ``"all"``, ``"fit"``, ``"held"``: one group; ``"class"``: the predicted class
    over all rows; ``"fitclass"``: the predicted class over the fit part.
    """
    if grouping == "all":
        return np.zeros(predicted.shape, dtype=np.int64)
    if grouping == "fit":
        return np.where(held, -1, 0)
    if grouping == "held":
        return np.where(held, 0, -1)
    if grouping == "class":
        return predicted.astype(np.int64)
    if grouping == "fitclass":
        return np.where(held, -1, predicted.astype(np.int64))
    raise ValueError(f"unknown grouping {grouping!r}")  # pragma: no cover - internal


def _n_groups(grouping: str, k: int) -> int:
    return k if grouping in ("class", "fitclass") else 1


@dataclass(frozen=True)
class _OrderSpec:
    """The wrong samples' confidences sorted by (group, confidence) for each grouping, with group starts."""

    groupings: tuple[str, ...]
    errors: tuple[np.ndarray, ...]
    starts: tuple[np.ndarray, ...]


class _GroupedRights:
    """A chunk's right samples placed among the sorted wrong samples of their group, for every grouping."""

    def __init__(self, t: float, k: int) -> None:
        self.t, self.k = t, k

    def __call__(self, z: Any, y: Any, offset: int, spec: _OrderSpec) -> list[tuple[np.ndarray, np.ndarray]]:
        zb, yb = _checked_block(z, y, offset)
        conf, pred, held = [], [], []
        for a in range(0, zb.shape[0], SUB_ROWS):
            ys = None if yb is None else yb[a : a + SUB_ROWS]
            s = _scores(zb[a : a + SUB_ROWS], ys, self.t, offset + a)
            assert s.correct is not None
            h = part_mask("held", offset + a, len(s))
            assert h is not None
            conf.append(s.confidence[s.correct])
            pred.append(s.predicted[s.correct])
            held.append(h[s.correct])
        c_all, p_all, h_all = np.concatenate(conf), np.concatenate(pred), np.concatenate(held)
        by_conf = np.argsort(c_all)  # sorted once; each grouping then orders by group, stably
        c_all, p_all, h_all = c_all[by_conf], p_all[by_conf], h_all[by_conf]
        out = []
        for grouping, errors, starts in zip(spec.groupings, spec.errors, spec.starts, strict=True):
            gid = _groups(grouping, p_all, h_all)
            keep = gid >= 0
            g, c = gid[keep], c_all[keep]
            if starts.size > 2:
                order = np.argsort(g, kind="stable")
                g, c = g[order], c[order]
            bounds = np.searchsorted(g, np.arange(starts.size))
            keys = []
            for j in range(starts.size - 1):
                cj = c[bounds[j] : bounds[j + 1]]
                if cj.size == 0:
                    continue
                e = errors[starts[j] : starts[j + 1]]
                slot = np.searchsorted(e, cj, side="left")
                equal = np.zeros(cj.shape, dtype=np.int64)
                inside = slot < e.size
                equal[inside] = e[slot[inside]] == cj[inside]
                keys.append((starts[j] + j + slot) * 2 + equal)
            key = np.concatenate(keys) if keys else np.zeros(0, dtype=np.int64)  # ascending already
            cut = np.flatnonzero(np.r_[True, key[1:] != key[:-1]]) if key.size else np.zeros(0, dtype=np.int64)
            out.append((key[cut], np.diff(np.r_[cut, key.size])))
        return out


def _accumulate(dense: list[np.ndarray] | None, part: list[tuple[np.ndarray, np.ndarray]], sizes: list[int]) -> Any:
    out = [np.zeros(2 * m, dtype=np.int64) for m in sizes] if dense is None else dense
    for arr, (keys, counts) in zip(out, part, strict=True):
        arr[keys] += counts
    return out


def grouped_orders(
    cf: ChunkedFrame,
    t: float,
    records: tuple[np.ndarray, np.ndarray, np.ndarray],
    groupings: Sequence[str],
    sizes: dict[str, np.ndarray],
) -> dict[str, list[ExactOrder | None]]:
    """For each grouping, the exact order of each of its groups (None for an empty group): one pass.

    ``records`` are :class:`ErrorRecords`' result; ``sizes[grouping]`` the rows of each group.
    """
    import dask

    conf, pred, held = records
    k = cf.n_classes
    errs, starts = [], []
    for grouping in groupings:
        gid = _groups(grouping, pred, held)
        keep = gid >= 0
        g, c = gid[keep], conf[keep]
        order = np.lexsort((c, g))
        errs.append(c[order])
        starts.append(np.searchsorted(g[order], np.arange(_n_groups(grouping, k) + 1)).astype(np.int64))
    spec = _OrderSpec(tuple(groupings), tuple(errs), tuple(starts))
    shared = _share(spec)  # type: ignore[arg-type]
    rights = _GroupedRights(t, k)
    dims = [int(e.size) + _n_groups(g, k) for e, g in zip(errs, groupings, strict=True)]
    dense: Any = None
    for z, y, offset in cf.blocks():
        part = dask.delayed(rights)(z, y, offset, shared)
        dense = dask.delayed(_accumulate)(dense, part, dims)
    (counts,) = compute(dense)
    out: dict[str, list[ExactOrder | None]] = {}
    for grouping, e, st, cnt in zip(groupings, errs, starts, counts, strict=True):
        cnt = cnt.reshape(-1, 2)
        orders: list[ExactOrder | None] = []
        for j in range(st.size - 1):
            n_j = int(sizes[grouping][j])
            if n_j == 0:
                orders.append(None)
                continue
            a, b = int(st[j]), int(st[j + 1])
            gap, equal = cnt[a + j : b + j + 1, 0], cnt[a + j : b + j + 1, 1]
            orders.append(ExactOrder(temperature=t, n_total=n_j, errors=e[a:b], gap=gap, equal=equal))
        out[grouping] = orders
    return out


# --------------------------------------------------------------------------- thresholds on an exact order


@dataclass(frozen=True)
class Pending:
    """A threshold chosen on an exact order whose value may still need one pass (``gap``: the least
    confident right sample strictly between ``low`` and ``high`` of ``part`` / predicted ``cls``)."""

    n_accepted: int
    n_errors: int
    n_total: int
    rule: str
    feasible: bool = True
    cost: float | None = None
    value: float = math.inf
    gap: bool = False
    part: str = "all"
    cls: int = -1
    low: float = -math.inf
    high: float = math.inf

    def choice(self, level: float, method: IntervalMethod, value: float | None = None) -> an.ThresholdChoice:
        v = self.value if value is None else value
        return _choice(v, self.n_accepted, self.n_errors, self.n_total, level, method, self.rule,
                       feasible=self.feasible, cost=self.cost)  # fmt: skip


def pick_threshold(
    order: ExactOrder,
    kind: str,
    *,
    target: float | None = None,
    level: float = 0.95,
    method: IntervalMethod = "wilson",
    use_lower_bound: bool = False,
    error_cost: float | None = None,
    review_cost: float | None = None,
    part: str = "all",
    cls: int = -1,
) -> Pending:
    """The accuracy or cost rule of :mod:`logitscope.analysis.selective` on an exact order.

    Only gap bottoms and error values can be chosen (a gap's bottom has the errors of every threshold
    inside the gap and accepts more), so the rule scans those candidates, from high to low as in memory.
    """
    n = order.n_total
    slots, gaps, acc, err = order.candidates()  # ascending thresholds
    acc_d, err_d, slots_d, gaps_d = acc[::-1], err[::-1], slots[::-1], gaps[::-1]
    if kind == "accuracy":
        assert target is not None
        right = acc_d - err_d
        if use_lower_bound:
            i = _last_lower_bound_reaching(right, acc_d, target - 1e-12, level, method)
            rule = f"lowest threshold whose {method} {level:.0%} lower bound on accuracy >= {target:g}"
        else:
            hits = np.flatnonzero(right / np.maximum(acc_d, 1) >= target - 1e-12)
            i = int(hits[-1]) if hits.size else -1
            rule = f"lowest threshold whose accuracy >= {target:g}"
        if i < 0:
            return Pending(0, 0, n, rule, feasible=False)
        cost = None
    else:
        assert error_cost is not None and review_cost is not None
        a2, e2 = np.r_[0, acc_d], np.r_[0, err_d]
        costs = (error_cost * e2 + review_cost * (n - a2)) / n
        best = int(np.flatnonzero(costs <= costs.min() + 1e-12)[-1])
        rule = f"minimum expected cost with error cost {error_cost:g} and review cost {review_cost:g}"
        cost = float(costs[best])
        if best == 0:
            return Pending(0, 0, n, rule, cost=cost)
        i = best - 1
    slot, gap = int(slots_d[i]), bool(gaps_d[i])
    e = order.errors
    if not gap:
        return Pending(int(acc_d[i]), int(err_d[i]), n, rule, cost=cost, value=float(e[slot]), part=part, cls=cls)
    low = float(e[slot - 1]) if slot > 0 else -math.inf
    high = float(e[slot]) if slot < e.size else math.inf
    return Pending(int(acc_d[i]), int(err_d[i]), n, rule, cost=cost, gap=True, part=part, cls=cls, low=low, high=high)


class _GapMinima(_Collector):
    def __init__(self, queries: Sequence[Pending]) -> None:
        self.queries = tuple(queries)

    def chunk(self, s: an.SampleScores, z: np.ndarray, y: np.ndarray | None, offset: int) -> Any:
        assert s.correct is not None
        held = part_mask("held", offset, len(s))
        assert held is not None
        out = []
        for q in self.queries:
            m = s.correct & (s.confidence > q.low) & (s.confidence < q.high)
            if q.part != "all":
                m &= held if q.part == "held" else ~held
            if q.cls >= 0:
                m &= s.predicted == q.cls
            c = s.confidence[m]
            out.append(float(c.min()) if c.size else math.inf)
        return np.array(out)

    def combine(self, parts: Sequence[Any]) -> Any:
        return np.minimum.reduce(list(parts))


def gap_minima(cf: ChunkedFrame, t: float, pending: Sequence[Pending]) -> list[float]:
    """The value of each pending threshold (one pass for all whose value lies in a gap)."""
    from .analysis import _run

    queries = [p for p in pending if p.gap]
    found: dict[int, float] = {}
    if queries:
        (mins,) = _run(cf, t, [_GapMinima(queries)])
        found = {id(q): float(v) for q, v in zip(queries, mins, strict=True)}
    return [found[id(p)] if p.gap else p.value for p in pending]


class AtThresholds(_Collector):
    """Per query ``(part, limits)``: accepted, wrong and total counts per predicted class, accepting
    ``confidence >= limits[predicted class]``."""

    def __init__(self, queries: Sequence[tuple[str, np.ndarray]]) -> None:
        self.queries = tuple((p, np.asarray(lim, dtype=np.float64)) for p, lim in queries)

    def chunk(self, s: an.SampleScores, z: np.ndarray, y: np.ndarray | None, offset: int) -> Any:
        assert s.correct is not None
        k = z.shape[1]
        out: dict[str, Any] = {}
        for i, (p, limits) in enumerate(self.queries):
            q = _take(s, part_mask(p, offset, len(s)))
            assert q.correct is not None
            accepted = q.confidence >= limits[q.predicted]
            out[f"{i}/accepted"] = np.bincount(q.predicted[accepted], minlength=k)
            out[f"{i}/errors"] = np.bincount(q.predicted[accepted & ~q.correct], minlength=k)
            out[f"{i}/total"] = np.bincount(q.predicted, minlength=k)
        return out


class PartRCHistogram(_Collector):
    """The fine confidence histogram of the risk-coverage curve (:func:`.analysis.risk_coverage_curve`) of a part."""

    def __init__(self, part: str) -> None:
        self.part = part

    def chunk(self, s: an.SampleScores, z: np.ndarray, y: np.ndarray | None, offset: int) -> Any:
        q = _take(s, part_mask(self.part, offset, len(s)))
        assert q.correct is not None
        b = _rc_bin(q.confidence)
        m = _rc_n_bins()
        return {"count": np.bincount(b, minlength=m), "errors": np.bincount(b[~q.correct], minlength=m)}


def binned_curve(part: dict[str, Any], n: int) -> Any:
    """The :class:`~logitscope.chunked.analysis.BinnedRiskCoverage` of a :class:`PartRCHistogram` result."""
    return _rc_result(part, n)


class ConfidenceCounts(_Collector):
    """The report's confidence histogram (:func:`logitscope.findings.histogram.confidence_histogram`)."""

    def __init__(self, edges: np.ndarray) -> None:
        self.edges = edges

    def chunk(self, s: an.SampleScores, z: np.ndarray, y: np.ndarray | None, offset: int) -> Any:
        lo = self.edges[0]
        conf = np.clip(s.confidence, lo, 1.0)
        out = {"total": np.histogram(conf, self.edges)[0]}
        if s.correct is not None:
            out["right"] = np.histogram(conf[s.correct], self.edges)[0]
            out["wrong"] = np.histogram(conf[~s.correct], self.edges)[0]
        return out


class SweepCollector(_Collector):
    """The sums of a temperature sweep over a chunk (every beta in one pass, :func:`.._sweep.sweep_sums`)."""

    def __init__(self, betas: np.ndarray, n_bins: int) -> None:
        self.betas, self.n_bins = np.asarray(betas, dtype=np.float64), n_bins

    def chunk(self, s: an.SampleScores, z: np.ndarray, y: np.ndarray | None, offset: int) -> Any:
        assert y is not None
        with _one_numba_thread():
            return sweep_sums(z, y, self.betas, self.n_bins)

    def combine(self, parts: Sequence[Any]) -> Any:
        out: SweepSums = parts[0]
        for p in parts[1:]:
            out = out.add(p)
        return out


# --------------------------------------------------------------------------- the temperature fit on a part


def _moments_on_part(beta: float, part: str) -> Any:
    def run(z: Any, y: Any, offset: int) -> tuple[float, float, float]:
        zb, yb = _checked_block(z, y, offset)
        assert yb is not None
        m = part_mask(part, offset, zb.shape[0])
        if m is not None:
            zb, yb = zb[m], yb[m]
        return _block_moments(zb, yb, beta, offset)

    return run


def fit_temperature_on_part(
    cf: ChunkedFrame, part: str, rtol: float = 1e-5, max_iter: int = 50, seed: int = 0
) -> an.TemperatureFit:
    """:func:`logitscope.analysis.fit_temperature` on the rows of ``part`` (the in-memory iteration and
    warm-start subsample; each evaluation one reduction over the chunks)."""
    import dask

    from .analysis import _sum_moments

    n = part_size(part, cf.n_samples)
    blocks = cf.blocks()

    def on_all(beta: float) -> tuple[float, float, float]:
        run = _moments_on_part(float(beta), part)
        parts = [dask.delayed(run)(z, y, offset) for z, y, offset in blocks]
        (sums,) = compute(_tree(parts, _sum_moments))
        return sums[0] / n, sums[1] / n, sums[2] / n

    def on_sample(rng: np.random.Generator) -> Any:
        # the in-memory fit draws from the sorted positions of the part: the same draw, mapped chunk by chunk
        picks = np.sort(rng.choice(n, WARM_START_ROWS, replace=False))
        rows, seen = [], 0
        for offset, size in zip(cf.offsets.tolist(), cf.logits.chunks[0], strict=True):
            m = part_mask(part, offset, int(size))
            mine = np.arange(offset, offset + int(size)) if m is None else offset + np.flatnonzero(m)
            lo, hi = np.searchsorted(picks, [seen, seen + mine.size])
            rows.append(mine[picks[lo:hi] - seen])
            seen += mine.size
        idx = np.concatenate(rows)
        assert cf.labels is not None
        zs, ys = compute(cf.logits[idx], cf.labels[idx])

        def on_sub(b: float) -> tuple[float, float, float]:
            with assume_valid():
                return an.temperature_moments(zs, ys, b)

        return on_sub

    return newton_fit(on_all, on_sample, n, rtol, max_iter, seed)
