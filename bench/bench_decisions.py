"""Benchmark the threshold rules and the prior EM against baselines measured in the same run.

Usage::

    python bench/bench_decisions.py                   # 1M confidences; EM on 100,000 x 100 float32
    python bench/bench_decisions.py --n 200000 --em-n 50000 --em-k 1000

Threshold rules (issue 7: the lower-bound rule looped in Python over every distinct confidence,
14 s Wilson / 34 s Clopper-Pearson at 100k rows). Printed beside:

- floor: ``np.sort`` of the confidences, which any exact rule over all thresholds needs;
- old: the previous per-threshold loop, run on ``--old-n`` rows and extrapolated linearly to ``--n``
  (it costs one interval per distinct confidence);
- target: the lower-bound rule under 0.2 s at 1M rows.

Prior EM (issue 7: ``estimate_priors`` built N x K float64 copies, 229 MB and 4.7 s at 100k x 100).
Printed per EM step beside one streaming pass ``z.sum(axis=1)`` (the memory floor), one fused score
pass ``sample_scores(z)`` (what "one pass over the logits" costs), and the previous dense
implementation; peak extra memory (tracemalloc) of both.

Timings are best-of-``--repeat`` wall times; other processes on the machine change them, the
ratios less so.
"""

from __future__ import annotations

import argparse
import importlib
import time
import tracemalloc
from collections.abc import Callable

import numpy as np

from logitscope.analysis import (
    binomial_interval,
    estimate_priors,
    log_softmax,
    risk_coverage_curve,
    sample_scores,
    threshold_for_accuracy,
)

_scores = importlib.import_module("logitscope.analysis.scores")


def best_of(fn: Callable[[], object], repeat: int) -> float:
    best = float("inf")
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - start)
    return best


def old_lower_bound_rule(conf: np.ndarray, ok: np.ndarray, target: float, method: str) -> float:
    """The previous implementation: one binomial_interval per distinct confidence, in Python."""
    rc = risk_coverage_curve(conf, ok)
    right = rc.n_accepted - rc.n_errors
    score = np.array(
        [binomial_interval(int(r), int(a), 0.95, method)[0] for r, a in zip(right, rc.n_accepted, strict=True)]  # type: ignore[arg-type]
    )
    idx = np.flatnonzero(score >= target - 1e-12)
    return float(rc.threshold[idx[-1]]) if idx.size else float("inf")


def old_estimate_priors(z: np.ndarray, pt: np.ndarray, steps: int) -> np.ndarray:
    """The previous implementation: a float64 log-softmax of the whole matrix, then dense EM steps."""
    logp = log_softmax(z, dtype=np.float64)
    pi = pt.copy()
    for _ in range(steps):
        w = logp + np.log(pi / pt)[None, :]
        w -= w.max(axis=1, keepdims=True)
        np.exp(w, out=w)
        w /= w.sum(axis=1, keepdims=True)
        pi = w.mean(axis=0)
    return pi


def peak_bytes(fn: Callable[[], object]) -> int:
    tracemalloc.start()
    fn()
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return peak


def bench_thresholds(n: int, old_n: int, repeat: int) -> None:
    rng = np.random.default_rng(0)
    conf = rng.beta(8.0, 1.2, n)  # confidences of a good model, nearly all distinct
    ok = rng.random(n) < np.clip(conf + 0.02, 0.0, 1.0)
    target = 0.97
    print(f"threshold rules on {n:,} confidences ({np.unique(conf).size:,} distinct), target accuracy {target}")
    floor = best_of(lambda: np.sort(conf), repeat)
    print(f"  floor  np.sort(confidence)                          {floor * 1e3:8.1f} ms")
    rows = [
        ("risk_coverage_curve", lambda: risk_coverage_curve(conf, ok)),
        ("accuracy >= target", lambda: threshold_for_accuracy(conf, ok, target)),
        ("Wilson lower bound >= target", lambda: threshold_for_accuracy(conf, ok, target, use_lower_bound=True)),
        (
            "Clopper-Pearson lower bound >= target",
            lambda: threshold_for_accuracy(conf, ok, target, method="clopper-pearson", use_lower_bound=True),
        ),
    ]
    new = {}
    for label, fn in rows:
        t = best_of(fn, repeat)
        new[label] = t
        flag = ""
        if "lower bound" in label:
            flag = "  target < 200 ms at 1M: " + ("met" if t < 0.2 * n / 1e6 else "NOT met")
        print(f"  new    {label:<42} {t * 1e3:8.1f} ms  {t / floor:5.1f}x floor{flag}")
    sub = slice(0, old_n)
    pairs = (("wilson", "Wilson lower bound >= target"), ("clopper-pearson", "Clopper-Pearson lower bound >= target"))
    for method, label in pairs:
        c_s, ok_s = conf[sub], ok[sub]
        t_old = best_of(lambda c_s=c_s, ok_s=ok_s, m=method: old_lower_bound_rule(c_s, ok_s, target, m), 1)
        same = (
            old_lower_bound_rule(c_s, ok_s, target, method)
            == threshold_for_accuracy(
                c_s,
                ok_s,
                target,
                method=method,
                use_lower_bound=True,  # type: ignore[arg-type]
            ).threshold
        )
        t_old_n = t_old * n / old_n
        print(
            f"  old    {method:<15} loop on {old_n:,} rows {t_old:7.2f} s -> {t_old_n:8.1f} s at {n:,} "
            f"(extrapolated): new is {t_old_n / new[label]:,.0f}x faster; same threshold: {same}"
        )


def bench_em(n: int, k: int, steps: int, repeat: int) -> None:
    rng = np.random.default_rng(1)
    z = (rng.normal(size=(n, k)) * 3.0).astype(np.float32)
    pt = np.full(k, 1.0 / k)
    print(f"\nprior EM (Saerens et al. 2002) on {n:,} x {k} float32 ({z.nbytes / 2**20:.0f} MB), {steps} steps")
    floor = best_of(lambda: z.sum(axis=1), repeat)
    fused = best_of(lambda: sample_scores(z), repeat)
    print(f"  floor  z.sum(axis=1)                       {floor * 1e3:8.1f} ms")
    print(f"  pass   sample_scores(z) (one fused pass)   {fused * 1e3:8.1f} ms")

    def run_new() -> object:
        return estimate_priors(z, pt, tol=0.0, max_iter=steps)

    backends = _scores.available_backends()
    for backend in backends:
        saved = _scores._numba
        if backend == "numpy":
            _scores._numba = lambda: None  # the numpy path, as LOGITSCOPE_BACKEND=numpy gives
        try:
            t = best_of(run_new, repeat) / steps
            mem = peak_bytes(run_new)
        finally:
            _scores._numba = saved
        print(
            f"  new    {backend:<6} per step                     {t * 1e3:8.1f} ms  {t / floor:5.1f}x floor  "
            f"{t / fused:4.2f}x one fused pass  peak extra memory {mem / 2**20:6.1f} MB"
        )
    t_old = best_of(lambda: old_estimate_priors(z, pt, steps), 1) / steps
    mem_old = peak_bytes(lambda: old_estimate_priors(z, pt, steps))
    print(
        f"  old    dense per step (plus its log-softmax)  {t_old * 1e3:8.1f} ms  {t_old / floor:5.1f}x floor  "
        f"peak extra memory {mem_old / 2**20:6.1f} MB"
    )
    np.testing.assert_allclose(run_new().priors, old_estimate_priors(z, pt, steps), rtol=1e-9, atol=1e-12)  # type: ignore[attr-defined]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=1_000_000)
    parser.add_argument("--old-n", type=int, default=5_000)
    parser.add_argument("--em-n", type=int, default=100_000)
    parser.add_argument("--em-k", type=int, default=100)
    parser.add_argument("--em-steps", type=int, default=10)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    bench_thresholds(args.n, args.old_n, args.repeat)
    bench_em(args.em_n, args.em_k, args.em_steps, args.repeat)


if __name__ == "__main__":
    main()
