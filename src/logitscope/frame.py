"""The data layer: a labelled, immutable wrapper around a logit matrix."""

from __future__ import annotations

import os
from collections import OrderedDict
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike

from . import analysis as an
from .analysis._validation import _to_numpy, assume_valid, check_labels, check_logits, check_temperature
from .analysis.softmax import result_dtype
from .errors import (
    ClassNameError,
    DuplicateError,
    InputTypeError,
    LabelError,
    ShapeError,
    describe_rows,
)

__all__ = ["LogitFrame", "Payload"]

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


def _make_payload(n: int, images: Any = None, image_paths: Any = None, texts: Any = None) -> Payload | None:
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
        view = arr.view()
        view.flags.writeable = False
        return Payload("images", view)
    items = [os.fspath(v) if kind == "image_paths" else v for v in value]
    if len(items) != n:
        raise ShapeError(f"{kind} hold {len(items)} items but the frame has {n} samples")
    if kind == "texts":
        bad = [i for i, t in enumerate(items) if not isinstance(t, str)]
        if bad:
            raise InputTypeError(f"texts must be strings; not so at {describe_rows(bad)}")
    return Payload(kind, tuple(items))  # type: ignore[arg-type]


def _readonly(a: np.ndarray) -> np.ndarray:
    v = a.view()
    v.flags.writeable = False
    return v


class LogitFrame:
    """A classifier's logits on a batch, with labels, class names, ids, metadata and payloads.

    The frame validates its inputs once and is immutable: :meth:`with_temperature`,
    :meth:`subset`, :meth:`append`, :meth:`with_payload` and :meth:`with_meta`
    return new frames. The logit matrix is kept in its own dtype (float16,
    float32 or float64) without a copy; all computations run in float64.

    Parameters
    ----------
    logits : array_like of shape (N, K)
        numpy array, pandas DataFrame (its columns become class names) or
        torch tensor. With ``binary=True`` a single column (N,) or (N, 1) of
        log-odds for class 1.
    labels : array_like of shape (N,), optional
        True classes, as indices in ``[0, K)`` or as class names.
    classes : sequence of str, optional
        Class names, unique; default ``"0" .. "K-1"``.
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

    Examples
    --------
    >>> import numpy as np
    >>> frame = LogitFrame(np.array([[2.0, 0.5], [0.1, 1.2]]), labels=["stamp", "stamp"],
    ...                    classes=["stamp", "no stamp"])
    >>> frame.n_samples, frame.n_classes, frame.summary()["accuracy"]
    (2, 2, 0.5)
    """

    _CACHE_SIZE = 4

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
        source: str = "logits",
    ) -> None:
        if classes is None and isinstance(logits, pd.DataFrame):
            classes = [str(c) for c in logits.columns]
        raw = _to_numpy(logits, "logits")
        if binary:
            raw = an.binary_to_two_column(raw)
        z = check_logits(raw)
        n, k = z.shape
        self._logits = _readonly(z)
        self._classes = self._check_classes(classes, k)
        self._labels = None if labels is None else _readonly(self._encode_labels(labels, n))
        self._ids = _readonly(self._check_ids(ids, n))
        self._meta = self._check_meta(meta, n)
        self._payload = _make_payload(n, images, image_paths, texts)
        self._temperature = check_temperature(temperature)
        self._source = source
        self._cache: OrderedDict[float, an.SampleScores] = OrderedDict()

    # ------------------------------------------------------------------ validation

    @staticmethod
    def _check_classes(classes: Sequence[str] | None, k: int) -> tuple[str, ...]:
        if classes is None:
            return tuple(str(i) for i in range(k))
        names = tuple(str(c) for c in list(classes))
        if len(names) != k:
            raise ClassNameError(f"{len(names)} class names given but the logits have {k} columns")
        seen: dict[str, int] = {}
        for i, c in enumerate(names):
            if c in seen:
                raise DuplicateError(f"class name {c!r} appears twice (columns {seen[c]} and {i})")
            seen[c] = i
        return names

    def _encode_labels(self, labels: ArrayLike, n: int) -> np.ndarray:
        y = _to_numpy(labels, "labels")
        if y.ndim == 1 and y.dtype.kind in "OUS":
            index = {c: i for i, c in enumerate(self._classes)}
            names = [str(v) for v in y.tolist()]
            unknown = sorted({v for v in names if v not in index})
            if unknown:
                rows = [i for i, v in enumerate(names) if v not in index]
                raise ClassNameError(
                    f"labels hold class names not among the {len(index)} classes: "
                    f"{', '.join(repr(u) for u in unknown[:5])}"
                    f"{' and more' if len(unknown) > 5 else ''} (at {describe_rows(rows)})"
                )
            if len(names) != n:
                raise LabelError(f"labels have length {len(names)} but the logits have {n} rows")
            return np.fromiter((index[v] for v in names), dtype=np.int64, count=len(names))
        return check_labels(y, n, len(self._classes))

    @staticmethod
    def _check_ids(ids: ArrayLike | None, n: int) -> np.ndarray:
        if ids is None:
            return np.arange(n, dtype=np.int64)
        arr = _to_numpy(ids, "ids")
        if arr.ndim != 1 or arr.shape[0] != n:
            raise ShapeError(f"ids must be 1-D of length {n}, got shape {arr.shape}")
        if arr.dtype.kind == "O":
            arr = arr.astype(str)
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
        **payload: Any,
    ) -> LogitFrame:  # fmt: skip
        """Build a frame from probabilities, stored as log-probabilities.

        Rows must be non-negative and sum to one (within ``atol``). Zeros are
        stored as the log of the dtype's smallest normal number, so they stay
        finite and map back to (almost) zero.

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
        return cls(logp, labels, classes, ids, meta, source="probabilities", **payload)

    @classmethod
    def from_estimator(
        cls, estimator: Any, X: Any, y: ArrayLike | None = None, *,
        method: Literal["auto", "decision_function", "predict_proba"] = "auto",
        ids: ArrayLike | None = None, meta: pd.DataFrame | None = None, **payload: Any,
    ) -> LogitFrame:  # fmt: skip
        """Build a frame from a fitted scikit-learn classifier and data.

        With ``method="auto"`` the logits come from ``decision_function`` for
        models whose decision function is a logit (logistic regression,
        log-loss SGD, linear discriminant analysis), else from
        ``predict_proba``. A binary model's single decision column becomes
        ``[0, z]``. Labels ``y`` are given in the estimator's own classes.

        Examples
        --------
        >>> from sklearn.datasets import load_iris
        >>> from sklearn.linear_model import LogisticRegression
        >>> X, y = load_iris(return_X_y=True)
        >>> f = LogitFrame.from_estimator(LogisticRegression(max_iter=500).fit(X, y), X, y)
        >>> f.n_classes, round(f.summary()["accuracy"], 2)
        (3, 0.97)
        """
        if not hasattr(estimator, "classes_"):
            raise InputTypeError("estimator must be a fitted scikit-learn classifier (it has no classes_)")
        est_classes = list(estimator.classes_)
        names = [str(c) for c in est_classes]
        if method == "auto":
            method = "decision_function" if _decision_is_logit(estimator) else "predict_proba"
        labels = None
        if y is not None:
            lookup = {c: i for i, c in enumerate(est_classes)}
            yy = _to_numpy(y, "y").tolist()
            unknown = sorted({str(v) for v in yy if v not in lookup})
            if unknown:
                raise ClassNameError(f"y holds classes the estimator does not know: {', '.join(unknown[:5])}")
            labels = np.array([lookup[v] for v in yy], dtype=np.int64)
        if method == "decision_function":
            d = np.asarray(estimator.decision_function(X))
            return cls(d, labels, names, ids, meta, binary=d.ndim == 1, **payload)
        if method == "predict_proba":
            if not hasattr(estimator, "predict_proba"):
                raise InputTypeError(
                    f"{type(estimator).__name__} has no predict_proba and its decision_function is not a logit; "
                    "pass logits or probabilities to LogitFrame directly"
                )
            return cls.from_probabilities(np.asarray(estimator.predict_proba(X)), labels, names, ids, meta, **payload)
        raise InputTypeError(f"method must be 'auto', 'decision_function' or 'predict_proba', got {method!r}")

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
        """True class indices (N,), or None."""
        return self._labels

    @property
    def has_labels(self) -> bool:
        return self._labels is not None

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
        lab = "labelled" if self.has_labels else "unlabelled"
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
        """The same logits with other labels (indices or class names), or none."""
        y = None if labels is None else _readonly(self._encode_labels(labels, self.n_samples))
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
        >>> f = LogitFrame(np.eye(3), labels=[0, 1, 1])
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
        if (self._labels is None) != (other._labels is None):
            raise LabelError("either both frames have labels or neither")
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
            labels=None if self._labels is None else _readonly(np.concatenate([self._labels, other._labels])),
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
        with assume_valid():
            s = an.sample_scores(self._logits, self._labels, temperature=t)
        self._cache[t] = s
        while len(self._cache) > self._CACHE_SIZE:
            self._cache.popitem(last=False)
        return s

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
        """Fit the temperature that minimises the NLL (Guo et al. 2017)."""
        y = self._require_labels("fit_temperature")
        with assume_valid():
            return an.fit_temperature(self._logits, y)

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

        Both frames must hold the same ids in the same order and the same
        classes; the labels of ``self`` are used, each frame at its own temperature.

        Examples
        --------
        >>> import numpy as np
        >>> a = LogitFrame(np.array([[2.0, 0.0], [0.0, 2.0]]), labels=[0, 0])
        >>> b = LogitFrame(np.array([[2.0, 0.0], [2.0, 0.0]]), labels=[0, 0])
        >>> a.compare(b).only_b_right
        1
        """
        if other.classes != self.classes:
            raise ClassNameError("checkpoints to compare must have the same classes in the same order")
        if other.n_samples != self.n_samples or not np.array_equal(other.ids, self.ids):
            raise ShapeError("checkpoints to compare must score the same sample ids in the same order")
        with assume_valid():
            return an.compare_checkpoints(
                self._logits, other._logits, self._labels, self._temperature, other._temperature
            )

    def report(self, path: str | os.PathLike[str], **options: Any) -> None:
        """Write a self-contained HTML report for teammates (see :func:`logitscope.report.write_report`)."""
        from .report import write_report

        write_report(self, path, **options)


def _decision_is_logit(estimator: Any) -> bool:
    est = estimator
    # unwrap a Pipeline to its final step
    if hasattr(est, "steps") and est.steps:
        est = est.steps[-1][1]
    name = type(est).__name__
    if name in ("LogisticRegression", "LogisticRegressionCV", "LinearDiscriminantAnalysis"):
        return True
    if name == "SGDClassifier":
        return getattr(est, "loss", None) == "log_loss"
    return False
