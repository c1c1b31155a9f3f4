"""Benchmark the per-sample scores and the temperature fit against baselines measured in the same run.

Usage::

    python bench/bench_scores.py            # N = 1,000,000, K = 100, float32
    python bench/bench_scores.py --n 200000 --k 1000

Baselines:

- floor: one streaming pass ``z.sum(axis=1)``, the memory-bandwidth floor;
- naive: ``scipy.special.softmax`` + ``scipy.stats.entropy`` + ``np.sort`` for the margin;
- torch: ``torch.log_softmax`` + entropy + ``torch.topk(2)`` on the CPU, when torch is installed.

Targets (checked and printed, never asserted in unit tests): the per-sample
scores *including the frame's own validation* (building the frame, whose first
scoring pass at its temperature checks every value for NaN and infinities and is
kept, then ``sample_scores``, which finds those scores cached) within 4x of the
floor, both for a frame that shares the caller's matrix and for one that copies
it (the copy is a pass of its own before the scores); ``LogitFrame.scores()`` (a DataFrame)
within 6x and at least 10x faster than the naive composition; the temperature
fit within 15 floor passes; peak memory of ``scores()`` under 1.5x the logit
matrix. The timings are best-of-``--repeat`` wall times, the candidates and the
floor measured in turns so that a busy machine slows all of them alike.
"""

from __future__ import annotations

import argparse
import time
import tracemalloc
from collections.abc import Callable

import numpy as np

from logitscope import LogitFrame
from logitscope.analysis import find_nonfinite_rows, sample_scores, temperature_moments
from logitscope.analysis import scores as scores_module
from logitscope.analysis._validation import assume_valid, check_logits


def best_of(fn: Callable[[], object], repeat: int) -> float:
    best = float("inf")
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - start)
    return best


def in_turns(fns: dict[str, Callable[[], object]], repeat: int) -> dict[str, float]:
    """Best wall time of each function, the functions run in turns ``repeat`` times."""
    best = dict.fromkeys(fns, float("inf"))
    for _ in range(repeat):
        for name, fn in fns.items():
            start = time.perf_counter()
            fn()
            best[name] = min(best[name], time.perf_counter() - start)
    return best


def naive(z: np.ndarray, y: np.ndarray) -> dict[str, np.ndarray]:
    from scipy.special import softmax
    from scipy.stats import entropy

    p = softmax(z, axis=1)
    top2 = np.sort(p, axis=1)[:, -2:]
    return {
        "predicted": p.argmax(axis=1),
        "confidence": top2[:, 1],
        "entropy": entropy(p, axis=1),
        "margin": top2[:, 1] - top2[:, 0],
        "true_probability": p[np.arange(len(y)), y],
    }


def torch_scores(zt: object, yt: object) -> object:
    import torch

    logp = torch.log_softmax(zt, dim=1)
    p = logp.exp()
    ent = -(p * logp).sum(dim=1)
    top = torch.topk(p, 2, dim=1).values
    return ent, top[:, 0] - top[:, 1], p.gather(1, yt[:, None])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--n", type=int, default=1_000_000)
    parser.add_argument("--k", type=int, default=100)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--seed", type=int, default=0)
    args = parser.parse_args()

    rng = np.random.default_rng(args.seed)
    # a parcel-sorting camera's logits: a class signal plus noise, float32
    y = rng.integers(0, args.k, args.n)
    z = rng.standard_normal((args.n, args.k), dtype=np.float32) * np.float32(2.0)
    z[np.arange(args.n), y] += np.float32(4.0)
    frame = LogitFrame(z, labels=y)
    mb = z.nbytes / 2**20
    print(f"N = {args.n:,}, K = {args.k}, float32 logits: {mb:.0f} MiB; backends: {scores_module.available_backends()}")

    # warm up (numba compiles or loads its cache; page in the matrix)
    sample_scores(z[:1000], y[:1000])
    temperature_moments(z[:1000], y[:1000], 1.0)
    z.sum(axis=1)

    def fresh_scores() -> object:
        frame._cache.clear()  # time the computation, not the per-temperature cache
        return frame.scores()

    def separate_passes() -> object:
        owned = np.array(z, copy=True)  # copy, then check, then score: three passes
        check_logits(owned)
        with assume_valid():
            return sample_scores(owned, y)

    turns = in_turns(
        {
            "floor": lambda: z.sum(axis=1),
            "nonfinite": lambda: find_nonfinite_rows(z),
            "shared": lambda: LogitFrame(z, labels=y, copy=False).sample_scores(),
            "copied": lambda: LogitFrame(z, labels=y, copy=True).sample_scores(),
            "separate": separate_passes,
            "frame": fresh_scores,
            "arrays": lambda: sample_scores(z, y),
        },
        args.repeat,
    )
    floor, t_frame, t_shared, t_copied = turns["floor"], turns["frame"], turns["shared"], turns["copied"]
    rows: list[tuple[str, float]] = [("floor: z.sum(axis=1)", floor)]
    rows.append(("finiteness check alone (find_nonfinite_rows)", turns["nonfinite"]))
    rows.append(("LogitFrame(copy=False).sample_scores(): input shared", t_shared))
    rows.append(("LogitFrame(copy=True).sample_scores(): a copy, then the scores", t_copied))
    rows.append(("  baseline: np.array copy, check_logits, sample_scores", turns["separate"]))
    t_arrays = turns["arrays"]
    rows.append((f"analysis.sample_scores ({scores_module.available_backends()[0]}, checks finiteness)", t_arrays))
    t_numpy = best_of(lambda: sample_scores(z, y, backend="numpy"), 1)
    rows.append(("analysis.sample_scores (numpy backend)", t_numpy))
    t_naive = best_of(lambda: naive(z, y), 1)
    rows.append(("naive: scipy softmax + entropy + np.sort", t_naive))
    try:
        import torch

        torch.set_num_threads(2)
        zt, yt = torch.from_numpy(z), torch.from_numpy(y)
        torch_scores(zt[:1000], yt[:1000])
        rows.append(
            (f"torch {torch.__version__} log_softmax + entropy + topk", best_of(lambda: torch_scores(zt, yt), 2))
        )
    except ImportError:
        print("torch not installed: its baseline is skipped")

    calls = 0
    original = scores_module.temperature_moments

    def counting(logits: np.ndarray, *a: object, **k: object) -> tuple[float, float, float]:
        nonlocal calls
        calls += logits.shape[0] == args.n  # count passes over all rows, not the warm-start subsample
        return original(logits, *a, **k)

    import logitscope.analysis.temperature as temp_module

    temp_module.temperature_moments = counting  # type: ignore[assignment]
    try:
        start = time.perf_counter()
        fit = frame.fit_temperature()
        t_fit = time.perf_counter() - start
    finally:
        temp_module.temperature_moments = original  # type: ignore[assignment]
    rows.append((f"fit_temperature ({calls} full passes, T = {fit.temperature:.4f})", t_fit))

    width = max(len(r[0]) for r in rows) + 2
    print(f"\n{'what':<{width}}{'seconds':>9}{'x floor':>9}")
    for name, t in rows:
        print(f"{name:<{width}}{t:>9.3f}{t / floor:>9.1f}")

    frame._cache.clear()
    tracemalloc.start()
    frame.scores()
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()

    print("\ntargets")
    checks = [
        ("validation + scores within 4x of the floor, input shared", t_shared / floor, t_shared / floor <= 4.0),
        ("validation + scores within 4x of the floor, input copied", t_copied / floor, t_copied / floor <= 4.0),
        ("scores() within 6x of the floor", t_frame / floor, t_frame / floor <= 6.0),
        ("scores() at least 10x faster than naive", t_naive / t_frame, t_naive / t_frame >= 10.0),
        ("temperature fit within 15 floor passes", t_fit / floor, t_fit / floor <= 15.0),
        ("peak memory of scores() under 1.5x the matrix", peak / z.nbytes, peak / z.nbytes < 1.5),
    ]
    for name, value, ok in checks:
        print(f"  {'met ' if ok else 'MISS'}  {name}: {value:.2f}")


if __name__ == "__main__":
    main()
