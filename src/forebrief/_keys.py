"""Fast integer keys for row groups (vectorised, no Python loop per row)."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd


def group_codes(columns: Sequence[pd.Series | np.ndarray]) -> tuple[np.ndarray, int]:
    """Integer code per row identifying the combination of ``columns``; returns (codes, n_groups).

    Combines factorised columns pairwise and refactorises after each step, so the intermediate
    product never exceeds n_rows * n_unique and cannot overflow int64. NaN forms its own group.
    O(rows x columns).
    """
    if not columns:
        raise ValueError("group_codes needs at least one column")
    key: np.ndarray | None = None
    n = 0
    for col in columns:
        codes, uniques = pd.factorize(col, use_na_sentinel=False)
        codes = codes.astype(np.int64)
        if key is None:
            key, n = codes, len(uniques)
        else:
            combined = key * max(len(uniques), 1) + codes
            key, uniq = pd.factorize(combined)
            key = key.astype(np.int64)
            n = len(uniq)
    assert key is not None
    return key, n
