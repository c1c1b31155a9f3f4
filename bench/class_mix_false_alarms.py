"""False-alarm and power table of the class-mix check on the bundled demo data.

Usage::

    python bench/class_mix_false_alarms.py            # 2000 no-shift splits per data set
    python bench/class_mix_false_alarms.py --splits 500

A random split of one data set into a reference part and a batch part has no
class-mix shift, so a test at alpha = 0.05 should reject about 5 % of the
splits. The table compares

- before: the batch's predicted counts against the reference's *label*
  proportions, taken as exact, by the one-sample goodness-of-fit test (what
  ClassMixView did);
- after: :meth:`LogitFrame.class_mix_check` against the reference part, i.e.
  predicted against predicted by the two-sample test of homogeneity;

and the power of the new check when the batch keeps only 30 % of one class.
Rates are printed with their binomial standard error.
"""

from __future__ import annotations

import argparse

import numpy as np

import logitscope
from logitscope.analysis import class_counts, class_mix_check, class_mix_test


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--splits", type=int, default=2000)
    parser.add_argument("--alpha", type=float, default=0.05)
    args = parser.parse_args()
    print(f"{'data set':<10} {'method':<58} {'rejection rate':>16}")
    for name in ("mailroom", "helpdesk"):
        frame = logitscope.load_demo(name)
        k, n = frame.n_classes, frame.n_samples
        pred = frame.sample_scores().predicted
        y = np.asarray(frame.labels)
        rng = np.random.default_rng(0)
        before, after, power = [], [], []
        for _ in range(args.splits):
            perm = rng.permutation(n)
            ref, batch = perm[: n // 2], perm[n // 2 :]
            before.append(class_mix_test(class_counts(pred[batch], k), class_counts(y[ref], k)).p_value < args.alpha)
            after.append(
                class_mix_check(
                    class_counts(pred[batch], k), reference_counts=class_counts(pred[ref], k), alpha=args.alpha
                ).shifted
            )
            of_class = batch[y[batch] == 0]
            kept = np.setdiff1d(batch, of_class[int(0.3 * of_class.size) :])
            power.append(
                class_mix_check(
                    class_counts(pred[kept], k), reference_counts=class_counts(pred[ref], k), alpha=args.alpha
                ).shifted
            )
        rows = (
            ("before: predicted vs reference labels, goodness of fit", before),
            ("after: predicted vs predicted, homogeneity (no shift)", after),
            ("after: power, batch keeps 30 % of class 0", power),
        )
        for label, hits in rows:
            rate = float(np.mean(hits))
            se = np.sqrt(rate * (1 - rate) / len(hits))
            print(f"{name:<10} {label:<58} {rate:>8.3f} +- {se:.3f}")


if __name__ == "__main__":
    main()
