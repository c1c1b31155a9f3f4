"""The command line's chunked path: ``logitscope summary | report STORE.zarr [--scheduler ADDRESS]``."""

from __future__ import annotations

import argparse
from typing import Any

from .analysis import summarize_chunked
from .cluster import connected, scheduler_address
from .frame import open_chunked

__all__ = ["chunked_report", "chunked_summary"]


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


def chunked_report(args: argparse.Namespace, options: dict[str, Any]) -> None:
    """Write the report of a store, a Parquet folder or an ``.npy`` file to ``args.output``, in process or
    on the cluster of ``args.scheduler`` / ``LOGITSCOPE_SCHEDULER`` (left running)."""
    from ..report import write_chunked_report

    cf = open_chunked(args.file)
    with connected(scheduler_address(getattr(args, "scheduler", None))):
        write_chunked_report(cf, args.output, **options)
