"""The data layer: a labelled, immutable wrapper around a logit matrix."""

from __future__ import annotations

import os
import warnings
from collections import OrderedDict
from collections.abc import Iterator, Sequence
from contextlib import contextmanager, nullcontext
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike

from . import analysis as an
from .analysis._blocks import block_slices
from .analysis._validation import (
    _to_numpy,
    assume_valid,
    check_labels,
    check_logits,
    check_temperature,
    checks_enabled,
)
from .analysis.softmax import result_dtype
from .errors import (
    ClassNameError,
    DuplicateError,
    InputTypeError,
    LabelError,
    LooksLikeProbabilitiesWarning,
    NonFiniteError,
    ShapeError,
    describe_rows,
)

#: The label of a row that has none (a partly labelled batch).
UNLABELLED = -1

__all__ = ["UNLABELLED", "LogitFrame", "Payload"]

PayloadKind = Literal["images", "image_paths", "texts"]


@dataclass(frozen=True)
class Payload:
    """What each sample looks like: images (N, H, W[, C]), image file paths, or texts."""

    kind: PayloadKind
    data: Any

    def take(self, rows: np.ndarray) -> Payload:
        """The payload of the given rows."""
        if self.kind == "images":
            return Payload(self.kind, self.data[rows])
        return Payload(self.kind, [self.data[int(i)] for i in rows])

    def __len__(self) -> int:
        return len(self.data)


def _sequence_of_items(value: Any, what: str) -> list[Any]:
    """``value`` as a list of per-sample items; a single string or a 0-d or 2-D array is refused."""
    if isinstance(value, str | bytes):
        raise InputTypeError(
            f"{what} must be a sequence of items, got a single string ({value[:40]!r}); "
            "a string would be read as a list of its characters"
        )
    if isinstance(value, set | frozenset | dict):
        raise InputTypeError(
            f"{what} must be an ordered sequence (a list, tuple or array), got a {type(value).__name__}"
        )
    if hasattr(value, "ndim") and getattr(value, "ndim", 1) != 1:
        raise InputTypeError(f"{what} must be one-dimensional (a sequence of items), got shape {value.shape}")
    try:
        items = value.tolist() if isinstance(value, np.ndarray) else list(value)
    except TypeError as exc:
        raise InputTypeError(f"{what} must be a sequence of items, got {type(value).__name__}") from exc
    return items


def _make_payload(
    n: int, images: Any = None, image_paths: Any = None, texts: Any = None, copy: bool = True
) -> Payload | None:
    given = [(k, v) for k, v in (("images", images), ("image_paths", image_paths), ("texts", texts)) if v is not None]
    if not given:
        return None
    if len(given) > 1:
        raise InputTypeError("attach one payload at a time: images, image_paths or texts")
    kind, value = given[0]
    if kind == "images":
        arr = _to_numpy(value, "images")
        if arr.ndim not in (3, 4) or (arr.ndim == 4 and arr.shape[3] not in (1, 3, 4)):
            raise ShapeError(f"images must have shape (N, H, W) or (N, H, W, C) with C in 1, 3, 4; got {arr.shape}")
        if arr.shape[0] != n:
            raise ShapeError(f"images hold {arr.shape[0]} samples but the frame has {n}")
        return Payload("images", _readonly(np.array(arr, copy=True) if copy else arr))
    items = _sequence_of_items(value, kind)
    if len(items) != n:
        raise ShapeError(f"{kind} hold {len(items)} items but the frame has {n} samples")
    if kind == "image_paths":
        bad = [i for i, t in enumerate(items) if not isinstance(t, str | os.PathLike)]
        if not bad:
            items = [os.fspath(t) for t in items]
            bad = [i for i, t in enumerate(items) if not isinstance(t, str)]
        if bad:
            raise InputTypeError(
                f"image_paths must be file paths (strings or path-like objects); not so at {describe_rows(bad)} "
                f"(first {type(items[bad[0]]).__name__} {items[bad[0]]!r})"
            )
    if kind == "texts":
        bad = [i for i, t in enumerate(items) if not isinstance(t, str)]
        if bad:
            raise InputTypeError(f"texts must be strings; not so at {describe_rows(bad)}")
    return Payload(kind, tuple(items))  # type: ignore[arg-type]


def _readonly(a: np.ndarray) -> np.ndarray:
    v = a.view()
    v.flags.writeable = False
    return v


def _split_missing(labels: Any) -> tuple[np.ndarray, np.ndarray]:
    """Labels as an array and the mask of rows without one (None, NaN, pandas NA, -1, or masked).

    Examples
    --------
    >>> y, missing = _split_missing([2, -1, None, 0])
    >>> missing.tolist()
    [False, True, True, False]
    """
    if np.ma.isMaskedArray(labels):
        mask = np.ma.getmaskarray(labels).copy()
        data = np.ma.getdata(labels)
        if data.ndim == 1 and data.dtype.kind in "iuf":
            y = np.where(mask, 0, data)
        else:
            y = np.asarray(data, dtype=object).copy()
            y[mask] = None
        return np.asarray(y), mask
    if isinstance(labels, pd.Series | pd.Index | pd.api.extensions.ExtensionArray):
        mask = np.asarray(pd.isna(labels), dtype=bool)
        arr = np.asarray(labels, dtype=object)
        if mask.any() or arr.dtype.kind == "O":
            out = arr.copy()
            out[mask] = None
            try:
                clean = np.asarray(out[~mask].tolist())
            except Exception:  # mixed content: the encoder names the problem
                return out, mask
            if clean.dtype.kind in "iuf":
                y = np.zeros(arr.shape[0], dtype=clean.dtype if clean.size else np.int64)
                y[~mask] = clean
                return y, mask | (y == UNLABELLED) if clean.dtype.kind in "iu" else mask
            return out, mask
        labels = arr
    y = _to_numpy(labels, "labels")
    if y.ndim != 1:
        return y, np.zeros(y.shape[:1], dtype=bool)
    if y.dtype.kind == "f":
        mask = np.isnan(y)
        return y, mask
    if y.dtype.kind in "iu":
        return y, y == UNLABELLED if y.dtype.kind == "i" else np.zeros(y.shape, dtype=bool)
    if y.dtype.kind == "O":
        mask = np.array([v is None or (isinstance(v, float) and v != v) or v is pd.NA for v in y.tolist()], dtype=bool)
        if mask.any():
            rest = [v for v, m in zip(y.tolist(), mask.tolist(), strict=True) if not m]
            kinds = {type(v) for v in rest}
            if rest and kinds <= {int, np.int64, np.int32, float, np.float64, bool}:
                filled = np.zeros(y.shape[0], dtype=np.float64)
                filled[~mask] = np.asarray(rest, dtype=np.float64)
                return filled, mask | (filled == UNLABELLED)
        return y, mask
    return y, np.zeros(y.shape, dtype=bool)


def _classes_from_labels(labels: Any, default: tuple[str, ...]) -> tuple[str, ...]:
    """Class names for labels given as names without ``classes``: sorted, as scikit-learn's LabelEncoder."""
    if isinstance(labels, str | bytes):
        return default  # refused with a clear message when the labels are encoded
    y, missing = _split_missing(labels)
    if y.ndim != 1 or y.dtype.kind not in "OUS":
        return default
    names = sorted({str(v) for v, m in zip(y.tolist(), missing.tolist(), strict=True) if not m})
    if set(names) <= set(default):  # "0", "2", ...: the default names, in column order
        return default
    if len(names) != len(default):
        shown = ", ".join(repr(c) for c in names[:5]) + (" ..." if len(names) > 5 else "")
        raise ClassNameError(
            f"labels name {len(names)} classes ({shown}) but the logits have {len(default)} columns, so the "
            "class of each column cannot be inferred; pass classes=[...] in column order"
        )
    return tuple(names)


#: rows checked first when deciding whether logits look like probabilities
_PROBE_ROWS = 1024


def _checked_by_scoring(z: np.ndarray) -> bool:
    """Whether a new frame checks ``z`` for NaN and infinities in its first scoring pass rather than alone.

    The per-sample scores find non-finite rows as they go (:func:`logitscope.analysis.sample_scores`),
    so a frame that keeps its scores anyway computes them when it is made, and the check costs no pass
    of its own. That holds when the numba kernel runs (the numpy path is many passes) and one
    temperature's scores fit the score cache (:meth:`LogitFrame._cache_room`); otherwise the separate
    check, a fraction of a pass, is the cheaper one.
    """
    if z.ndim != 2 or z.dtype.kind != "f" or z.shape[0] == 0 or z.shape[1] < 2:
        return False
    return (
        an.available_backends()[0] == "numba"
        and LogitFrame._cache_room(z.shape[0], z.nbytes, LogitFrame._CACHE_MIN_BYTES) >= 1
    )


def _looks_like_probabilities(z: np.ndarray) -> bool:
    """True when every row is non-negative and sums to one (a few rows are looked at first, so logits cost little)."""
    atol = 1e-6 if z.dtype == np.float64 else 1e-3
    for part in (z[:_PROBE_ROWS], z[_PROBE_ROWS:]):
        if part.shape[0] == 0:
            continue
        sums = np.add.reduce(part, axis=1, dtype=np.float64)
        if not np.all(np.abs(sums - 1.0) <= atol) or part.min() < 0:
            return False
    return True


class LogitFrame:
    """A classifier's logits on a batch, with labels, class names, ids, metadata and payloads.

    The frame validates its inputs once and is immutable: :meth:`with_temperature`,
    :meth:`subset`, :meth:`append`, :meth:`with_payload` and :meth:`with_meta`
    return new frames. The logit matrix is kept in its own dtype (float16,
    float32 or float64); all computations run in float64. By default the frame
    holds its own read-only copies of every array it is given, so changing the
    caller's array (an in-place operation on a torch tensor, say) cannot
    change the frame.

    Every logit is checked for NaN and infinities when the frame is made. The
    check rides on the per-sample scores at the frame's temperature, which the
    frame then computes at once and keeps (read-only, like every score it
    caches): the scoring pass finds such rows as it goes, so the check costs no
    pass of its own. Where one temperature's scores would not fit the score
    cache (a quarter of the logit matrix, at least 64 MiB) or numba is absent,
    a separate check runs instead, a fraction of one pass over the matrix.

    Parameters
    ----------
    logits : array_like of shape (N, K)
        numpy array, pandas DataFrame (its columns become class names) or
        torch tensor. With ``binary=True`` a single column (N,) or (N, 1) of
        log-odds for class 1. Probabilities belong in
        :meth:`from_probabilities`: a matrix whose rows are all non-negative
        and sum to one warns with :class:`~logitscope.errors.LooksLikeProbabilitiesWarning`.
    labels : array_like of shape (N,), optional
        True classes, as indices in ``[0, K)`` or as class names. Names
        without ``classes`` give the classes in sorted order, as
        scikit-learn's ``LabelEncoder`` does (unless every name is one of the
        default names ``"0" .. "K-1"``, which keep their column order); the
        labels must then name all K classes.
    classes : sequence of str, optional
        Class names, unique; default ``"0" .. "K-1"``. A single string is
        refused (it would be read as a list of characters).
    ids : sequence, optional
        Unique sample ids; default ``0 .. N-1``.
    meta : pandas.DataFrame, optional
        Per-sample metadata aligned by row position.
    images, image_paths, texts : optional
        One payload: an image array (N, H, W) or (N, H, W, C), image file
        paths, or texts.
    temperature : float, default 1.0
        The temperature every method uses unless told otherwise.
    binary : bool, default False
        Read a single logit column as a binary model (see
        :func:`logitscope.analysis.binary_to_two_column`).
    copy : bool, default True
        Copy the arrays the frame is given. With ``copy=False`` the frame
        shares the caller's logit matrix (and image array) instead: a promise
        by the caller never to write to it while the frame is used, for a
        matrix too large to hold twice. Labels, ids and metadata are always
        copied (they are small).

    Examples
    --------
    >>> import numpy as np
    >>> frame = LogitFrame(np.array([[2.0, 0.5], [0.1, 1.2]]), labels=["stamp", "stamp"],
    ...                    classes=["stamp", "no stamp"])
    >>> frame.n_samples, frame.n_classes, frame.summary()["accuracy"]
    (2, 2, 0.5)
    """

    #: Most temperatures whose per-sample scores are cached, and the bytes they may take together
    #: (at least one temperature is always kept): a quarter of the logit matrix, or 64 MiB for a small one.
    _CACHE_SIZE = 4
    _CACHE_MIN_BYTES = 64 << 20
    #: The scores of one temperature per row: ten 8-byte columns and a boolean one.
    _SCORE_BYTES_PER_ROW = 8 * 10 + 1

    def __init__(
        self,
        logits: ArrayLike,
        labels: ArrayLike | None = None,
        classes: Sequence[str] | None = None,
        ids: ArrayLike | None = None,
        meta: pd.DataFrame | None = None,
        *,
        images: Any = None,
        image_paths: Sequence[str | os.PathLike[str]] | None = None,
        texts: Sequence[str] | None = None,
        temperature: float = 1.0,
        binary: bool = False,
        copy: bool = True,
        source: str = "logits",
    ) -> None:
        if classes is None and isinstance(logits, pd.DataFrame):
            classes = [str(c) for c in logits.columns]
        given = _to_numpy(logits, "logits")
        raw = given
        if binary:
            raw = an.binary_to_two_column(given)
        elif raw.ndim == 1 and raw.dtype.kind in "biuf":
            raise ShapeError(
                f"logits are 1-D (shape {raw.shape}); a binary model's single score per sample (the log-odds "
                "of class 1, e.g. decision_function) is passed as LogitFrame(scores, binary=True); its "
                "probabilities of class 1 as LogitFrame.from_probabilities(np.column_stack([1 - p, p]))"
            )
        owned = raw is not given or isinstance(logits, list | tuple)  # made here: a new array already
        by_scoring = _checked_by_scoring(raw)
        # a copy is checked as it is made, in the same pass; a matrix checked by scoring is checked below
        z = check_logits(raw, copy=copy and not owned, check_finite=not by_scoring)
        n, k = z.shape
        if source == "logits" and _looks_like_probabilities(z):
            warnings.warn(
                "every row of these logits is non-negative and sums to 1: they look like probabilities. "
                "Pass probabilities to LogitFrame.from_probabilities, which takes their logarithm; "
                "as logits they give other probabilities, NLL and calibration",
                LooksLikeProbabilitiesWarning,
                stacklevel=2,
            )
        self._logits = _readonly(z)
        self._classes = self._check_classes(classes, k, labels)
        self._labels = None if labels is None else self._encode_labels(labels, n)
        self._ids = _readonly(self._check_ids(ids, n))
        self._meta = self._check_meta(meta, n)
        self._payload = _make_payload(n, images, image_paths, texts, copy=copy)
        self._temperature = check_temperature(temperature)
        self._source = source
        self._cache: OrderedDict[float, an.SampleScores] = OrderedDict()
        self._curves: dict[float, tuple[np.ndarray | None, an.RiskCoverage]] | None = None
        if by_scoring and checks_enabled():
            self._score(self._temperature, check=True)  # raises NonFiniteError naming the rows

    # ------------------------------------------------------------------ validation

    @staticmethod
    def _check_classes(classes: Sequence[str] | None, k: int, labels: Any = None) -> tuple[str, ...]:
        if classes is None:
            default = tuple(str(i) for i in range(k))
            return _classes_from_labels(labels, default) if labels is not None else default
        items = _sequence_of_items(classes, "classes")
        odd = [i for i, c in enumerate(items) if not isinstance(c, str | int | float | np.generic)]
        if odd:
            raise InputTypeError(
                f"classes must be names (strings), one per logit column; item {odd[0]} is a "
                f"{type(items[odd[0]]).__name__} ({items[odd[0]]!r:.60})"
            )
        names = tuple(str(c) for c in items)
        if len(names) != k:
            raise ClassNameError(f"{len(names)} class names given but the logits have {k} columns")
        seen: dict[str, int] = {}
        for i, c in enumerate(names):
            if c in seen:
                raise DuplicateError(f"class name {c!r} appears twice (columns {seen[c]} and {i})")
            seen[c] = i
        return names

    def _encode_labels(self, labels: ArrayLike, n: int) -> np.ndarray | None:
        """Labels as read-only int64 class indices, ``UNLABELLED`` (-1) where a row has none; None when none has."""
        if isinstance(labels, str | bytes):
            raise InputTypeError("labels must be a sequence with one label per sample, got a single string")
        y, missing = _split_missing(labels)
        if y.ndim == 1 and y.shape[0] != n:
            raise LabelError(f"labels have length {y.shape[0]} but the logits have {n} rows")
        if y.ndim == 1 and missing.all():
            return None  # no row has a label: an unlabelled frame
        names_given = y.ndim == 1 and y.dtype.kind in "OUS"
        if not names_given and (y.ndim != 1 or not missing.any()):
            return _readonly(np.array(check_labels(y, n, len(self._classes)), copy=True))
        have = ~missing
        out = np.full(n, UNLABELLED, dtype=np.int64)
        if names_given:
            index = {c: i for i, c in enumerate(self._classes)}
            names = [str(v) for v in y[have].tolist()]
            unknown = sorted({v for v in names if v not in index})
            if unknown:
                where = np.flatnonzero(have)
                rows = [int(where[i]) for i, v in enumerate(names) if v not in index]
                raise ClassNameError(
                    f"labels hold class names not among the {len(index)} classes: "
                    f"{', '.join(repr(u) for u in unknown[:5])}"
                    f"{' and more' if len(unknown) > 5 else ''} (at {describe_rows(rows)})"
                )
            out[have] = np.fromiter((index[v] for v in names), dtype=np.int64, count=len(names))
            return _readonly(out)
        filled = np.where(missing, 0, y)  # rows without a label stand in as class 0, so errors name the true rows
        out[have] = check_labels(filled, n, len(self._classes))[have]
        return _readonly(out)

    @staticmethod
    def _check_ids(ids: ArrayLike | None, n: int) -> np.ndarray:
        if ids is None:
            return np.arange(n, dtype=np.int64)
        arr = _to_numpy(ids, "ids")
        if arr.ndim != 1 or arr.shape[0] != n:
            raise ShapeError(f"ids must be 1-D of length {n}, got shape {arr.shape}")
        if arr.dtype.kind == "f":
            nan = np.flatnonzero(np.isnan(arr))
            if nan.size:
                raise NonFiniteError(
                    f"ids must not be NaN (every sample needs its own id); NaN at {describe_rows(nan)}"
                )
        if arr.dtype.kind == "O":
            arr = arr.astype(str)
        arr = np.array(arr, copy=True)
        uniq, counts = np.unique(arr, return_counts=True)
        if np.any(counts > 1):
            dup = uniq[counts > 1]
            rows = np.flatnonzero(np.isin(arr, dup[:1]))
            raise DuplicateError(
                f"ids must be unique; {dup.size} ids repeat, first {dup[0].item()!r} at {describe_rows(rows)}"
            )
        return arr

    @staticmethod
    def _check_meta(meta: pd.DataFrame | None, n: int) -> pd.DataFrame:
        if meta is None:
            return pd.DataFrame(index=pd.RangeIndex(n))
        if not isinstance(meta, pd.DataFrame):
            raise InputTypeError(f"meta must be a pandas DataFrame, got {type(meta).__name__}")
        if len(meta) != n:
            raise ShapeError(f"meta has {len(meta)} rows but the frame has {n} samples")
        return meta.reset_index(drop=True).copy()

    # ------------------------------------------------------------------ constructors

    @classmethod
    def from_probabilities(
        cls, probabilities: ArrayLike, labels: ArrayLike | None = None, classes: Sequence[str] | None = None,
        ids: ArrayLike | None = None, meta: pd.DataFrame | None = None, *, atol: float | None = None,
        copy: bool = True, **payload: Any,
    ) -> LogitFrame:  # fmt: skip
        """Build a frame from probabilities, stored as log-probabilities.

        Rows must be non-negative and sum to one within ``atol`` (a number in
        ``[0, 1)``; default ``1e-6`` for float64, ``1e-3`` for float32 and
        float16). Zeros are stored as the log of the dtype's smallest normal
        number, so they stay finite and map back to (almost) zero. The
        log-probabilities are a new array; ``copy`` applies to an image payload.

        Examples
        --------
        >>> f = LogitFrame.from_probabilities([[0.25, 0.75], [1.0, 0.0]], labels=[1, 0])
        >>> f.probabilities().round(6).tolist()
        [[0.25, 0.75], [1.0, 0.0]]
        """
        if classes is None and isinstance(probabilities, pd.DataFrame):
            classes = [str(c) for c in probabilities.columns]
        p = an.check_probabilities(_to_numpy(probabilities, "probabilities"), atol=atol)
        dtype = result_dtype(p.dtype)
        tiny = np.finfo(dtype).tiny
        logp = np.log(np.maximum(p.astype(dtype, copy=False), tiny))
        if copy and payload.get("images") is not None:
            payload["images"] = np.array(_to_numpy(payload["images"], "images"), copy=True)
        return cls(logp, labels, classes, ids, meta, source="probabilities", copy=False, **payload)

    @classmethod
    def from_estimator(
        cls, estimator: Any, X: Any, y: ArrayLike | None = None, *,
        method: Literal["auto", "decision_function", "predict_proba"] = "auto",
        ids: ArrayLike | None = None, meta: pd.DataFrame | None = None, copy: bool = True, **payload: Any,
    ) -> LogitFrame:  # fmt: skip
        """Build a frame from a fitted scikit-learn classifier and data.

        With ``method="auto"`` the logits are the model's ``decision_function``
        where that is what its probabilities come from: where the softmax of
        the decision function equals ``predict_proba`` on every row of ``X``
        (to 1e-6; checked on the numbers, not assumed from the model's kind).
        That holds for multinomial logistic regression, linear discriminant
        analysis and gradient boosting, and fails for one-vs-rest models (a
        multiclass ``SGDClassifier(loss="log_loss")``, ``OneVsRestClassifier``),
        whose probabilities are normalised sigmoids. Otherwise, and for models
        without a decision function (forests, neural networks, calibrated
        classifiers), the frame is built from ``predict_proba`` (stored as its
        logarithm). So ``frame.probabilities()`` always equals the model's own
        ``predict_proba``. The check costs one more prediction pass over ``X``.

        ``method="decision_function"`` takes the decision function as logits
        unchecked (for a model without ``predict_proba``, at the caller's
        word); ``method="predict_proba"`` always uses the probabilities. A
        binary model's single decision column ``z`` becomes ``[0, z]``. Labels
        ``y`` are given in the estimator's own classes. When ``X`` is a pandas
        DataFrame and no ``ids`` are given, its index gives the ids.

        Examples
        --------
        >>> from sklearn.datasets import load_iris
        >>> from sklearn.linear_model import LogisticRegression
        >>> X, y = load_iris(return_X_y=True)
        >>> f = LogitFrame.from_estimator(LogisticRegression(max_iter=500).fit(X, y), X, y)
        >>> f.n_classes, f.source, round(f.summary()["accuracy"], 2)
        (3, 'logits', 0.97)
        """
        if not hasattr(estimator, "classes_"):
            raise InputTypeError("estimator must be a fitted scikit-learn classifier (it has no classes_)")
        if method not in ("auto", "decision_function", "predict_proba"):
            raise InputTypeError(f"method must be 'auto', 'decision_function' or 'predict_proba', got {method!r}")
        est_classes = list(estimator.classes_)
        names = [str(c) for c in est_classes]
        labels = None
        if y is not None:
            lookup = {c: i for i, c in enumerate(est_classes)}
            yy = _to_numpy(y, "y").tolist()
            unknown = sorted({str(v) for v in yy if v not in lookup})
            if unknown:
                raise ClassNameError(f"y holds classes the estimator does not know: {', '.join(unknown[:5])}")
            labels = np.array([lookup[v] for v in yy], dtype=np.int64)
        if ids is None and isinstance(X, pd.DataFrame):
            ids = X.index.to_numpy()
        if copy and payload.get("images") is not None:
            payload["images"] = np.array(_to_numpy(payload["images"], "images"), copy=True)
        kind = type(estimator).__name__
        has_decision = hasattr(estimator, "decision_function")
        has_proba = hasattr(estimator, "predict_proba")
        if method == "decision_function" or (method == "auto" and has_decision and not has_proba):
            if not has_decision:
                raise InputTypeError(f"{kind} has no decision_function; use method='predict_proba' or 'auto'")
            if method == "auto":
                raise InputTypeError(
                    f"{kind} has a decision_function but no predict_proba, so whether its scores are logits "
                    "cannot be checked; pass method='decision_function' to take them as logits, or calibrate "
                    "the model (sklearn.calibration.CalibratedClassifierCV) for probabilities"
                )
            d = np.asarray(estimator.decision_function(X))
            return cls(d, labels, names, ids, meta, binary=d.ndim == 1, copy=False, **payload)
        if not has_proba:
            raise InputTypeError(
                f"{kind} has neither predict_proba nor decision_function; "
                "pass its logits or probabilities to LogitFrame directly"
            )
        p = np.asarray(estimator.predict_proba(X))
        if method == "auto" and has_decision:
            z = _decision_logits_matching(estimator, X, p)
            if z is not None:
                return cls(z, labels, names, ids, meta, copy=False, **payload)
        return cls.from_probabilities(p, labels, names, ids, meta, copy=False, **payload)

    @classmethod
    def read(cls, path: str | os.PathLike[str]) -> LogitFrame:
        """Read a frame from ``.npz``, ``.parquet`` or a ``.zarr`` store (layouts in the README) into memory."""
        from .io import read_frame

        return read_frame(path)

    def write(self, path: str | os.PathLike[str]) -> None:
        """Write the frame to ``.npz``, ``.parquet`` or a ``.zarr`` store, atomically."""
        from .io import write_frame

        write_frame(self, path)

    # ------------------------------------------------------------------ attributes

    @property
    def logits(self) -> np.ndarray:
        """The (N, K) logit matrix, read-only, in its own dtype."""
        return self._logits

    @property
    def labels(self) -> np.ndarray | None:
        """True class indices (N,), ``UNLABELLED`` (-1) for rows without a label; None when no row has one."""
        return self._labels

    @property
    def has_labels(self) -> bool:
        """Whether at least one row has a label."""
        return self._labels is not None

    @property
    def labelled(self) -> np.ndarray:
        """Boolean mask (N,) of the rows that have a label (read-only)."""
        if self._labels is None:
            mask = np.zeros(self.n_samples, dtype=bool)
        else:
            mask = self._labels >= 0
        return _readonly(mask)

    @property
    def n_labelled(self) -> int:
        """How many rows have a label (counted once: the labels never change)."""
        memo = self.__dict__.get("_n_labelled_memo")
        if memo is None:
            memo = 0 if self._labels is None else int(np.count_nonzero(self._labels >= 0))
            self.__dict__["_n_labelled_memo"] = memo
        return int(memo)

    @property
    def fully_labelled(self) -> bool:
        """Whether every row has a label."""
        return self._labels is not None and self.n_labelled == self.n_samples

    def labelled_rows(self, rows: ArrayLike | None = None) -> np.ndarray | None:
        """Positions of the labelled rows among ``rows`` (default all rows); None when that is every row.

        Examples
        --------
        >>> import numpy as np
        >>> f = LogitFrame(np.eye(3), labels=[0, -1, 2])
        >>> f.labelled_rows().tolist(), f.n_labelled, f.fully_labelled
        ([0, 2], 2, False)
        """
        if self._labels is None:
            return np.zeros(0, dtype=np.int64)
        if rows is None:
            return None if self.fully_labelled else np.flatnonzero(self._labels >= 0)
        r = np.asarray(rows, dtype=np.int64)
        return r if self.fully_labelled else r[self._labels[r] >= 0]

    def _labels_for_analysis(self) -> np.ndarray:
        """Labels with every unlabelled row given class 0, for analysis calls restricted to labelled rows."""
        y = self._require_labels("this")
        return y if self.fully_labelled else np.where(y >= 0, y, 0)

    @property
    def classes(self) -> tuple[str, ...]:
        return self._classes

    @property
    def ids(self) -> np.ndarray:
        return self._ids

    @property
    def meta(self) -> pd.DataFrame:
        """Per-sample metadata (a copy; the frame's own stays unchanged)."""
        return self._meta.copy()

    @property
    def payload(self) -> Payload | None:
        return self._payload

    @property
    def temperature(self) -> float:
        return self._temperature

    @property
    def source(self) -> str:
        """``"logits"`` or ``"probabilities"`` (stored as log-probabilities)."""
        return self._source

    @property
    def n_samples(self) -> int:
        return int(self._logits.shape[0])

    @property
    def n_classes(self) -> int:
        return int(self._logits.shape[1])

    def __len__(self) -> int:
        return self.n_samples

    def __repr__(self) -> str:
        lab = (
            "labelled"
            if self.fully_labelled
            else (f"{self.n_labelled:,} of {self.n_samples:,} labelled" if self.has_labels else "unlabelled")
        )
        pay = f", {self._payload.kind}" if self._payload else ""
        return (
            f"<LogitFrame {self.n_samples} samples x {self.n_classes} classes, {self._logits.dtype}, "
            f"{lab}, T={self._temperature:g}{pay}>"
        )

    # ------------------------------------------------------------------ new frames

    def _replace(self, **changes: Any) -> LogitFrame:
        new = object.__new__(LogitFrame)
        new.__dict__.update(self.__dict__)
        new._cache = OrderedDict()
        if "labels" in changes:
            new.__dict__.pop("_n_labelled_memo", None)  # counted again for the new labels
        new._curves = None
        for k, v in changes.items():
            setattr(new, f"_{k}", v)
        if "temperature" not in changes and "logits" not in changes and "labels" not in changes:
            new._cache = self._cache  # the same numbers: share the cache
        return new

    def with_temperature(self, temperature: float) -> LogitFrame:
        """The same data with another default temperature."""
        return self._replace(temperature=check_temperature(temperature))

    def calibrated(self) -> LogitFrame:
        """The frame at its fitted temperature (:meth:`fit_temperature`)."""
        return self.with_temperature(self.fit_temperature().temperature)

    def with_labels(self, labels: ArrayLike | None) -> LogitFrame:
        """The same logits with other labels (indices or class names; -1, None or NaN where a row has none)."""
        y = None if labels is None else self._encode_labels(labels, self.n_samples)
        return self._replace(labels=y)

    def with_meta(self, meta: pd.DataFrame) -> LogitFrame:
        """The same frame with another metadata table."""
        return self._replace(meta=self._check_meta(meta, self.n_samples))

    def with_payload(self, *, images: Any = None, image_paths: Any = None, texts: Any = None) -> LogitFrame:
        """The same frame with one payload attached (images, image paths or texts)."""
        return self._replace(payload=_make_payload(self.n_samples, images, image_paths, texts))

    def _rows(self, rows: ArrayLike) -> np.ndarray:
        r = np.asarray(rows)
        n = self.n_samples
        if r.dtype == bool:
            if r.shape != (n,):
                raise ShapeError(f"a boolean mask must have shape ({n},), got {r.shape}")
            return np.flatnonzero(r)
        if r.dtype.kind not in "iu":
            if r.size == 0:
                return np.zeros(0, dtype=np.int64)
            raise InputTypeError(f"rows must be integer positions or a boolean mask, got dtype {r.dtype}")
        r = r.astype(np.int64).ravel()
        bad = np.flatnonzero((r < -n) | (r >= n))
        if bad.size:
            raise ShapeError(f"row positions must lie in [-{n}, {n}); out of range: {r[bad[:5]].tolist()}")
        return np.where(r < 0, r + n, r)

    def subset(self, rows: ArrayLike) -> LogitFrame:
        """A new frame of the given rows (positions or a boolean mask), in that order.

        Examples
        --------
        >>> import numpy as np
        >>> f = LogitFrame(np.eye(3) * 2.0, labels=[0, 1, 1])
        >>> f.subset(f.scores()["correct"].to_numpy()).n_samples
        2
        """
        r = self._rows(rows)
        if r.size == 0:
            raise ShapeError("a subset must keep at least one row")
        return self._replace(
            logits=_readonly(self._logits[r]),
            labels=None if self._labels is None else _readonly(self._labels[r]),
            ids=_readonly(self._ids[r]),
            meta=self._meta.iloc[r].reset_index(drop=True),
            payload=None if self._payload is None else self._payload.take(r),
        )

    def append(self, other: LogitFrame) -> LogitFrame:
        """Rows of ``self`` followed by rows of ``other`` (same classes, unique ids)."""
        if other.classes != self.classes:
            raise ClassNameError("frames to append must have the same classes in the same order")
        labels = None
        if self._labels is not None or other._labels is not None:  # rows of a frame without labels are unlabelled
            mine = self._labels if self._labels is not None else np.full(self.n_samples, UNLABELLED, dtype=np.int64)
            theirs = other._labels if other._labels is not None else np.full(other.n_samples, UNLABELLED, np.int64)
            labels = _readonly(np.concatenate([mine, theirs]))
        pay = None
        if self._payload and other._payload:
            if self._payload.kind != other._payload.kind:
                raise InputTypeError("frames to append carry different payload kinds")
            d = (
                np.concatenate([self._payload.data, other._payload.data])
                if self._payload.kind == "images"
                else tuple(self._payload.data) + tuple(other._payload.data)
            )
            pay = Payload(self._payload.kind, d)
        z = np.concatenate([self._logits, other._logits])
        ids = np.concatenate([self._ids, other._ids])
        out = self._replace(
            logits=_readonly(check_logits(z)),
            labels=labels,
            ids=_readonly(self._check_ids(ids, ids.shape[0])),
            meta=pd.concat([self._meta, other._meta], ignore_index=True),
            payload=pay,
        )
        return out

    # ------------------------------------------------------------------ numbers

    def _t(self, temperature: float | None) -> float:
        return self._temperature if temperature is None else check_temperature(temperature)

    def sample_scores(self, temperature: float | None = None) -> an.SampleScores:
        """Per-sample scores as arrays (cached per temperature); see :func:`logitscope.analysis.sample_scores`."""
        t = self._t(temperature)
        hit = self._cache.get(t)
        if hit is not None:
            self._cache.move_to_end(t)
            return hit
        return self._score(t, check=False)

    def _score(self, t: float, check: bool) -> an.SampleScores:
        """Compute and cache the scores at ``t``; with ``check`` the same pass checks every value is finite."""
        keep = self._cache_slots()
        while self._cache and len(self._cache) >= keep:  # make room first: old and new scores never coexist
            self._cache.popitem(last=False)
        y = self._labels
        with nullcontext() if check else assume_valid():
            s = an.sample_scores(self._logits, None if y is None else self._labels_for_analysis(), temperature=t)
        if y is not None and not self.fully_labelled:
            s = _blank_unlabelled(s, y < 0)
        for arr in s.to_dict().values():
            arr.flags.writeable = False  # cached: a caller writing into them would change every later answer
        self._cache[t] = s
        return s

    @contextmanager
    def _sharing_curves(self) -> Iterator[None]:
        """Within this block, :meth:`_risk_coverage` keeps its last curve (findings of the same rows share it)."""
        self._curves = {}
        try:
            yield
        finally:
            self._curves = None

    def _risk_coverage(self, temperature: float, rows: np.ndarray | None, conf: Any, ok: Any) -> an.RiskCoverage:
        """The risk-coverage curve of ``conf`` and ``ok``, the scores of ``rows`` (None: all) at ``temperature``.

        Inside :meth:`_sharing_curves` the last curve is kept and given again for the same temperature and
        the same rows (the same array, read-only, or None), so the calibration summary and the threshold of
        those rows sort their confidences once.
        """
        memo = self._curves
        if memo is None or (rows is not None and rows.flags.writeable):
            return an.risk_coverage_curve(conf, ok)
        hit = memo.get(temperature)
        if hit is not None and hit[0] is rows:
            return hit[1]
        memo.clear()  # one curve at a time: it is as large as the rows
        curve = an.risk_coverage_curve(conf, ok)
        memo[temperature] = (rows, curve)
        return curve

    def _cache_slots(self) -> int:
        """How many temperatures' scores the cache keeps: ``_CACHE_SIZE``, fewer when they would take more
        than a quarter of the logit matrix (or ``_CACHE_MIN_BYTES``), never none."""
        room = self._cache_room(self.n_samples, self._logits.nbytes, self._CACHE_MIN_BYTES)
        return int(max(1, min(self._CACHE_SIZE, room)))

    @classmethod
    def _cache_room(cls, n: int, nbytes: int, min_bytes: int) -> int:
        """How many temperatures' scores of ``n`` rows fit a budget of a quarter of ``nbytes``, or ``min_bytes``."""
        budget = max(nbytes // 4, min_bytes)
        return int(budget // max(1, cls._SCORE_BYTES_PER_ROW * n))

    def probabilities(self, temperature: float | None = None) -> np.ndarray:
        """``softmax(z / T)`` as an (N, K) array (float32 for float16/32 logits)."""
        with assume_valid():
            return an.softmax(self._logits, temperature=self._t(temperature))

    def log_probabilities(self, temperature: float | None = None) -> np.ndarray:
        """``log softmax(z / T)`` as an (N, K) array."""
        with assume_valid():
            return an.log_softmax(self._logits, temperature=self._t(temperature))

    def scores(self, temperature: float | None = None) -> pd.DataFrame:
        """Per-sample scores as a DataFrame indexed by sample id.

        Columns: ``predicted`` (class index), ``predicted_class`` (name),
        ``confidence``, ``entropy``, ``margin``, ``logit_margin``, ``energy``,
        and with labels ``label``, ``label_class``, ``true_probability``,
        ``true_log_probability``, ``brier``, ``true_rank``, ``correct``.

        Examples
        --------
        >>> import numpy as np
        >>> LogitFrame(np.array([[0.0, 0.0]]), labels=[1]).scores()["true_probability"].tolist()
        [0.5]
        """
        s = self.sample_scores(temperature)
        cols = s.to_dict()
        names = pd.Categorical.from_codes(s.predicted, categories=list(self._classes))
        data: dict[str, Any] = {"predicted": cols.pop("predicted"), "predicted_class": names}
        if self._labels is not None:
            data["label"] = np.asarray(self._labels)
            data["label_class"] = pd.Categorical.from_codes(self._labels, categories=list(self._classes))
        data.update(cols)
        # copy=False: the columns are fresh arrays already; consolidating them would copy N x 11 floats
        return pd.DataFrame(data, index=pd.Index(np.asarray(self._ids), name="id"), copy=False)

    def _require_labels(self, what: str) -> np.ndarray:
        if self._labels is None:
            raise LabelError(f"{what} needs labels; this frame has none (use with_labels)")
        return self._labels

    def fit_temperature(self) -> an.TemperatureFit:
        """Fit the temperature that minimises the NLL of the labelled rows (Guo et al. 2017)."""
        self._require_labels("fit_temperature")
        with assume_valid():
            return an.fit_temperature(self._logits, self._labels_for_analysis(), rows=self.labelled_rows())

    def summary(
        self,
        temperature: float | None = None,
        fit_temperature: bool = False,
        target_accuracy: float | None = None,
        n_bins: int = 15,
        interval: Literal["wilson", "clopper-pearson"] = "wilson",
    ) -> dict[str, Any]:
        """The set-level numbers the CLI prints, as a JSON-ready dict.

        See :func:`logitscope.summary.summarize` for the keys.
        """
        from .summary import summarize

        return summarize(self, temperature, fit_temperature, target_accuracy, n_bins, interval)

    def compare(self, other: LogitFrame) -> an.CheckpointComparison:
        """Compare this checkpoint's outputs with ``other``'s on the same samples (McNemar 1947).

        The frames are matched by sample id, in any row order
        (:func:`logitscope.checkpoints.compare_frames`): row indices in the
        result (``changed_rows``, ``fixed_rows``, ``broken_rows``, the flip
        table's cells) are rows of ``self``. Each frame is read at its own temperature.

        Labels are this frame's (``other``'s when this frame has none); frames
        whose labels disagree on a shared id are refused. Before ids were
        matched, ``other`` had to hold the same ids in the same order; the
        result type is unchanged. To leave out ids one frame lacks, use
        ``compare_frames(a, b, missing="drop")``; for a view, :func:`logitscope.compare`.

        Raises
        ------
        ShapeError
            If the two frames do not hold the same sample ids (the message names some).
        ClassNameError
            If their classes differ.
        LabelError
            If their labels disagree on a shared id.

        Examples
        --------
        >>> import numpy as np
        >>> a = LogitFrame(np.array([[2.0, 0.0], [0.0, 2.0]]), labels=[0, 0], ids=["P-1", "P-2"])
        >>> b = LogitFrame(np.array([[2.0, 0.0], [2.0, 0.0]]), labels=[0, 0], ids=["P-2", "P-1"])
        >>> c = a.compare(b)  # b's rows in another order: matched by id
        >>> c.only_b_right, c.fixed_rows.tolist()  # P-2 (row 1 of a) is fixed
        (1, [1])
        """
        from .checkpoints import compare_frames  # checkpoints builds on this module

        if not isinstance(other, LogitFrame):
            raise InputTypeError(f"other must be a LogitFrame, got {type(other).__name__}")
        return compare_frames(self, other, names=("this frame", "other")).comparison

    def report(self, path: str | os.PathLike[str], **options: Any) -> None:
        """Write a self-contained HTML report for teammates (see :func:`logitscope.report.write_report`)."""
        from .report import write_report

        write_report(self, path, **options)

    @classmethod
    def from_torch(
        cls, model: Any, loader: Any, *, classes: Sequence[str] | None = None, device: Any = None,
        ids: ArrayLike | None = None, progress: bool = True, keep_inputs: bool = False, text_key: str | None = None,
    ) -> LogitFrame:  # fmt: skip
        """Run a torch model over a data loader (eval mode, no gradients) and gather its logits.

        Batches may be ``(inputs, labels)``, ``(inputs, labels, ids)`` or dicts
        of tensors (text models); see :func:`logitscope.torch_adapter.frame_from_torch`
        for every option. torch is imported only here.

        Examples
        --------
        >>> import torch
        >>> from torch.utils.data import DataLoader, TensorDataset
        >>> tickets = TensorDataset(torch.randn(6, 16), torch.tensor([0, 1, 2, 0, 1, 2]))
        >>> net = torch.nn.Sequential(torch.nn.Dropout(0.5), torch.nn.Linear(16, 3)).train()
        >>> f = LogitFrame.from_torch(net, DataLoader(tickets, batch_size=4), classes=["billing", "login", "printer"],
        ...                           progress=False)
        >>> f.n_samples, f.classes[0], net.training
        (6, 'billing', True)
        """
        from .torch_adapter import frame_from_torch

        return frame_from_torch(
            model, loader, classes=classes, device=device, ids=ids, progress=progress, keep_inputs=keep_inputs,
            text_key=text_key, frame_type=cls,
        )  # fmt: skip

    def class_mix_check(
        self,
        reference: LogitFrame | ArrayLike,
        *,
        alpha: float = 0.05,
        temperature: float | None = None,
        counts: Literal["predicted", "labels"] = "predicted",
        statistic: Literal["pearson", "g"] = "pearson",
        n_draws: int = 10_000,
        seed: int = 0,
    ) -> an.ClassMixCheck:
        """Has this batch's class mix moved away from ``reference``? (see :func:`logitscope.analysis.class_mix_check`)

        Like is compared with like. Against a reference *frame*, the batch's
        predicted classes are compared with the reference's predicted classes
        (``counts="labels"``: labels with labels, both frames labelled) by the
        two-sample chi-square test of homogeneity, since the reference is a
        sample too. Against an *array*, the array holds proportions known in
        advance (summing to 1) and the batch's counts are tested by the
        multinomial goodness-of-fit test. Where an expected count is below 5
        the p-value is a seeded Monte Carlo estimate from ``n_draws`` draws.

        For an unlabelled (or partly labelled) batch and a labelled reference
        frame the check also carries ``priors``: the class mix of the batch's
        unlabelled rows estimated by EM from their probabilities at
        ``temperature`` (default: the batch's own), starting from the
        reference's label proportions (Saerens et al. 2002).

        Parameters
        ----------
        reference : LogitFrame or array_like of shape (K,)
            A frame with the same classes, or known proportions.
        alpha : float
            Significance level; the check's ``shifted`` is ``p_value < alpha``.
        temperature : float, optional
            Temperature of the probabilities the EM prior estimate uses.
        counts : {"predicted", "labels"}
            What is counted in each row.
        statistic : {"pearson", "g"}
        n_draws, seed : int
            Monte Carlo draws and their seed, used where an expected count is below 5.

        Examples
        --------
        >>> import numpy as np
        >>> ref = LogitFrame(np.eye(3)[[0, 1, 2, 2] * 10] * 12, labels=[0, 1, 2, 2] * 10)
        >>> new = LogitFrame(np.eye(3)[[0, 0, 0, 2] * 10] * 12)
        >>> check = new.class_mix_check(ref)
        >>> check.test, check.observed.tolist(), check.shifted
        ('homogeneity', [30.0, 0.0, 10.0], True)
        >>> check.priors.round(2).tolist()
        [0.75, 0.0, 0.25]
        """
        from .errors import ParameterError

        if counts not in ("predicted", "labels"):
            raise ParameterError(f"counts must be 'predicted' or 'labels', got {counts!r}")
        k = self.n_classes
        t = self._t(temperature)

        def counted(frame: LogitFrame, what: str) -> np.ndarray:
            if counts == "labels":  # the labelled rows of a partly labelled frame
                y = frame._require_labels(f"counts='labels' ({what})")
                return an.class_counts(y[y >= 0], k)
            return an.class_counts(frame.sample_scores().predicted, k)

        options: dict[str, Any] = dict(alpha=alpha, statistic=statistic, counted=counts, n_draws=n_draws, seed=seed)
        if isinstance(reference, LogitFrame):
            if reference.classes != self.classes:
                raise ClassNameError("the reference and the batch must have the same classes in the same order")
            check = an.class_mix_check(
                counted(self, "the batch"), reference_counts=counted(reference, "the reference"), **options
            )
            if not self.fully_labelled and reference._labels is not None:
                # the unlabelled rows of the batch (all of them, or the rest of a partly labelled batch)
                ref_y = reference._labels
                ref_mix = an.class_counts(ref_y[ref_y >= 0], k)
                if np.any(ref_mix == 0):
                    missing = ", ".join(repr(self._classes[i]) for i in np.flatnonzero(ref_mix == 0)[:5])
                    return check.with_priors(None, f"no EM prior estimate: the reference has no labels of {missing}")
                unlabelled = None if self._labels is None else np.flatnonzero(self._labels < 0)
                z = self._logits if unlabelled is None else self._logits[unlabelled]
                with assume_valid():
                    est = an.estimate_priors(z, ref_mix / ref_mix.sum(), temperature=t)
                note = None if est.converged else f"the EM prior estimate did not converge in {est.iterations} steps"
                return check.with_priors(est, note)
            return check
        props = _to_numpy(reference, "reference")
        if props.dtype.kind not in "biuf":
            raise InputTypeError(f"reference must be a LogitFrame or numbers (proportions), got dtype {props.dtype}")
        if props.shape != (k,):
            raise ShapeError(f"reference proportions must have shape ({k},) for {k} classes, got {props.shape}")
        return an.class_mix_check(counted(self, "the batch"), proportions=props, **options)


#: largest difference between softmax(decision_function) and predict_proba for the decision function to count as logits
DECISION_MATCH_ATOL = 1e-6


def _decision_logits_matching(estimator: Any, X: Any, p: np.ndarray) -> np.ndarray | None:
    """The decision function as (N, K) logits if its softmax equals ``p`` on every row, else None."""
    try:
        d = np.asarray(estimator.decision_function(X))
    except (AttributeError, NotImplementedError, ValueError, TypeError):
        return None
    if d.dtype.kind not in "fiu" or p.dtype.kind != "f" or d.ndim not in (1, 2):
        return None
    z = an.binary_to_two_column(d) if d.ndim == 1 else d
    if z.shape != p.shape or z.shape[1] < 2:
        return None
    z = z.astype(np.result_type(z.dtype, np.float32), copy=False)
    tol = max(DECISION_MATCH_ATOL, 16 * float(np.finfo(p.dtype).eps))
    for rows in block_slices(z.shape[0], z.shape[1]):
        zb = z[rows]
        if not np.all(np.isfinite(zb)):
            return None
        with assume_valid():
            q = an.softmax(zb, dtype=np.float64)
        if not np.all(np.abs(q - p[rows]) <= tol):
            return None
    return z


def _blank_unlabelled(s: an.SampleScores, missing: np.ndarray) -> an.SampleScores:
    """The fresh scores ``s`` with the label-dependent ones of unlabelled rows blanked in place (NaN, rank -1,
    not correct); ``s`` must be new arrays that nothing else holds yet."""
    for name in ("true_probability", "true_log_probability", "brier"):
        arr = getattr(s, name)
        if arr is not None:
            arr[missing] = np.nan
    if s.true_rank is not None:
        s.true_rank[missing] = -1
    if s.correct is not None:
        s.correct[missing] = False
    return s
