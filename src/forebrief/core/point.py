"""Point errors of the predictive median.

Pure numerical core: numpy arrays in, numpy arrays out. The absolute error of the median is
the consistent point score for a median forecast (Gneiting 2011, *JASA* 106:746-762; from
memory); the sign convention of the bias is ours.
"""

from __future__ import annotations

import numpy as np

__all__ = ["absolute_error", "sign_bias"]


def absolute_error(median: np.ndarray, observed: np.ndarray) -> np.ndarray:
    """Absolute error |m - y| of the predictive median (Gneiting 2011, JASA; from memory).

    Elementwise over arrays of equal (or broadcastable) shape; nan propagates. Cost: O(n).
    """
    return np.abs(np.asarray(median, dtype=float) - np.asarray(observed, dtype=float))


def sign_bias(median: np.ndarray, observed: np.ndarray) -> np.ndarray:
    """Sign of the median's error, sign(m - y): +1 too high, -1 too low, 0 exact.

    Common practice, no source. Averaged over items it gives the share of forecasts that were
    too high minus the share that were too low. Elementwise; nan propagates. Cost: O(n).
    """
    return np.sign(np.asarray(median, dtype=float) - np.asarray(observed, dtype=float))
