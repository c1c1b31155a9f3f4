"""Has the class mix of new data shifted?

Class counts of a batch of ``n`` samples follow a multinomial distribution
``Mult(n, pi)``. Two tests of that model:

- :func:`class_mix_test`: a goodness-of-fit test of new counts against
  reference proportions, by Pearson's chi-square statistic or the likelihood
  ratio (G) statistic, both asymptotically chi-square with ``K - 1`` degrees
  of freedom (Agresti 2013, "Categorical Data Analysis", Section 1.5);
- :func:`compare_class_mix`: a test of homogeneity between two batches' counts
  (a 2 x K contingency table, Agresti 2013, Section 3.2).

Without labels, the counts of *predicted* classes are tested; the proportions
of the true classes can be estimated from the probabilities with the EM
procedure of Saerens, Latinne and Decaestecker (2002), "Adjusting the Outputs
of a Classifier to New a Priori Probabilities", which also re-weights the
probabilities to the new priors (:func:`adjust_to_new_priors`).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike
from scipy import stats

from ..errors import ParameterError, ShapeError
from ._validation import check_logits, check_temperature
from .softmax import log_softmax

__all__ = [
    "ClassMixTest",
    "PriorEstimate",
    "adjust_to_new_priors",
    "class_counts",
    "class_mix_test",
    "compare_class_mix",
    "estimate_priors",
]

Statistic = Literal["pearson", "g"]


@dataclass(frozen=True)
class ClassMixTest:
    """A chi-square-type test of class counts.

    ``residual`` holds Pearson residuals ``(observed - expected) / sqrt(expected)``
    per class (for two batches, of the second batch), which show which classes
    moved.
    """

    statistic: float
    p_value: float
    dof: int
    observed: np.ndarray
    expected: np.ndarray
    residual: np.ndarray
    method: str


def class_counts(classes: ArrayLike, n_classes: int) -> np.ndarray:
    """Counts of each class index in ``classes``.

    Examples
    --------
    >>> class_counts([0, 2, 2], 3).tolist()
    [1, 0, 2]
    """
    c = np.asarray(classes)
    if c.ndim != 1:
        raise ShapeError(f"classes must be 1-D, got shape {c.shape}")
    if c.size and (c.min() < 0 or c.max() >= n_classes):
        raise ParameterError(f"class indices must lie in [0, {n_classes})")
    return np.bincount(c.astype(np.int64), minlength=n_classes)


def _statistic(obs: np.ndarray, exp: np.ndarray, statistic: Statistic) -> float:
    if statistic == "pearson":
        return float(np.sum((obs - exp) ** 2 / exp))
    if statistic == "g":
        m = obs > 0
        return float(2.0 * np.sum(obs[m] * np.log(obs[m] / exp[m])))
    raise ParameterError(f"statistic must be 'pearson' or 'g', got {statistic!r}")


def class_mix_test(observed: ArrayLike, reference: ArrayLike, statistic: Statistic = "pearson") -> ClassMixTest:
    """Test new class counts against reference proportions (multinomial goodness of fit).

    Parameters
    ----------
    observed : array_like of shape (K,)
        Class counts in the new batch.
    reference : array_like of shape (K,)
        Reference proportions or counts (normalised here); classes with
        reference proportion 0 must have no observations.
    statistic : {"pearson", "g"}

    Examples
    --------
    >>> t = class_mix_test([30, 20, 50], [1, 1, 2])
    >>> round(t.statistic, 4), t.dof
    (2.0, 2)
    """
    obs = np.asarray(observed, dtype=np.float64)
    ref = np.asarray(reference, dtype=np.float64)
    if obs.ndim != 1 or ref.shape != obs.shape:
        raise ShapeError(f"observed and reference must be 1-D of one length, got {obs.shape} and {ref.shape}")
    if np.any(obs < 0) or np.any(ref < 0) or ref.sum() <= 0 or obs.sum() <= 0:
        raise ParameterError("counts and reference proportions must be non-negative with a positive total")
    pi = ref / ref.sum()
    used = pi > 0
    if np.any(obs[~used] > 0):
        raise ParameterError("some classes have observations but reference proportion 0")
    exp = obs.sum() * pi
    stat = _statistic(obs[used], exp[used], statistic)
    dof = int(used.sum()) - 1
    p = float(stats.chi2.sf(stat, dof)) if dof > 0 else 1.0
    resid = np.zeros_like(obs)
    resid[used] = (obs[used] - exp[used]) / np.sqrt(exp[used])
    return ClassMixTest(stat, p, dof, obs, exp, resid, f"{statistic} goodness of fit")


def compare_class_mix(counts_a: ArrayLike, counts_b: ArrayLike, statistic: Statistic = "pearson") -> ClassMixTest:
    """Test whether two batches share one class mix (chi-square test of homogeneity).

    Classes absent from both batches are dropped.

    Examples
    --------
    >>> t = compare_class_mix([50, 50], [30, 70])
    >>> round(t.statistic, 4)
    8.3333
    """
    a = np.asarray(counts_a, dtype=np.float64)
    b = np.asarray(counts_b, dtype=np.float64)
    if a.ndim != 1 or a.shape != b.shape:
        raise ShapeError(f"both count vectors must be 1-D of one length, got {a.shape} and {b.shape}")
    if np.any(a < 0) or np.any(b < 0) or a.sum() <= 0 or b.sum() <= 0:
        raise ParameterError("counts must be non-negative with a positive total in each batch")
    used = (a + b) > 0
    table = np.vstack([a[used], b[used]])
    total = table.sum()
    exp = table.sum(axis=1, keepdims=True) * table.sum(axis=0, keepdims=True) / total
    stat = _statistic(table.ravel(), exp.ravel(), statistic)
    dof = int(used.sum()) - 1
    p = float(stats.chi2.sf(stat, dof)) if dof > 0 else 1.0
    resid = np.zeros_like(b)
    expected_b = np.zeros_like(b)
    expected_b[used] = exp[1]
    resid[used] = (table[1] - exp[1]) / np.sqrt(exp[1])
    return ClassMixTest(stat, p, dof, b, expected_b, resid, f"{statistic} test of homogeneity")


@dataclass(frozen=True)
class PriorEstimate:
    """New class priors estimated by EM, and how the estimate ended."""

    priors: np.ndarray
    iterations: int
    converged: bool


def estimate_priors(
    logits: ArrayLike,
    train_priors: ArrayLike,
    temperature: float = 1.0,
    tol: float = 1e-8,
    max_iter: int = 1000,
) -> PriorEstimate:
    """Estimate the class priors of an unlabelled batch (Saerens et al. 2002, EM).

    Each step re-weights every row's probabilities by ``pi_new / pi_train``,
    renormalises, and sets ``pi_new`` to their mean. The probabilities should
    be calibrated (for example temperature-scaled) for the estimate to be good.

    Examples
    --------
    >>> import numpy as np
    >>> z = np.log(np.array([[0.9, 0.1]] * 8 + [[0.1, 0.9]] * 2))
    >>> est = estimate_priors(z, [0.5, 0.5])
    >>> bool(est.priors[0] > 0.8)
    True
    """
    z = check_logits(logits)
    k = z.shape[1]
    pt = np.asarray(train_priors, dtype=np.float64)
    if pt.shape != (k,) or np.any(pt <= 0):
        raise ParameterError(f"train_priors must be {k} positive numbers, got shape {pt.shape}")
    pt = pt / pt.sum()
    logp = log_softmax(z, temperature=check_temperature(temperature), dtype=np.float64)
    pi = pt.copy()
    converged = False
    it = 0
    for it in range(1, max_iter + 1):  # noqa: B007 - it is reported
        w = logp + np.log(pi / pt)[None, :]
        w -= w.max(axis=1, keepdims=True)
        np.exp(w, out=w)
        w /= w.sum(axis=1, keepdims=True)
        new = w.mean(axis=0)
        if np.max(np.abs(new - pi)) < tol:
            pi = new
            converged = True
            break
        pi = new
    return PriorEstimate(priors=pi, iterations=it, converged=converged)


def adjust_to_new_priors(logits: ArrayLike, train_priors: ArrayLike, new_priors: ArrayLike) -> np.ndarray:
    """Logits re-weighted to new class priors: ``z + log(pi_new / pi_train)`` (Saerens et al. 2002).

    The softmax of the result is ``p_k pi_new_k / pi_train_k``, renormalised.

    Examples
    --------
    >>> import numpy as np
    >>> adjust_to_new_priors(np.zeros((1, 2)), [0.5, 0.5], [0.2, 0.8]).round(4)
    array([[-0.9163,  0.47  ]])
    """
    z = check_logits(logits)
    k = z.shape[1]
    pt = np.asarray(train_priors, dtype=np.float64)
    pn = np.asarray(new_priors, dtype=np.float64)
    if pt.shape != (k,) or pn.shape != (k,) or np.any(pt <= 0) or np.any(pn <= 0):
        raise ParameterError(f"priors must be {k} positive numbers each")
    shift = np.log(pn / pn.sum()) - np.log(pt / pt.sum())
    return z.astype(np.float64) + shift[None, :]
