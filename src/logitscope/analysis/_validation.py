"""Input checks at the boundary of the analysis layer.

Each public analysis function passes its arguments through these checks, so a
bad argument fails with a message that names the problem instead of a
traceback from inside numpy. A :class:`~logitscope.LogitFrame` validates its
data once when it is built and then calls the analysis layer inside
:func:`assume_valid`, which skips the checks that cost a pass over the matrix.
"""

from __future__ import annotations

import contextlib
import contextvars
import dataclasses
from collections.abc import Iterator
from typing import Any

import numpy as np

from ..errors import (
    InputTypeError,
    LabelError,
    NonFiniteError,
    ParameterError,
    ProbabilityError,
    ShapeError,
    describe_rows,
)
from ..parameters import check as check_parameter
from ..parameters import get_range

_ASSUME_VALID: contextvars.ContextVar[bool] = contextvars.ContextVar("assume_valid", default=False)

FLOAT_KINDS = "f"


@contextlib.contextmanager
def assume_valid() -> Iterator[None]:
    """Skip the full-matrix checks (finite values) inside this block.

    Shapes, dtypes and label ranges are still checked; only the checks that
    read every element of the logit matrix are skipped. Use it when the data
    was validated already, as :class:`~logitscope.LogitFrame` does.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope.analysis import accuracy
    >>> with assume_valid():
    ...     accuracy(np.array([[2.0, 0.0], [0.0, 1.0]]), np.array([0, 0]))
    0.5
    """
    token = _ASSUME_VALID.set(True)
    try:
        yield
    finally:
        _ASSUME_VALID.reset(token)


def _to_numpy(x: Any, what: str) -> np.ndarray:
    if isinstance(x, np.ndarray):
        return x
    # torch tensors and pandas objects, without importing either
    if hasattr(x, "detach") and hasattr(x, "cpu") and hasattr(x, "numpy"):
        return x.detach().cpu().numpy()
    if hasattr(x, "to_numpy"):
        return np.asarray(x.to_numpy())
    try:
        return np.asarray(x)
    except Exception as exc:  # pragma: no cover - numpy raises many kinds
        raise InputTypeError(f"{what} could not be read as an array: {exc}") from exc


def checks_enabled() -> bool:
    """False inside :func:`assume_valid`, where the full-matrix checks are skipped."""
    return not _ASSUME_VALID.get()


def _numba_check() -> Any:
    import os

    if os.environ.get("LOGITSCOPE_BACKEND", "").lower() == "numpy":
        return None
    try:
        from . import _numba_kernels
    except Exception:  # numba missing or broken: the numpy check below
        return None
    return _numba_kernels


#: The unsigned integer of each float width and the mask of its exponent field (IEEE 754: NaN and the
#: infinities are the values whose exponent bits are all set).
_EXPONENT_BITS: dict[Any, tuple[Any, int]] = {
    np.dtype(np.float16): (np.uint16, 0x7C00),
    np.dtype(np.float32): (np.uint32, 0x7F800000),
    np.dtype(np.float64): (np.uint64, 0x7FF0000000000000),
}


def find_nonfinite_rows(z: np.ndarray) -> np.ndarray:
    """Return the indices of rows of ``z`` holding NaN or infinite values.

    With numba, one parallel pass that tests the exponent bits of each value
    (IEEE 754: all set for NaN and infinities) and costs less than a
    single-threaded ``z.sum(axis=1)``. Without numba, each row is summed (in
    the input's type for float32/64, by a matrix-vector product with ones; in
    float64 for float16) and only rows whose sum is not finite are looked at
    closer, so a clean matrix costs one pass.

    Examples
    --------
    >>> find_nonfinite_rows(np.array([[0.0, 1.0], [np.nan, 0.0], [np.inf, 1.0]]))
    array([1, 2])
    """
    nb = _numba_check()
    if nb is not None and z.ndim == 2 and z.shape[0] and z.shape[1] and z.dtype in _EXPONENT_BITS:
        uint, mask = _EXPONENT_BITS[z.dtype]
        flags = np.empty(z.shape[0], dtype=np.bool_)
        count = nb.nonfinite_rows(z.view(uint), uint(mask), flags)
        return np.flatnonzero(flags) if count else np.zeros(0, dtype=np.intp)
    if z.dtype in (np.float32, np.float64) and z.ndim == 2:
        with np.errstate(over="ignore", invalid="ignore"):  # overflow only makes a row suspect; it is checked below
            sums = z @ np.ones(z.shape[1], dtype=z.dtype)
    else:
        sums = np.add.reduce(z, axis=1, dtype=np.float64)
    suspect = np.flatnonzero(~np.isfinite(sums))
    if suspect.size == 0:
        return suspect
    bad = ~np.isfinite(z[suspect]).all(axis=1)
    return suspect[bad]


def nonfinite_error(z: np.ndarray, what: str = "logits") -> NonFiniteError | None:
    """The error naming the rows of ``z`` that hold NaN or infinite values, or None when there are none.

    For callers whose own pass over the matrix found a hint of such rows (a NaN
    sum): the rows are found exactly here, so a false hint raises nothing.

    Examples
    --------
    >>> print(nonfinite_error(np.array([[0.0, 1.0], [np.nan, 0.0]])))
    logits hold NaN or infinite values in 1 of 2 rows: row 1
    """
    bad = find_nonfinite_rows(z)
    if bad.size == 0:
        return None
    n = z.shape[0]
    return NonFiniteError(f"{what} hold NaN or infinite values in {bad.size} of {n} rows: {describe_rows(bad)}")


def check_logits(z: Any, what: str = "logits", *, check_finite: bool = True, copy: bool = False) -> np.ndarray:
    """Return ``z`` as a 2-D floating array of shape (N, K), N >= 1, K >= 2.

    Integer and boolean inputs are converted to float64; float16, float32 and
    float64 are kept without a copy unless ``copy=True``.

    Parameters
    ----------
    z : array_like of shape (N, K)
    what : str
        The name used in error messages.
    check_finite : bool, default True
        Check every value for NaN and infinities (skipped inside
        :func:`assume_valid`). Pass False when the caller's own pass over the
        matrix detects them (:func:`nonfinite_error`).
    copy : bool, default False
        Return a new C-ordered array that the caller owns (integers and
        booleans are converted into it). With numba the copy is checked for
        finiteness as it is made, so copying and checking cost one pass together.

    Raises
    ------
    ShapeError
        If ``z`` is not 2-D, has no rows or fewer than two columns.
    NonFiniteError
        If some rows hold NaN or infinite values (the first rows are named).

    Examples
    --------
    >>> check_logits([[1, 2], [3, 4]]).dtype
    dtype('float64')
    """
    arr = _to_numpy(z, what)
    if arr.dtype.kind not in FLOAT_KINDS:
        if arr.dtype.kind in "biu":
            arr = arr.astype(np.float64, order="C" if copy else "K")
            copy = False  # the conversion made the new array asked for
        else:
            raise InputTypeError(f"{what} must hold numbers, got dtype {arr.dtype}")
    if arr.ndim != 2:
        raise ShapeError(f"{what} must be a 2-D array of shape (n_samples, n_classes), got shape {arr.shape}")
    n, k = arr.shape
    if n == 0:
        raise ShapeError(f"{what} has no rows (shape {arr.shape}); at least one sample is needed")
    if k < 2:
        raise ShapeError(
            f"{what} has {k} column(s) (shape {arr.shape}); at least 2 classes are needed. "
            "For a binary model with one logit column use LogitFrame(..., binary=True) "
            "or logitscope.analysis.binary_to_two_column()"
        )
    check = check_finite and checks_enabled()
    if copy and (nb := _numba_check()) is not None and arr.dtype in _EXPONENT_BITS:
        uint, mask = _EXPONENT_BITS[arr.dtype]
        out = np.empty(arr.shape, dtype=arr.dtype)
        if nb.copy_counting_nonfinite(arr.view(uint), uint(mask), out.view(uint)) and check:
            err = nonfinite_error(out, what)
            if err is not None:
                raise err
        return out
    if copy:
        arr = np.array(arr, order="C", copy=True)
    if check:
        err = nonfinite_error(arr, what)
        if err is not None:
            raise err
    return arr


def check_labels(y: Any, n_samples: int, n_classes: int, what: str = "labels") -> np.ndarray:
    """Return ``y`` as an int64 array of class indices in ``[0, n_classes)``.

    Raises
    ------
    LabelError
        If the length differs from ``n_samples``, the values are not whole
        numbers, or some are outside ``[0, n_classes)`` (the rows are named).

    Examples
    --------
    >>> check_labels([0, 2, 1], 3, 3)
    array([0, 2, 1])
    """
    arr = _to_numpy(y, what)
    if arr.ndim != 1:
        raise LabelError(f"{what} must be 1-D of length {n_samples}, got shape {arr.shape}")
    if arr.shape[0] != n_samples:
        raise LabelError(f"{what} have length {arr.shape[0]} but the logits have {n_samples} rows")
    if arr.dtype.kind == "b":
        raise LabelError(f"{what} must be class indices, got booleans")
    if arr.dtype.kind == "f":
        nonint = np.flatnonzero(~np.isfinite(arr) | (arr != np.round(arr)))
        if nonint.size:
            raise LabelError(f"{what} must be whole numbers; not so at {describe_rows(nonint)}")
    elif arr.dtype.kind not in "iu":
        raise LabelError(
            f"{what} must be integer class indices, got dtype {arr.dtype}; "
            "pass class names through LogitFrame(labels=..., classes=...)"
        )
    if arr.size and (arr.min() < 0 or arr.max() >= n_classes):  # on the values as given: uint64 or 1e30 do not wrap
        bad = np.flatnonzero((arr < 0) | (arr >= n_classes))
        raise LabelError(
            f"{what} must lie in [0, {n_classes}) for {n_classes} classes; "
            f"out of range at {describe_rows(bad)} (values {arr[bad[:5]].tolist()})"
        )
    return arr.astype(np.int64, copy=False)


def check_probabilities(p: Any, atol: float | None = None, what: str = "probabilities") -> np.ndarray:
    """Return ``p`` as a valid (N, K) probability matrix.

    Rows must be non-negative and sum to one within ``atol`` (default
    ``1e-6`` for float64, ``1e-3`` for float32 and float16 input).

    Examples
    --------
    >>> check_probabilities([[0.25, 0.75], [1.0, 0.0]]).shape
    (2, 2)
    """
    if atol is not None:
        try:
            atol = float(atol)
        except (TypeError, ValueError) as exc:
            raise InputTypeError(f"atol must be a number, got {atol!r}") from exc
        if not 0.0 <= atol < 1.0:  # NaN fails too
            raise ParameterError(f"atol, the tolerance on each row's sum, must lie in [0, 1), got {atol!r}")
    arr = check_logits(p, what=what)
    if atol is None:
        atol = 1e-6 if arr.dtype == np.float64 else 1e-3
    neg = np.flatnonzero((arr < 0).any(axis=1))
    if neg.size:
        raise ProbabilityError(f"{what} must be non-negative; negative values at {describe_rows(neg)}")
    sums = np.add.reduce(arr, axis=1, dtype=np.float64)
    off = np.flatnonzero(np.abs(sums - 1.0) > atol)
    if off.size:
        raise ProbabilityError(
            f"{what} rows must sum to 1 (tolerance {atol:g}); "
            f"{off.size} rows do not, first {describe_rows(off)} (sums {np.round(sums[off[:3]], 6).tolist()})"
        )
    return arr


def check_temperature(temperature: Any) -> float:
    """Return ``temperature`` as a float in its accepted range (:data:`logitscope.parameters.RANGES`).

    Examples
    --------
    >>> check_temperature(2)
    2.0
    """
    return float(check_parameter(temperature, "temperature"))


def check_k(k: int, n_classes: int, what: str = "k") -> int:
    """Return ``k`` if ``1 <= k <= n_classes`` (the range of ``k`` in :mod:`logitscope.parameters`)."""
    rng = get_range("k")
    if what != rng.label:
        rng = dataclasses.replace(rng, label=what)
    return int(rng.check(k, upper=n_classes, context=f"for {n_classes} classes"))
