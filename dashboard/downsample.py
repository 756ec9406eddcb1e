"""Which rows of a long window to draw: server-side downsampling with tsdownsample.

Owns the choice of row indices for one view. MinMax keeps the lowest and
highest row of each column in every time bin, so a peak (the worst
disagreement, a long loop) is never dropped; the union over a view's columns
keeps every column's peaks.
Pure numpy in, indices out.
"""

from __future__ import annotations

import numpy as np
from tsdownsample import NaNMinMaxDownsampler

_MIN_OUT = 4  # two bins of a min and a max each


def pick_rows(t: np.ndarray, columns: list[np.ndarray], n_out: int) -> np.ndarray:
    """Sorted row indices, at most about ``n_out``, of rows at times ``t`` (non-decreasing).

    Every row when there are no more than ``n_out``; otherwise each column
    gets an equal share of ``n_out`` and the picks are merged.
    """
    n = len(t)
    if n <= n_out:
        return np.arange(n)
    share = max(_MIN_OUT, n_out // max(len(columns), 1) // 2 * 2)  # MinMax takes an even count
    t = np.ascontiguousarray(t, dtype=float)
    picks = [
        NaNMinMaxDownsampler().downsample(t, np.ascontiguousarray(col, dtype=float), n_out=share).astype(np.int64)
        for col in columns
    ]
    return np.unique(np.concatenate(picks))
