"""Per-sample scores in one fused pass over the logit matrix.

For each row ``z`` at temperature ``T`` (``p = softmax(z / T)``):

- ``predicted``: ``argmax_k z_k`` (first index on ties, as :func:`numpy.argmax`);
- ``confidence``: ``max_k p_k`` (the maximum softmax probability,
  Hendrycks and Gimpel 2017, "A Baseline for Detecting Misclassified and
  Out-of-Distribution Examples in Neural Networks");
- ``entropy``: ``-sum_k p_k log p_k`` in nats (Shannon 1948), in ``[0, log K]``;
- ``margin``: top-1 minus top-2 probability, in ``[0, 1]``;
- ``logit_margin``: top-1 minus top-2 of ``z / T``;
- ``energy``: ``-T log sum_k exp(z_k / T)`` (Liu et al. 2020);
- with labels ``y``: ``true_probability`` ``p_y``, ``true_log_probability``
  ``log p_y`` (finite even where ``p_y`` underflows), ``brier``
  ``sum_k (p_k - 1[y = k])^2`` (Brier 1950), ``true_rank`` (1 = the model's
  first choice) and ``correct``.

Ties follow one rule: among tied logits the lowest class index wins, as
:func:`numpy.argmax` does. ``true_rank`` is ``1 +`` the classes with a larger
logit ``+`` the classes with an equal logit and a lower index, so
``true_rank == 1`` exactly when ``predicted == label``.

Two backends give the same numbers: a numba kernel that runs over row blocks
in parallel threads (used when numba is installed) and a pure numpy path in
cache-sized row blocks. Both accumulate in float64.

The finiteness check of the logits is fused into the same pass: a row holding
NaN or an infinity makes its sum ``sum_k p_k log p_k`` NaN, so the pass counts
such rows, and only when there are some are they looked up to name them in
the error. No separate pass over the matrix checks the input.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
from numpy.typing import ArrayLike

from ._blocks import as_float64_block, block_slices
from ._validation import check_labels, check_logits, check_temperature, checks_enabled, nonfinite_error

__all__ = ["SCORE_COLUMNS", "SampleScores", "available_backends", "sample_scores", "temperature_moments"]

Backend = Literal["auto", "numba", "numpy"]

#: Column order of :meth:`SampleScores.to_dict`.
SCORE_COLUMNS = (
    "predicted",
    "confidence",
    "entropy",
    "margin",
    "logit_margin",
    "energy",
    "true_probability",
    "true_log_probability",
    "brier",
    "true_rank",
    "correct",
)


@dataclass(frozen=True)
class SampleScores:
    """Per-sample scores at one temperature; label-dependent fields are None without labels."""

    temperature: float
    predicted: np.ndarray
    confidence: np.ndarray
    entropy: np.ndarray
    margin: np.ndarray
    logit_margin: np.ndarray
    energy: np.ndarray
    true_probability: np.ndarray | None = None
    true_log_probability: np.ndarray | None = None
    brier: np.ndarray | None = None
    true_rank: np.ndarray | None = None
    correct: np.ndarray | None = None

    def to_dict(self) -> dict[str, np.ndarray]:
        """The score arrays by column name, label columns only when present."""
        out = {}
        for name in SCORE_COLUMNS:
            value = getattr(self, name)
            if value is not None:
                out[name] = value
        return out

    def __len__(self) -> int:
        return int(self.predicted.shape[0])


# --------------------------------------------------------------------------- numba


def _load_numba() -> Any:
    if os.environ.get("LOGITSCOPE_BACKEND", "").lower() == "numpy":
        return None
    try:
        from . import _numba_kernels
    except Exception:  # numba missing or broken: fall back to numpy
        return None
    return _numba_kernels


_NUMBA: Any = None
_NUMBA_TRIED = False


def _numba() -> Any:
    global _NUMBA, _NUMBA_TRIED
    if not _NUMBA_TRIED:
        _NUMBA = _load_numba()
        _NUMBA_TRIED = True
    return _NUMBA


def available_backends() -> list[str]:
    """Names of the backends that can run here, fastest first.

    Examples
    --------
    >>> "numpy" in available_backends()
    True
    """
    return (["numba"] if _numba() is not None else []) + ["numpy"]


def _pick(backend: Backend) -> str:
    if backend == "auto":
        return available_backends()[0]
    if backend == "numba" and _numba() is None:
        from ..errors import ParameterError

        raise ParameterError("backend='numba' was asked for but numba is not installed")
    if backend not in ("numba", "numpy"):
        from ..errors import ParameterError

        raise ParameterError(f"backend must be 'auto', 'numba' or 'numpy', got {backend!r}")
    return backend


def _numba_blocks(z: np.ndarray) -> Iterator[tuple[slice, np.ndarray]]:
    """The whole matrix in one piece when numba can read it as is; else float32 blocks.

    Numba has no float16 arrays: such a matrix is widened (exactly) to float32
    one block at a time, so the extra memory stays bounded.
    """
    if z.dtype in (np.float32, np.float64) and z.flags.c_contiguous:
        yield slice(0, z.shape[0]), z
        return
    wide = np.float64 if z.dtype == np.float64 else np.float32
    for rows in block_slices(z.shape[0], z.shape[1], budget=1 << 22):
        yield rows, np.ascontiguousarray(z[rows], dtype=wide)


# --------------------------------------------------------------------------- numpy


def _scores_numpy(z: np.ndarray, y: np.ndarray | None, beta: float, out: dict[str, np.ndarray]) -> int:
    # order statistics come from the unscaled logits, so rounding in z / T can never move the arg-max or a rank;
    # the arithmetic mirrors the numba kernel step by step; returns the number of rows whose sums came out NaN
    nonfinite = 0
    for rows in block_slices(*z.shape):
        b = as_float64_block(z, rows, 1.0)
        r = np.arange(b.shape[0])
        top = b.argmax(axis=1)
        m1 = b[r, top]
        if y is not None:
            yr = y[rows]
            zy = b[r, yr]
            # ties: a class with the same logit and a lower index ranks above the label (as numpy.argmax)
            tied_before = (b == zy[:, None]) & (np.arange(b.shape[1])[None, :] < yr[:, None])
            out["true_rank"][rows] = 1 + (b > zy[:, None]).sum(axis=1) + tied_before.sum(axis=1)
        b[r, top] = -np.inf
        m2 = b.max(axis=1)
        b[r, top] = m1
        b -= m1[:, None]
        b *= beta
        e = np.exp(b)
        s = e.sum(axis=1)
        t = np.einsum("ij,ij->i", e, b)
        nonfinite += int(np.count_nonzero(np.isnan(t)))
        log_s = np.log(s)
        if y is not None:
            u = np.einsum("ij,ij->i", e, e)
        g = (m2 - m1) * beta
        out["predicted"][rows] = top
        out["confidence"][rows] = 1.0 / s
        out["entropy"][rows] = np.clip(log_s - t / s, 0.0, None)
        out["margin"][rows] = (1.0 - np.exp(g)) / s
        out["logit_margin"][rows] = -g
        out["energy"][rows] = -(m1 * beta + log_s) / beta
        if y is not None:
            lp = (zy - m1) * beta - log_s
            py = np.exp(lp)
            out["true_log_probability"][rows] = lp
            out["true_probability"][rows] = py
            out["brier"][rows] = u / (s * s) - 2.0 * py + 1.0
    return nonfinite


_LABEL_F64 = ("true_log_probability", "true_probability", "brier")
_INTEGER_COLUMNS = ("predicted", "true_rank")


def _output_columns(n: int, names: list[str]) -> dict[str, np.ndarray]:
    """One empty 8-byte column of length ``n`` per name (int64 for the integer scores, else float64).

    The columns are cut from one allocation: a single large block is mapped fresh with huge pages
    (numpy advises them for large arrays), where a column each can come from the heap's 4 KiB pages,
    whose first writes fault one page at a time.
    """
    block = np.empty((len(names), n), dtype=np.float64)
    return {name: block[i].view(np.int64) if name in _INTEGER_COLUMNS else block[i] for i, name in enumerate(names)}


def sample_scores(
    logits: ArrayLike,
    labels: ArrayLike | None = None,
    temperature: float = 1.0,
    backend: Backend = "auto",
) -> SampleScores:
    """Compute every per-sample score in one pass over the logits.

    Parameters
    ----------
    logits : array_like of shape (N, K)
        Raw model outputs, float16, float32 or float64; not copied.
    labels : array_like of shape (N,), optional
        True class indices; enables ``true_probability``, ``true_rank`` and
        ``correct``.
    temperature : float, default 1.0
        Softmax temperature.
    backend : {"auto", "numba", "numpy"}
        Implementation; "auto" takes numba when installed. The environment
        variable ``LOGITSCOPE_BACKEND=numpy`` forces the numpy path.

    Returns
    -------
    SampleScores

    Raises
    ------
    NonFiniteError
        If rows of the logits hold NaN or infinite values (found in the same
        pass; not checked inside :func:`assume_valid`).

    Examples
    --------
    >>> import numpy as np
    >>> s = sample_scores(np.array([[2.0, 1.0, 0.0]]), labels=[1])
    >>> int(s.predicted[0]), round(float(s.confidence[0]), 4), int(s.true_rank[0])
    (0, 0.6652, 2)
    """
    z = check_logits(logits, check_finite=False)  # the pass below finds non-finite rows
    n, k = z.shape
    y = None if labels is None else check_labels(labels, n, k)
    t = check_temperature(temperature)
    beta = 1.0 / t
    f64 = ["confidence", "entropy", "margin", "logit_margin", "energy"]
    out = _output_columns(n, [*f64, "predicted"] + ([] if y is None else [*_LABEL_F64, "true_rank"]))
    nonfinite = 0
    if _pick(backend) == "numba":
        nb = _numba()
        has_y = y is not None
        for rows, zc in _numba_blocks(z):
            yy = y[rows] if y is not None else np.zeros(1, dtype=np.int64)
            per_row = [out[name][rows] for name in ("predicted", *f64)]
            label_cols = [out[name][rows] if has_y else np.empty(1) for name in _LABEL_F64]
            rank = out["true_rank"][rows] if has_y else np.empty(1, dtype=np.int64)
            nonfinite += nb.scores_kernel(zc, yy, has_y, beta, *per_row, *label_cols, rank, zc.dtype.type(-np.inf))
    else:
        with np.errstate(invalid="ignore"):  # a non-finite row's NaN is counted, then reported below
            nonfinite = _scores_numpy(z, y, beta, out)
    if nonfinite and checks_enabled():
        err = nonfinite_error(z)
        if err is not None:
            raise err
    correct = None if y is None else out["predicted"] == y
    return SampleScores(
        temperature=t,
        predicted=out["predicted"],
        confidence=out["confidence"],
        entropy=out["entropy"],
        margin=out["margin"],
        logit_margin=out["logit_margin"],
        energy=out["energy"],
        true_probability=out.get("true_probability"),
        true_log_probability=out.get("true_log_probability"),
        brier=out.get("brier"),
        true_rank=out.get("true_rank"),
        correct=correct,
    )


def temperature_moments(
    logits: ArrayLike, labels: ArrayLike, beta: float, backend: Backend = "auto"
) -> tuple[float, float, float]:
    """Mean NLL at inverse temperature ``beta`` and its first two derivatives in ``beta``.

    With ``p = softmax(beta z)``, ``nll(beta) = mean(logsumexp(beta z) - beta z_y)``,
    ``d nll / d beta = mean(E_p[z] - z_y)`` and
    ``d2 nll / d beta2 = mean(Var_p[z]) >= 0``, so the NLL is convex in
    ``beta = 1 / T`` and Newton's method converges in a few passes.

    Examples
    --------
    >>> import numpy as np
    >>> nll, d1, d2 = temperature_moments(np.array([[1.0, -1.0]]), [0], 1.0)
    >>> round(nll, 6)
    0.126928
    """
    z = check_logits(logits, check_finite=False)  # a non-finite row makes the sums NaN: checked below
    n, k = z.shape
    y = check_labels(labels, n, k)
    if not np.isfinite(beta) or beta <= 0:
        from ..errors import ParameterError

        raise ParameterError(f"inverse temperature must be positive and finite, got {beta!r}")
    nll, d1, d2 = _moment_sums(z, y, float(beta), _pick(backend))
    if not np.isfinite(d1) and checks_enabled():
        err = nonfinite_error(z)
        if err is not None:
            raise err
    return nll / n, d1 / n, d2 / n


def _moment_sums(z: np.ndarray, y: np.ndarray, beta: float, backend: str) -> tuple[float, float, float]:
    if backend == "numba":
        nll = d1 = d2 = 0.0
        for rows, zc in _numba_blocks(z):
            a, b, c = _numba().moments_kernel(zc, y[rows], beta)
            nll, d1, d2 = nll + a, d1 + b, d2 + c
        return nll, d1, d2
    n, k = z.shape
    nll = d1 = d2 = 0.0
    for rows in block_slices(n, k):
        zb = np.asarray(z[rows], dtype=np.float64)
        with np.errstate(invalid="ignore"):  # NaN from a non-finite row is reported by the caller
            b = zb * beta
            m = b.max(axis=1)
            e = np.exp(b - m[:, None])
            s = e.sum(axis=1)
            r = np.arange(zb.shape[0])
            zy = zb[r, y[rows]]
            zm = zb.max(axis=1)
            c = zb - zm[:, None]  # centre raw logits for a stable variance
            ez = np.einsum("ij,ij->i", e, c) / s
            ez2 = np.einsum("ij,ij->i", e, c * c) / s
            nll += float(np.sum(m + np.log(s) - beta * zy))
            d1 += float(np.sum(ez + (zm - zy)))  # zm - zy first: exact when the label is the top class
            d2 += float(np.sum(np.clip(ez2 - ez * ez, 0.0, None)))
    return nll, d1, d2
