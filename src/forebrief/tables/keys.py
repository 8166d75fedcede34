"""Fast integer keys for row groups (vectorised, no Python loop per row)."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

# mixed-radix keys stay below this bound, so that key * radix + code never overflows int64
_KEY_LIMIT = 2**62


def group_codes(columns: Sequence[pd.Series | np.ndarray]) -> tuple[np.ndarray, int]:
    """Integer code per row identifying the combination of ``columns``; returns (codes, n_groups).

    Codes number the combinations in order of first appearance (as ``pd.factorize`` does), so
    any columns that split the rows the same way give the same codes; integer codes of text
    columns may stand in for the text. Each column is factorised once and the codes are
    combined as a mixed-radix number, refactorised only when the next product could pass
    2**62 (it then drops to at most n_rows), so int64 never overflows. NaN forms its own
    group. O(rows x columns).
    """
    if not columns:
        raise ValueError("group_codes needs at least one column")
    key: np.ndarray | None = None
    bound = 0  # every key value is < bound
    n = 0
    for col in columns:
        codes, uniques = pd.factorize(col, use_na_sentinel=False)
        codes = codes.astype(np.int64, copy=False)
        radix = max(len(uniques), 1)
        if key is None:
            key, bound, n = codes, radix, len(uniques)
            continue
        if bound * radix >= _KEY_LIMIT:
            key, uniq = pd.factorize(key)
            key = key.astype(np.int64, copy=False)
            bound = max(len(uniq), 1)
        key = key * radix + codes
        bound *= radix
        n = -1  # the number of groups is known only after the final factorisation
    assert key is not None
    if n < 0:
        key, uniq = pd.factorize(key)
        key = key.astype(np.int64, copy=False)
        n = len(uniq)
    return key, n
