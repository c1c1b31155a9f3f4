"""Batches beyond memory: logits read lazily in row chunks and analysed as dask reductions.

Sources: a Zarr store (:func:`write_zarr`, :class:`ZarrAppender`; layout in
:mod:`logitscope.chunked.store`), a folder of Parquet files in the layout of
:mod:`logitscope.io`, or numpy memmaps / ``.npy`` files. The results are the
in-memory analysis layer's dataclasses; :func:`summarize_chunked` gives the
summary dict of :func:`logitscope.summary.summarize`.

Examples
--------
>>> import numpy as np, tempfile, pathlib
>>> from logitscope import LogitFrame
>>> p = pathlib.Path(tempfile.mkdtemp()) / "mailroom.zarr"
>>> write_zarr(LogitFrame(np.array([[3.0, 0.0], [0.0, 2.0], [1.0, 0.0]]), labels=[0, 1, 1]), p)
>>> s = open_chunked(p).summary()
>>> s["n_samples"], round(s["accuracy"], 4)
(3, 0.6667)
"""

from .analysis import (
    BinnedRiskCoverage,
    ExactOrder,
    aurc,
    class_counts,
    confusion_matrix,
    evaluate_threshold,
    exact_order,
    fit_temperature,
    rank_doubtful_labels,
    reliability_bins,
    risk_coverage_curve,
    sample_scores,
    summarize_chunked,
    threshold_for_accuracy,
    threshold_for_cost,
    top_k_confusion,
)
from .cluster import ENV_VAR, active_client, connected, scheduler_address
from .frame import ChunkedFrame, is_chunked_source, open_chunked
from .store import ZarrAppender, store_info, write_zarr

__all__ = [
    "ENV_VAR",
    "BinnedRiskCoverage",
    "ChunkedFrame",
    "ExactOrder",
    "ZarrAppender",
    "active_client",
    "aurc",
    "class_counts",
    "confusion_matrix",
    "connected",
    "evaluate_threshold",
    "exact_order",
    "fit_temperature",
    "is_chunked_source",
    "open_chunked",
    "rank_doubtful_labels",
    "reliability_bins",
    "risk_coverage_curve",
    "sample_scores",
    "scheduler_address",
    "store_info",
    "summarize_chunked",
    "threshold_for_accuracy",
    "threshold_for_cost",
    "top_k_confusion",
    "write_zarr",
]
