"""Where the chunked computation runs: dask's threaded scheduler in process, or an existing dask.distributed cluster.

The address comes from ``--scheduler ADDRESS`` on the command line or the
environment variable ``LOGITSCOPE_SCHEDULER``; the flag wins when both are set.
:func:`connected` attaches a client for the length of a ``with`` block and
detaches it afterwards, leaving the cluster (its scheduler and workers) running.
The workers read their chunks from the store themselves: the store must be at a
path (or URL) they can reach, which is the user's to arrange on a real cluster.
"""

from __future__ import annotations

import contextlib
import os
from collections.abc import Iterator
from typing import Any

from ..errors import ParameterError

__all__ = ["ENV_VAR", "active_client", "connected", "scheduler_address"]

#: The environment variable naming a dask.distributed scheduler, e.g. ``tcp://10.0.0.5:8786``.
ENV_VAR = "LOGITSCOPE_SCHEDULER"


def scheduler_address(flag: str | None = None) -> str | None:
    """The scheduler to use: the flag if given, else ``LOGITSCOPE_SCHEDULER``, else None (in process).

    Examples
    --------
    >>> scheduler_address("tcp://127.0.0.1:8786")
    'tcp://127.0.0.1:8786'
    """
    if flag:
        return flag
    env = os.environ.get(ENV_VAR, "").strip()
    return env or None


def active_client() -> Any | None:
    """The dask.distributed client in use, or None (then dask's threaded scheduler runs the passes)."""
    try:
        from distributed import default_client
    except ImportError:
        return None
    try:
        return default_client()
    except ValueError:
        return None


@contextlib.contextmanager
def connected(address: str | None, timeout: float = 10.0) -> Iterator[Any | None]:
    """Run the chunked analysis on the cluster at ``address`` inside the block (nothing to do for None).

    Only the client is closed at the end; the cluster keeps running.

    Raises
    ------
    ParameterError
        If no scheduler answers at ``address`` within ``timeout`` seconds.
    """
    if address is None:
        yield None
        return
    try:
        from distributed import Client
    except ImportError as exc:  # pragma: no cover - a declared dependency
        raise ParameterError("--scheduler needs the distributed package (pip install distributed)") from exc
    try:
        client = Client(address, timeout=timeout, set_as_default=True)
    except (OSError, TimeoutError) as exc:
        raise ParameterError(f"no dask scheduler answered at {address!r} ({exc})") from exc
    try:
        yield client
    finally:
        client.close()
