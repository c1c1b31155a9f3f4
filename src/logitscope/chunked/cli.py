"""The command line's chunked path: ``logitscope summary STORE.zarr [--scheduler ADDRESS]``."""

from __future__ import annotations

import argparse
from typing import Any

from .analysis import summarize_chunked
from .cluster import connected, scheduler_address
from .frame import open_chunked

__all__ = ["chunked_summary"]


def chunked_summary(args: argparse.Namespace) -> dict[str, Any]:
    """The summary dict of a store, a Parquet folder or an ``.npy`` file, in process or on a cluster.

    The cluster comes from ``args.scheduler`` or ``LOGITSCOPE_SCHEDULER`` (the
    flag wins) and keeps running afterwards.
    """
    cf = open_chunked(args.file)
    with connected(scheduler_address(getattr(args, "scheduler", None))):
        return summarize_chunked(
            cf,
            temperature=args.temperature,
            fit_temperature=args.fit_temperature,
            target_accuracy=args.target_accuracy,
            interval=args.interval,
        )
