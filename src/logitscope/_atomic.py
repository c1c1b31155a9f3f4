"""Atomic file writes: a reader sees the old file or the new one, never half of one."""

from __future__ import annotations

import contextlib
import os
import re
import stat
import tempfile
from collections.abc import Iterator
from pathlib import Path
from typing import IO


@contextlib.contextmanager
def atomic_write(path: str | os.PathLike[str], mode: str = "wb") -> Iterator[IO]:
    """Open a temporary file beside ``path``; on success fsync it and rename it over ``path``.

    If the block raises, the temporary file is removed and ``path`` is untouched.
    The new file keeps the permissions of the file it replaces, or gets those of
    a normally created file (``0o666`` less the umask); the temporary file
    itself starts private.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "list.txt"
    >>> with atomic_write(p, "w") as fh:
    ...     _ = fh.write("kept")
    >>> p.read_text()
    'kept'
    """
    target = Path(path)
    target.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=_temp_prefix(target), suffix=_TEMP_SUFFIX, dir=target.parent)
    try:
        _match_mode(fd, target)
        encoding = None if "b" in mode else "utf-8"
        with os.fdopen(fd, mode, encoding=encoding) as fh:
            yield fh
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, target)
        with contextlib.suppress(OSError):  # make the rename durable where the platform allows
            dfd = os.open(target.parent, os.O_RDONLY)
            try:
                os.fsync(dfd)
            finally:
                os.close(dfd)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


_TEMP_SUFFIX = ".tmp"


def _temp_prefix(target: Path) -> str:
    return f".{target.name}."


def leftover_temp_files(path: str | os.PathLike[str]) -> list[Path]:
    """Temporary files that :func:`atomic_write` made for ``path`` and never renamed or removed.

    Only a writer killed between creating its temporary file and renaming it
    (``kill -9``, a power cut) leaves one. The names are matched exactly
    (``.<name>.<random>.tmp`` beside ``path``; symbolic links and folders are
    never listed). Whether a file is stale is for the caller to know: one that a
    live writer is filling right now has the same name pattern.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (folder / ".marks.json.k3x9_q2a.tmp").write_text("{")
    >>> _ = (folder / ".other.json.k3x9_q2a.tmp").write_text("{")
    >>> [p.name for p in leftover_temp_files(folder / "marks.json")]
    ['.marks.json.k3x9_q2a.tmp']
    """
    target = Path(path)
    # tempfile.mkstemp fills the middle with letters, digits and "_" (never a dot)
    pattern = re.compile(re.escape(_temp_prefix(target)) + r"[A-Za-z0-9_]+" + re.escape(_TEMP_SUFFIX))
    try:
        entries = list(os.scandir(target.parent))
    except OSError:
        return []
    found = []
    for entry in entries:
        try:
            regular = entry.is_file(follow_symlinks=False)
        except OSError:
            continue
        if regular and pattern.fullmatch(entry.name):
            found.append(Path(entry.path))
    return sorted(found)


def _match_mode(fd: int, target: Path) -> None:
    if not hasattr(os, "fchmod"):  # pragma: no cover - Windows
        return
    try:
        mode = stat.S_IMODE(target.stat().st_mode)
    except FileNotFoundError:
        mask = os.umask(0)
        os.umask(mask)
        mode = 0o666 & ~mask
    os.fchmod(fd, mode)
