"""The softmax as a Boltzmann distribution over classes.

With logits ``z`` read as negative energies, ``E_k = -z_k``, the class
probabilities at temperature ``T`` are the Boltzmann (Gibbs) distribution

    p_k = exp(-E_k / T) / Z,    Z = sum_j exp(-E_j / T),

and ``-T log Z`` is the free energy, used as an out-of-distribution score by
Liu et al. (2020), "Energy-based Out-of-distribution Detection". All functions
here subtract the row maximum before exponentiating (the log-sum-exp trick),
so logits of any magnitude a float can hold give finite results, and they
compute in float64 in row blocks whatever the input dtype.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, DTypeLike

from ._blocks import as_float64_block, block_slices
from ._validation import check_logits, check_temperature

__all__ = ["binary_to_two_column", "energy", "log_softmax", "logsumexp", "result_dtype", "softmax"]


def result_dtype(dtype: np.dtype) -> np.dtype:
    """The dtype of probabilities returned for logits of ``dtype``.

    float16 and float32 give float32, float64 gives float64.

    Examples
    --------
    >>> result_dtype(np.dtype(np.float16))
    dtype('float32')
    """
    return np.dtype(np.result_type(dtype, np.float32))


def log_softmax(logits: ArrayLike, temperature: float = 1.0, dtype: DTypeLike | None = None) -> np.ndarray:
    """Row-wise log-probabilities ``log softmax(z / T)``.

    Parameters
    ----------
    logits : array_like of shape (N, K)
        Raw model outputs, any float dtype.
    temperature : float, default 1.0
        Softmax temperature ``T > 0``.
    dtype : dtype, optional
        Output dtype; by default float32 for float16/float32 input and
        float64 for float64 input.

    Returns
    -------
    ndarray of shape (N, K)

    Examples
    --------
    >>> import numpy as np
    >>> np.round(np.exp(log_softmax(np.array([[1e4, 0.0]]))), 6)
    array([[1., 0.]])
    """
    z = check_logits(logits)
    beta = 1.0 / check_temperature(temperature)
    out = np.empty(z.shape, dtype=dtype or result_dtype(z.dtype))
    for rows in block_slices(*z.shape):
        b = as_float64_block(z, rows, beta)
        b -= b.max(axis=1, keepdims=True)
        b -= np.log(np.exp(b).sum(axis=1, keepdims=True))
        out[rows] = b
    return out


def softmax(logits: ArrayLike, temperature: float = 1.0, dtype: DTypeLike | None = None) -> np.ndarray:
    """Row-wise probabilities ``softmax(z / T)`` (the Boltzmann distribution).

    Examples
    --------
    >>> import numpy as np
    >>> softmax(np.array([[0.0, np.log(3.0)]])).round(6)
    array([[0.25, 0.75]])
    """
    z = check_logits(logits)
    beta = 1.0 / check_temperature(temperature)
    out = np.empty(z.shape, dtype=dtype or result_dtype(z.dtype))
    for rows in block_slices(*z.shape):
        b = as_float64_block(z, rows, beta)
        b -= b.max(axis=1, keepdims=True)
        np.exp(b, out=b)
        b /= b.sum(axis=1, keepdims=True)
        out[rows] = b
    return out


def logsumexp(logits: ArrayLike, temperature: float = 1.0) -> np.ndarray:
    """Row-wise ``log sum_k exp(z_k / T)`` in float64 (the log partition function).

    Examples
    --------
    >>> import numpy as np
    >>> logsumexp(np.array([[0.0, 0.0]])).round(6)
    array([0.693147])
    """
    z = check_logits(logits)
    beta = 1.0 / check_temperature(temperature)
    out = np.empty(z.shape[0], dtype=np.float64)
    for rows in block_slices(*z.shape):
        b = as_float64_block(z, rows, beta)
        m = b.max(axis=1)
        b -= m[:, None]
        out[rows] = m + np.log(np.exp(b).sum(axis=1))
    return out


def energy(logits: ArrayLike, temperature: float = 1.0) -> np.ndarray:
    """Free energy ``-T log sum_k exp(z_k / T)`` per row (Liu et al. 2020).

    Lower energy means the model finds the input more familiar.

    Examples
    --------
    >>> import numpy as np
    >>> energy(np.array([[0.0, 0.0]]), temperature=2.0).round(6)
    array([-1.386294])
    """
    t = check_temperature(temperature)
    return -t * logsumexp(logits, temperature=t)


def binary_to_two_column(logit: ArrayLike) -> np.ndarray:
    """Turn one logit column of a binary model into two-class logits ``[0, z]``.

    A binary model's single output ``z`` is the log-odds of class 1, and
    ``softmax([0, z]) = [1 - sigmoid(z), sigmoid(z)]``.

    Examples
    --------
    >>> binary_to_two_column([2.0, -1.0])
    array([[ 0.,  2.],
           [ 0., -1.]])
    """
    z = np.asarray(logit)
    if z.ndim == 2 and z.shape[1] == 1:
        z = z[:, 0]
    if z.ndim != 1:
        from ..errors import ShapeError

        raise ShapeError(f"a binary logit must have shape (N,) or (N, 1), got {z.shape}")
    dtype = z.dtype if z.dtype.kind == "f" else np.float64
    out = np.zeros((z.shape[0], 2), dtype=dtype)
    out[:, 1] = z
    return out
