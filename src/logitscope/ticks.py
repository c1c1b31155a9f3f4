"""Round tick positions for plots, shared by the widgets and the report."""

from __future__ import annotations

import math

__all__ = ["nice_ticks"]


def nice_ticks(lo: float, hi: float, n: int = 5, log: bool = False) -> list[float]:
    """Round tick positions covering ``[lo, hi]`` (1-2-5 steps; powers and 2, 5 multiples on a log axis).

    Examples
    --------
    >>> nice_ticks(0, 1)
    [0.0, 0.2, 0.4, 0.6, 0.8, 1.0]
    >>> nice_ticks(0.25, 4, log=True)
    [0.25, 0.5, 1.0, 2.0, 4.0]
    """
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return [lo]
    if log:
        e0, e1 = math.floor(math.log10(lo)), math.ceil(math.log10(hi))
        ticks = [
            m * 10.0**e
            for e in range(e0, e1 + 1)
            for m in (1.0, 2.0, 5.0)
            if lo * (1 - 1e-9) <= m * 10.0**e <= hi * (1 + 1e-9)
        ]
        if len(ticks) > 7:  # wide range: powers of ten only
            ticks = [t for t in ticks if math.isclose(math.log10(t), round(math.log10(t)))]
        if len(ticks) < 4:  # narrow range: add the ends, rounded, where they are not crowded
            for end in (float(f"{lo:.2g}"), float(f"{hi:.2g}")):
                if lo * (1 - 1e-9) <= end <= hi * (1 + 1e-9) and all(max(end / t, t / end) > 1.3 for t in ticks):
                    ticks.append(end)
            ticks.sort()
        return ticks
    raw = (hi - lo) / max(1, n)
    mag = 10.0 ** math.floor(math.log10(raw))
    step = next(s * mag for s in (1.0, 2.0, 2.5, 5.0, 10.0) if s * mag >= raw)
    first = math.ceil(lo / step - 1e-9) * step
    out = []
    k = 0
    while first + k * step <= hi + step * 1e-9:
        out.append(round(first + k * step, 12))
        k += 1
    return out
