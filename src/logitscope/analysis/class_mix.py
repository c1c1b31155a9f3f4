"""Has the class mix of new data shifted?

Class counts of a batch of ``n`` samples follow a multinomial distribution
``Mult(n, pi)``. Two tests of that model:

- :func:`class_mix_test`: a goodness-of-fit test of new counts against
  reference proportions, by Pearson's chi-square statistic or the likelihood
  ratio (G) statistic, both asymptotically chi-square with ``K - 1`` degrees
  of freedom (Agresti 2013, "Categorical Data Analysis", Section 1.5). It
  treats the proportions as *known*: use it only for proportions that are
  not themselves estimated from a sample;
- :func:`compare_class_mix`: a test of homogeneity between two batches' counts
  (a 2 x K contingency table, Agresti 2013, Section 3.2), the right test
  when the reference is itself a sample.

:func:`class_mix_check` picks between the two by what the reference is, and
replaces the chi-square approximation by a seeded Monte Carlo p-value where
an expected count is below 5 (the usual rule of thumb for the approximation,
Cochran 1954; common practice). :meth:`LogitFrame.class_mix_check
<logitscope.LogitFrame.class_mix_check>` counts like with like: a batch's
predicted classes against the reference's predicted classes.

Without labels, the counts of *predicted* classes are tested; the proportions
of the true classes can be estimated from the probabilities with the EM
procedure of Saerens, Latinne and Decaestecker (2002), "Adjusting the Outputs
of a Classifier to New a Priori Probabilities", which also re-weights the
probabilities to the new priors (:func:`adjust_to_new_priors`).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike
from scipy import stats

from ..errors import ParameterError, ShapeError
from ..parameters import check as check_parameter
from ._blocks import block_slices
from ._validation import check_logits, check_temperature
from .scores import available_backends

__all__ = [
    "ClassMixCheck",
    "ClassMixTest",
    "PriorEstimate",
    "adjust_to_new_priors",
    "class_counts",
    "class_mix_check",
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


def _em_step_numpy(z: np.ndarray, beta: float, shift: np.ndarray) -> np.ndarray:
    n, k = z.shape
    total = np.zeros(k)
    for rows in block_slices(n, k):
        b = np.multiply(z[rows], beta, dtype=np.float64)
        b += shift
        b -= b.max(axis=1, keepdims=True)
        np.exp(b, out=b)
        total += np.einsum("i,ij->j", 1.0 / b.sum(axis=1), b)
    return total


def _em_step(z: np.ndarray, beta: float, shift: np.ndarray) -> np.ndarray:
    """Column sums of ``softmax(beta z + shift)`` over all rows: one pass over the logits.

    The numba kernel (when installed) runs over row chunks in parallel threads;
    the numpy path works in row blocks, each copied once into a float64
    temporary. Either way the extra memory is O(block x K), and the normalised
    rows are summed as ``sum_i exp(...)_i / s_i`` without being stored.
    """
    if "numba" not in available_backends():
        return _em_step_numpy(z, beta, shift)
    from . import _numba_kernels as nb

    n, k = z.shape
    chunks = 4 * max(1, nb.numba.get_num_threads())
    if z.dtype in (np.float32, np.float64) and z.flags.c_contiguous:
        return np.asarray(nb.prior_em_kernel(z, float(beta), shift, chunks))
    total = np.zeros(k)
    wide = np.float64 if z.dtype == np.float64 else np.float32  # float16 widens exactly to float32
    for rows in block_slices(n, k, budget=1 << 22):
        total += nb.prior_em_kernel(np.ascontiguousarray(z[rows], dtype=wide), float(beta), shift, chunks)
    return total


def estimate_priors(
    logits: ArrayLike,
    train_priors: ArrayLike,
    temperature: float = 1.0,
    tol: float = 1e-8,
    max_iter: int = 1000,
) -> PriorEstimate:
    """Estimate the class priors of an unlabelled batch (Saerens et al. 2002, EM).

    Each step re-weights every row's probabilities by ``pi_new / pi_train``,
    renormalises, and sets ``pi_new`` to their mean; the re-weighting is a
    shift of the logits by ``log(pi_new / pi_train)``. One step is one pass
    over the logits in row blocks: the extra memory is one block, never an
    N x K copy. The probabilities should be calibrated (for example
    temperature-scaled) for the estimate to be good.

    Examples
    --------
    >>> import numpy as np
    >>> z = np.log(np.array([[0.9, 0.1]] * 8 + [[0.1, 0.9]] * 2))
    >>> est = estimate_priors(z, [0.5, 0.5])
    >>> bool(est.priors[0] > 0.8)
    True
    """
    z = check_logits(logits)
    n, k = z.shape
    pt = np.asarray(train_priors, dtype=np.float64)
    if pt.shape != (k,) or np.any(~np.isfinite(pt)) or np.any(pt <= 0):
        raise ParameterError(f"train_priors must be {k} positive numbers, got shape {pt.shape}")
    pt = pt / pt.sum()
    beta = 1.0 / check_temperature(temperature)
    log_pt = np.log(pt)
    pi = pt.copy()
    converged = False
    it = 0
    for it in range(1, max_iter + 1):  # noqa: B007 - it is reported
        with np.errstate(divide="ignore"):  # a prior that reached 0 stays 0: its shift is -inf
            shift = np.log(pi) - log_pt
        new = _em_step(z, beta, shift) / n
        if np.max(np.abs(new - pi)) < tol:
            pi = new
            converged = True
            break
        pi = new
    return PriorEstimate(priors=pi, iterations=it, converged=converged)


# --------------------------------------------------------------------------- one check


def _readonly(a: np.ndarray) -> np.ndarray:
    a = np.array(a, copy=True)
    a.flags.writeable = False
    return a


@dataclass(frozen=True)
class ClassMixCheck:
    """Has a batch's class mix moved away from a reference? One test, fully described.

    Attributes
    ----------
    statistic : float
        Pearson's chi-square or the G statistic (``inf`` when a class the
        reference calls impossible occurs).
    dof : int
        Degrees of freedom: classes in use minus one.
    p_value : float
        From the chi-square distribution, or a seeded Monte Carlo estimate
        when an expected count is below 5 (``p_value_method`` says which).
    method : str
        A readable description of the test, the counts compared and the
        p-value, fit to print.
    test : {"homogeneity", "goodness of fit"}
        Two samples (the reference is a batch too), or one sample against
        known proportions.
    statistic_name : {"pearson", "g"}
    p_value_method : {"chi-square", "monte carlo", "exact"}
        "exact" only where the answer is certain: one class in use (p = 1) or
        a class the known proportions rule out occurs (p = 0).
    n_draws, seed : int or None
        The Monte Carlo draws and seed (None for a chi-square p-value).
    alpha : float
        The significance level; ``shifted`` is ``p_value < alpha``.
    counted : {"predicted", "labels"}
        What was counted in each row.
    observed : ndarray of shape (K,)
        The batch's class counts.
    expected : ndarray of shape (K,)
        The batch's expected counts if the mix has not moved.
    residuals : ndarray of shape (K,)
        ``(observed - expected) / sd`` per class, with the exact standard
        deviation of the batch count under no shift (binomial for known
        proportions; hypergeometric given the table's margins for a
        reference sample): about N(0, 1) under no shift, so a class with
        ``|residual| > 2`` stands out (common practice). 0 for unused classes.
    reference : ndarray of shape (K,)
        The reference counts (homogeneity) or proportions (goodness of fit).
    priors : ndarray of shape (K,) or None
        For an unlabelled batch against a labelled reference: the batch's
        class priors estimated by EM (Saerens et al. 2002), else None.
    prior_iterations : int or None
    prior_converged : bool or None
    notes : tuple of str
        Anything the reader should know (small expected counts, dropped
        classes, why no EM estimate was made).
    """

    statistic: float
    dof: int
    p_value: float
    method: str
    test: str
    statistic_name: str
    p_value_method: str
    n_draws: int | None
    seed: int | None
    alpha: float
    counted: str
    observed: np.ndarray
    expected: np.ndarray
    residuals: np.ndarray
    reference: np.ndarray
    priors: np.ndarray | None = None
    prior_iterations: int | None = None
    prior_converged: bool | None = None
    notes: tuple[str, ...] = field(default=())

    @property
    def shifted(self) -> bool:
        """Whether the test rejects "no shift" at level ``alpha`` (``p_value < alpha``)."""
        return bool(self.p_value < self.alpha)

    @property
    def batch_share(self) -> np.ndarray:
        """The batch's class proportions."""
        return self.observed / self.observed.sum()

    @property
    def reference_share(self) -> np.ndarray:
        """The reference's class proportions."""
        return self.reference / self.reference.sum()

    @property
    def warnings(self) -> tuple[str, ...]:
        """The same as ``notes``."""
        return self.notes

    def with_priors(self, estimate: PriorEstimate | None, note: str | None = None) -> ClassMixCheck:
        """The same check with an EM prior estimate (or a note saying why there is none)."""
        notes = self.notes + ((note,) if note else ())
        if estimate is None:
            return _replace(self, notes=notes)
        return _replace(
            self, priors=_readonly(estimate.priors), prior_iterations=estimate.iterations,
            prior_converged=estimate.converged, notes=notes,
        )  # fmt: skip

    def to_dict(self) -> dict[str, object]:
        """A JSON-ready dict of every field (arrays as lists) and ``shifted``."""
        out: dict[str, object] = {}
        for name in self.__dataclass_fields__:
            v = getattr(self, name)
            out[name] = v.tolist() if isinstance(v, np.ndarray) else (list(v) if isinstance(v, tuple) else v)
        out["shifted"] = self.shifted
        return out


def _replace(check: ClassMixCheck, **changes: object) -> ClassMixCheck:
    return dataclasses.replace(check, **changes)  # type: ignore[arg-type]


#: Expected counts below this make the chi-square approximation doubtful (Cochran 1954; common practice).
MIN_EXPECTED = 5.0

#: Draws of the Monte Carlo p-value are made in chunks of about this many cells.
_MC_CELLS = 1 << 21


def _table_statistic(obs: np.ndarray, exp: np.ndarray, statistic: Statistic) -> np.ndarray:
    """Statistic of each row of ``obs`` (draws x cells) against the fixed ``exp`` (cells,)."""
    if statistic == "pearson":
        return np.sum((obs - exp) ** 2 / exp, axis=-1)
    with np.errstate(divide="ignore", invalid="ignore"):
        terms = np.where(obs > 0, obs * np.log(obs / exp), 0.0)
    return 2.0 * np.sum(terms, axis=-1)


def _monte_carlo_p(
    observed_stat: float, draw: Callable[[int], np.ndarray], exp: np.ndarray, statistic: Statistic, n_draws: int
) -> float:
    """``(1 + #{T_b >= T}) / (1 + B)`` over ``B`` tables drawn under no shift (Davison and Hinkley 1997, Eq. 4.11).

    ``draw(m)`` returns ``m`` simulated tables, flattened to rows of cells.
    Statistics equal to the observed one up to rounding count as at least as extreme.
    """
    per_chunk = max(1, _MC_CELLS // max(1, exp.size))
    hits = 0
    done = 0
    cut = observed_stat - 1e-9 * max(1.0, abs(observed_stat))
    while done < n_draws:
        m = min(per_chunk, n_draws - done)
        sims = draw(m)
        hits += int(np.count_nonzero(_table_statistic(sims, exp, statistic) >= cut))
        done += m
    return (1.0 + hits) / (1.0 + n_draws)


def _describe_stat(statistic: Statistic) -> str:
    return "Pearson chi-square" if statistic == "pearson" else "likelihood-ratio G"


def class_mix_check(
    observed: ArrayLike,
    *,
    reference_counts: ArrayLike | None = None,
    proportions: ArrayLike | None = None,
    alpha: float = 0.05,
    statistic: Statistic = "pearson",
    counted: Literal["predicted", "labels"] = "predicted",
    n_draws: int = 10_000,
    seed: int = 0,
) -> ClassMixCheck:
    """Test a batch's class counts against a reference sample or known proportions.

    Exactly one of ``reference_counts`` and ``proportions`` is given:

    - ``reference_counts``: the reference is itself a sample, so the two
      batches are compared by the chi-square test of homogeneity of their
      2 x K table (Agresti 2013, Section 3.2), which accounts for the
      sampling noise of both;
    - ``proportions``: proportions known in advance (not estimated from the
      data at hand), tested by the multinomial goodness-of-fit test
      (Agresti 2013, Section 1.5).

    Classes with no count in either batch (homogeneity) or with proportion 0
    (goodness of fit) are left out. Where an expected count is below 5 the
    chi-square approximation is doubtful (Cochran 1954; common practice), and
    the p-value is estimated instead from ``n_draws`` tables simulated under
    no shift with a seeded generator: multinomial draws for known
    proportions; tables with both margins fixed (multivariate hypergeometric
    rows, as in Patefield 1981) for a reference sample. That p-value is
    ``(1 + #{T_b >= T}) / (1 + n_draws)`` (Davison and Hinkley 1997), never 0,
    and it holds its level exactly up to the Monte Carlo error, about
    ``sqrt(p (1 - p) / n_draws)``.

    Parameters
    ----------
    observed : array_like of shape (K,)
        The batch's class counts.
    reference_counts, proportions : array_like of shape (K,)
        The reference (see above).
    alpha : float
        Significance level, in (0, 0.5].
    statistic : {"pearson", "g"}
        Pearson's chi-square or the likelihood-ratio G statistic.
    counted : {"predicted", "labels"}
        What the counts count (only for the description).
    n_draws : int
        Monte Carlo draws where an expected count is below 5.
    seed : int
        Seed of the Monte Carlo draws (the same seed gives the same p-value).

    Returns
    -------
    ClassMixCheck

    Examples
    --------
    >>> c = class_mix_check([30, 20, 50], reference_counts=[40, 35, 45])
    >>> round(c.statistic, 4), c.dof, c.test, c.p_value_method
    (3.9975, 2, 'homogeneity', 'chi-square')
    >>> c = class_mix_check([3, 1, 0], proportions=[0.5, 0.25, 0.25])
    >>> c.p_value_method, c.n_draws
    ('monte carlo', 10000)
    """
    alpha = float(check_parameter(alpha, "alpha"))
    n_draws = int(check_parameter(n_draws, "n_draws"))
    if statistic not in ("pearson", "g"):
        raise ParameterError(f"statistic must be 'pearson' or 'g', got {statistic!r}")
    if (reference_counts is None) == (proportions is None):
        raise ParameterError("give exactly one of reference_counts (a reference sample) and proportions (known)")
    obs = np.asarray(observed, dtype=np.float64)
    ref = np.asarray(reference_counts if proportions is None else proportions, dtype=np.float64)
    if obs.ndim != 1 or ref.shape != obs.shape:
        raise ShapeError(f"observed and reference must be 1-D of one length, got {obs.shape} and {ref.shape}")
    if np.any(~np.isfinite(obs)) or np.any(obs < 0) or np.any(obs != np.round(obs)) or obs.sum() <= 0:
        raise ParameterError("observed counts must be whole non-negative numbers with a positive total")
    if np.any(~np.isfinite(ref)) or np.any(ref < 0) or ref.sum() <= 0:
        raise ParameterError("the reference must be non-negative numbers with a positive total")
    rng = np.random.default_rng(seed)
    notes: list[str] = []
    k = obs.size
    what = "predicted classes" if counted == "predicted" else "labels"
    if proportions is None:
        if np.any(ref != np.round(ref)):
            raise ParameterError("reference_counts must be whole numbers; for known proportions pass proportions=")
        return _homogeneity(obs, ref, alpha, statistic, counted, what, n_draws, seed, rng, notes)
    if abs(ref.sum() - 1.0) > 1e-6:
        raise ParameterError(
            f"proportions must sum to 1 (they sum to {ref.sum():.6g}); counts from a reference sample are "
            "not known proportions: pass them as reference_counts= (or a reference frame)"
        )
    pi = ref / ref.sum()
    used = pi > 0
    n = obs.sum()
    exp = n * pi
    sd = np.sqrt(n * pi * (1.0 - pi))  # binomial sd of each count
    resid = np.divide(obs - exp, sd, out=np.zeros(k), where=sd > 0)
    dof = int(used.sum()) - 1
    stat_name = _describe_stat(statistic)
    base = dict(
        dof=dof, test="goodness of fit", statistic_name=statistic, alpha=alpha, counted=counted,
        observed=_readonly(obs), expected=_readonly(exp), residuals=_readonly(resid), reference=_readonly(pi),
    )  # fmt: skip
    impossible = np.flatnonzero(~used & (obs > 0))
    if impossible.size:
        notes.append(
            f"{int(obs[impossible].sum())} samples fall in classes whose known proportion is 0 "
            f"(class indices {impossible[:5].tolist()}): the mix has certainly moved"
        )
        return ClassMixCheck(
            statistic=float("inf"), p_value=0.0, p_value_method="exact", n_draws=None, seed=None,
            method=f"{stat_name} goodness of fit of the batch's {what} against known proportions: "
            "impossible classes occur, p = 0", notes=tuple(notes), **base,  # type: ignore[arg-type]
        )  # fmt: skip
    if (~used).any():
        notes.append(f"{int((~used).sum())} classes with known proportion 0 are left out")
    stat = float(_table_statistic(obs[used], exp[used], statistic))
    if dof == 0:
        p, p_method, draws, mc_seed = 1.0, "exact", None, None
        how = "one class only: nothing can move, p = 1"
    elif exp[used].min() < MIN_EXPECTED:
        pi_u = pi[used] / pi[used].sum()
        n_int = int(n)  # whole numbers (checked)
        p = _monte_carlo_p(stat, lambda m: rng.multinomial(n_int, pi_u, size=m), exp[used], statistic, n_draws)
        p_method, draws, mc_seed = "monte carlo", n_draws, seed
        how = f"Monte Carlo p-value from {n_draws:,} multinomial draws (seed {seed})"
        notes.append(
            f"an expected count is below {MIN_EXPECTED:g} (smallest {exp[used].min():.2f}), so the chi-square "
            f"approximation was replaced by a Monte Carlo p-value from {n_draws:,} seeded draws"
        )
    else:
        p, p_method, draws, mc_seed = float(stats.chi2.sf(stat, dof)), "chi-square", None, None
        how = f"chi-square p-value on {dof} degrees of freedom"
    method = f"{stat_name} goodness of fit of the batch's {what} ({int(n):,}) against known proportions; {how}"
    return ClassMixCheck(
        statistic=stat, p_value=p, method=method, p_value_method=p_method, n_draws=draws, seed=mc_seed,
        notes=tuple(notes), **base,  # type: ignore[arg-type]
    )  # fmt: skip


def _homogeneity(
    obs: np.ndarray, ref: np.ndarray, alpha: float, statistic: Statistic, counted: str, what: str,
    n_draws: int, seed: int, rng: np.random.Generator, notes: list[str],
) -> ClassMixCheck:  # fmt: skip
    k = obs.size
    used = (obs + ref) > 0
    col = (obs + ref)[used]
    n_b, n_r = obs.sum(), ref.sum()
    total = n_b + n_r
    table = np.vstack([obs[used], ref[used]])
    exp_table = np.vstack([n_b * col / total, n_r * col / total])
    exp = np.zeros(k)
    exp[used] = exp_table[0]
    # exact sd of the batch's count of a class given both margins (hypergeometric)
    var = n_b * (col / total) * (1.0 - col / total) * (n_r / (total - 1.0)) if total > 1 else np.zeros(col.size)
    resid = np.zeros(k)
    resid[used] = np.divide(table[0] - exp_table[0], np.sqrt(var), out=np.zeros(col.size), where=var > 0)
    dof = int(used.sum()) - 1
    if (~used).any():
        notes.append(f"{int((~used).sum())} classes absent from both the batch and the reference are left out")
    stat = float(_table_statistic(table.ravel(), exp_table.ravel(), statistic))
    stat_name = _describe_stat(statistic)
    if dof == 0:
        p, p_method, draws, mc_seed = 1.0, "exact", None, None
        how = "one class only: nothing can move, p = 1"
    elif exp_table.min() < MIN_EXPECTED:
        col_int = np.round(col).astype(np.int64)
        nb_int = int(n_b)  # whole numbers (checked)

        def draw(m: int) -> np.ndarray:
            top = rng.multivariate_hypergeometric(col_int, nb_int, size=m)
            return np.hstack([top, col_int[None, :] - top]).astype(np.float64)

        p = _monte_carlo_p(stat, draw, exp_table.ravel(), statistic, n_draws)
        p_method, draws, mc_seed = "monte carlo", n_draws, seed
        how = f"Monte Carlo p-value from {n_draws:,} tables with both margins fixed (seed {seed})"
        notes.append(
            f"an expected count is below {MIN_EXPECTED:g} (smallest {exp_table.min():.2f}), so the chi-square "
            f"approximation was replaced by a Monte Carlo p-value from {n_draws:,} seeded tables"
        )
    else:
        p, p_method, draws, mc_seed = float(stats.chi2.sf(stat, dof)), "chi-square", None, None
        how = f"chi-square p-value on {dof} degrees of freedom"
    method = (
        f"{stat_name} test of homogeneity: the batch's {what} ({int(n_b):,}) against the reference's {what} "
        f"({int(n_r):,}), a 2 x {int(used.sum())} table; {how}"
    )
    return ClassMixCheck(
        statistic=stat, dof=dof, p_value=p, method=method, test="homogeneity", statistic_name=statistic,
        p_value_method=p_method, n_draws=draws, seed=mc_seed, alpha=alpha, counted=counted,
        observed=_readonly(obs), expected=_readonly(exp), residuals=_readonly(resid), reference=_readonly(ref),
        notes=tuple(notes),
    )  # fmt: skip


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
