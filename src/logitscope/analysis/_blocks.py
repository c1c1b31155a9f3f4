"""Row-block iteration shared by the numpy code paths.

Working on blocks of a few thousand rows keeps every temporary in cache and
bounds the extra memory to a block, whatever the number of rows.
"""

from __future__ import annotations

from collections.abc import Iterator

import numpy as np

#: Rows per block: 4096 rows x 100 classes x 8 bytes = 3.2 MB, about an L2/L3 slice.
BLOCK_ROWS = 4096


def block_slices(n_rows: int, n_cols: int, budget: int = BLOCK_ROWS * 128) -> Iterator[slice]:
    """Yield row slices whose blocks hold about ``budget`` elements.

    Examples
    --------
    >>> [(s.start, s.stop) for s in block_slices(10, 2, budget=8)]
    [(0, 4), (4, 8), (8, 10)]
    """
    rows = max(1, budget // max(1, n_cols))
    for start in range(0, n_rows, rows):
        yield slice(start, min(n_rows, start + rows))


def as_float64_block(z: np.ndarray, rows: slice, beta: float) -> np.ndarray:
    """Return ``beta * z[rows]`` as a new float64 array (the block's own copy)."""
    block = np.array(z[rows], dtype=np.float64, copy=True)
    if beta != 1.0:
        block *= beta
    return block
