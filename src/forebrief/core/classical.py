"""Cooke's Classical Model: calibration, information and performance weights.

Pure numerical core: numpy arrays in, numpy arrays out, no tables and no files. A "model"
plays the part of Cooke's "expert" and an "item" is one forecast target with an observed
value. Sources: Cooke (1991), *Experts in Uncertainty*, OUP, ch. 12; Cooke & Goossens (2008),
*Reliab. Eng. Syst. Saf.* 93:657-674; Cooke & Slijkhuis (2003), in Blischke & Murthy (eds.),
*Case Studies in Reliability and Maintenance*, Wiley, section 15.3.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.special import chdtrc, rel_entr

from forebrief.errors import ConfigError

__all__ = [
    "Weights",
    "bin_counts",
    "bin_index",
    "calibration_score",
    "information_score",
    "intrinsic_range",
    "performance_weights",
    "relative_entropy",
]


def _check_probabilities(probabilities: np.ndarray) -> None:
    if probabilities.ndim != 1 or probabilities.size < 2:
        raise ConfigError(
            f"bin probabilities must be a 1-d array of at least 2 values; got shape "
            f"{probabilities.shape}. Build them with forebrief.tables.schema.cm_probabilities(levels)."
        )
    if not np.all(np.isfinite(probabilities)) or np.any(probabilities <= 0):
        bad = probabilities[~(np.isfinite(probabilities) & (probabilities > 0))][0]
        raise ConfigError(
            f"bin probabilities must all be > 0; got {bad!r}. Use strictly increasing "
            "quantile levels inside (0, 1)."
        )
    if abs(float(probabilities.sum()) - 1.0) > 1e-9:
        raise ConfigError(
            f"bin probabilities must sum to 1; they sum to {float(probabilities.sum())!r}. "
            "Build them with forebrief.tables.schema.cm_probabilities(levels)."
        )


def _check_fraction(name: str, value: float, *, low_open: bool, fix: str) -> float:
    """Check an option that must lie in (0, 1] (low_open) or [0, 1]; return it as float."""
    ok = (
        isinstance(value, int | float | np.floating | np.integer)
        and not isinstance(value, bool)
        and math.isfinite(float(value))
        and (float(value) > 0.0 if low_open else float(value) >= 0.0)
        and float(value) <= 1.0
    )
    if not ok:
        interval = "(0, 1]" if low_open else "[0, 1]"
        raise ConfigError(f"{name} must be a number in {interval}; got {value!r}. {fix}")
    return float(value)


def bin_index(quantiles: np.ndarray, observed: np.ndarray) -> np.ndarray:
    """Interquantile bin of each observation (Cooke 1991, ch. 12, bin definitions).

    With quantiles q_1 <= ... <= q_{R-1} the bins are B_1 = (-inf, q_1], B_j = (q_{j-1}, q_j],
    B_R = (q_{R-1}, inf). The bin is returned 0-based as the number of quantiles strictly
    below the observation, so a value equal to a quantile goes in the lower bin (right-closed
    bins; with integer counts ties are common). Tied quantiles are allowed.

    Parameters: ``quantiles`` shape (n, R-1), non-decreasing along the last axis;
    ``observed`` shape (n,). Returns int64 of shape (n,) with values 0..R-1.
    Raises ValueError on a shape mismatch or a missing (nan) value, since nan has no bin.
    Cost: O(n x R) time and memory.
    """
    q = np.asarray(quantiles, dtype=float)
    y = np.asarray(observed, dtype=float)
    if q.ndim != 2 or y.shape != q.shape[:1]:
        raise ValueError(
            f"bin_index needs quantiles of shape (n, R-1) and observed of shape (n,); got "
            f"{q.shape} and {y.shape}"
        )
    missing = np.isnan(y) | np.isnan(q).any(axis=1)
    if missing.any():
        first = int(np.flatnonzero(missing)[0])
        raise ValueError(
            f"bin_index got {int(missing.sum())} item(s) with a missing value (first at "
            f"position {first}); drop items without an observation or a full quantile set first"
        )
    return np.count_nonzero(q < y[:, None], axis=1).astype(np.int64)


def bin_counts(
    bins: np.ndarray,
    *,
    n_bins: int,
    groups: np.ndarray | None = None,
    n_groups: int | None = None,
) -> np.ndarray:
    """Number of observations in each interquantile bin, overall or per group.

    ``bins`` are 0-based bin indices from :func:`bin_index`. Without ``groups`` the result
    has shape (n_bins,). With integer group codes 0..n_groups-1 (for instance one code per
    model) the result has shape (n_groups, n_bins); ``n_groups`` defaults to max code + 1.
    These counts n_j give Cooke's empirical distribution s_j = n_j / N (Cooke 1991, ch. 12).
    Cost: O(n + n_groups x n_bins) with one ``np.bincount``.
    """
    b = np.asarray(bins)
    if b.ndim != 1 or (b.size and not np.issubdtype(b.dtype, np.integer)):
        raise ValueError(f"bins must be a 1-d integer array; got shape {b.shape}, dtype {b.dtype}")
    b = b.astype(np.int64)
    if b.size and (b.min() < 0 or b.max() >= n_bins):
        bad = b[(b < 0) | (b >= n_bins)][0]
        raise ValueError(f"bin index {int(bad)} is outside 0..{n_bins - 1}")
    if groups is None:
        return np.bincount(b, minlength=n_bins).astype(np.int64)
    g = np.asarray(groups)
    if g.shape != b.shape or (g.size and not np.issubdtype(g.dtype, np.integer)):
        raise ValueError(f"groups must be integer codes of shape {b.shape}; got {g.shape}")
    g = g.astype(np.int64)
    if n_groups is None:
        n_groups = int(g.max()) + 1 if g.size else 0
    if g.size and (g.min() < 0 or g.max() >= n_groups):
        bad = g[(g < 0) | (g >= n_groups)][0]
        raise ValueError(f"group code {int(bad)} is outside 0..{n_groups - 1}")
    flat = np.bincount(g * n_bins + b, minlength=n_groups * n_bins)
    return flat.reshape(n_groups, n_bins).astype(np.int64)


def relative_entropy(bin_counts: np.ndarray, probabilities: np.ndarray) -> np.ndarray:
    """Relative entropy I(s, p) = sum_j s_j ln(s_j / p_j) of the empirical bin shares.

    Cooke (1991), ch. 12: s_j = n_j / N, with 0 ln 0 = 0 (``scipy.special.rel_entr``).
    ``bin_counts`` has shape (..., R) (integer or effective counts), ``probabilities`` (R,).
    Returns shape (...); rows with N = 0 give nan. Cost: O(size of bin_counts).
    """
    counts = np.asarray(bin_counts, dtype=float)
    p = np.asarray(probabilities, dtype=float)
    _check_probabilities(p)
    if counts.shape[-1:] != p.shape:
        raise ValueError(
            f"bin_counts has {counts.shape[-1:]} bins on its last axis but there are "
            f"{p.size} bin probabilities"
        )
    total = counts.sum(axis=-1, keepdims=True)
    shares = np.divide(counts, total, out=np.zeros_like(counts), where=total > 0)
    info = rel_entr(shares, p).sum(axis=-1)
    return np.where(total[..., 0] > 0, info, np.nan)


def calibration_score(
    bin_counts: np.ndarray, probabilities: np.ndarray, *, power: float = 1.0
) -> np.ndarray:
    """Calibration (statistical accuracy) C = 1 - F_chi2(R-1)(2 N' I(s, p)).

    Cooke (1991), ch. 12; Cooke & Goossens (2008). 2 N I(s, p) is the likelihood-ratio (G)
    statistic of a multinomial goodness-of-fit test, so the chi-squared law with R - 1
    degrees of freedom holds only asymptotically. ``power`` c in (0, 1] replaces N by an
    effective N' = c N (the "calibration power"), which tempers the evidence from positively
    correlated items. Vectorised over the leading axes of ``bin_counts`` (shape (..., R));
    rows with N = 0 give nan. Raises ConfigError for a power outside (0, 1].
    Cost: O(size of bin_counts).
    """
    c = _check_fraction(
        "calibration power",
        power,
        low_open=True,
        fix="Use 1.0 to count every item, or a smaller share for correlated items.",
    )
    counts = np.asarray(bin_counts, dtype=float)
    info = relative_entropy(counts, probabilities)
    n = counts.sum(axis=-1)
    statistic = 2.0 * n * c * info
    # chdtrc(df, x) is the chi-square survival function, chi2.sf(x, df), without the cost of
    # importing scipy.stats
    return np.asarray(chdtrc(counts.shape[-1] - 1, statistic), dtype=float)


def intrinsic_range(
    lowest: np.ndarray, highest: np.ndarray, *, overshoot: float = 0.1
) -> tuple[np.ndarray, np.ndarray]:
    """Intrinsic range L* = L - k(H - L), H* = H + k(H - L) per item.

    Cooke & Slijkhuis (2003), section 15.3.2 (default overshoot k = 10 %). ``lowest`` and
    ``highest`` are the smallest and largest of all models' quantiles and the observation on
    each item; the range therefore depends on the panel of models. Cost: O(n).
    """
    if (
        isinstance(overshoot, bool)
        or not isinstance(overshoot, int | float | np.floating | np.integer)
        or not math.isfinite(float(overshoot))
        or float(overshoot) < 0
    ):
        raise ConfigError(
            f"overshoot must be a finite number >= 0; got {overshoot!r}. The usual value is 0.1."
        )
    lo = np.asarray(lowest, dtype=float)
    hi = np.asarray(highest, dtype=float)
    spread = float(overshoot) * (hi - lo)
    return lo - spread, hi + spread


def information_score(
    quantiles: np.ndarray,
    lower: np.ndarray,
    upper: np.ndarray,
    probabilities: np.ndarray,
    *,
    floor: float = 1e-3,
) -> np.ndarray:
    """Information of each forecast relative to a uniform background on [lower, upper].

    Cooke (1991), ch. 12; Cooke & Slijkhuis (2003), section 15.3.2: the minimum-information
    density that matches the quantiles is uniform inside each bin, with mass p_j, so
    I_i = sum_j p_j ln(p_j / w_j), where w_j = (x_j - x_{j-1}) / (upper - lower) is the
    relative width of bin j with edges x_0 = lower, x_1..x_{R-1} = quantiles, x_R = upper.
    For a log-uniform background transform every input with ``np.log`` (or ``np.log1p``)
    first; this function does not care which background it is given.

    Relative widths are floored at ``floor`` so that tied quantiles (width 0) stay finite;
    a quantile outside [lower, upper] also gets the floor. Items with upper <= lower (or a
    missing value) give nan; the caller counts and skips them. With no bin floored the score
    is a Kullback-Leibler divergence and so >= 0 (Gibbs' inequality).

    Shapes: ``quantiles`` (n, R-1), ``lower`` and ``upper`` (n,), ``probabilities`` (R,).
    Returns (n,). Cost: O(n x R).
    """
    if (
        isinstance(floor, bool)
        or not isinstance(floor, int | float | np.floating | np.integer)
        or not 0.0 < float(floor) < 1.0
    ):
        raise ConfigError(
            f"information floor must be a number in (0, 1); got {floor!r}. The usual value is 1e-3."
        )
    q = np.asarray(quantiles, dtype=float)
    lo = np.asarray(lower, dtype=float)
    hi = np.asarray(upper, dtype=float)
    p = np.asarray(probabilities, dtype=float)
    _check_probabilities(p)
    if q.ndim != 2 or q.shape[1] + 1 != p.size or lo.shape != q.shape[:1] or hi.shape != lo.shape:
        raise ValueError(
            f"information_score needs quantiles (n, R-1), lower and upper (n,), probabilities "
            f"(R,); got {q.shape}, {lo.shape}, {hi.shape}, {p.shape}"
        )
    edges = np.concatenate((lo[:, None], q, hi[:, None]), axis=1)
    span = hi - lo
    usable = span > 0  # False for nan too
    relative = np.divide(
        np.diff(edges, axis=1),
        span[:, None],
        out=np.full((q.shape[0], p.size), np.nan),
        where=usable[:, None],
    )
    relative = np.maximum(relative, float(floor))  # nan (unusable items) stays nan
    info = np.sum(p * (np.log(p) - np.log(relative)), axis=1)
    return np.where(usable, info, np.nan)


@dataclass(frozen=True, eq=False)
class Weights:
    """Performance weights of a panel of models (Cooke 1991, ch. 12).

    ``weight`` sums to 1 within each group; ``passed`` marks calibration >= alpha;
    ``equal_fallback`` (one entry per group, shape (1,) without groups) marks groups where
    no model passed or all unnormalised weights were 0, whose models got equal weights.
    """

    weight: np.ndarray
    passed: np.ndarray
    equal_fallback: np.ndarray


def performance_weights(
    calibration: np.ndarray,
    information: np.ndarray,
    *,
    alpha: float,
    groups: np.ndarray | None = None,
) -> Weights:
    """Normalised performance weights w_e proportional to C(e) I(e) 1{C(e) >= alpha}.

    Cooke (1991), ch. 12; Cooke & Goossens (2008): with a cutoff alpha > 0 the unnormalised
    weight is an asymptotically strictly proper scoring rule. A nan calibration or
    information counts as not passing. If no model in a group passes, or all its
    unnormalised weights are 0, the group's models get equal weights and ``equal_fallback``
    is set (our design choice, common practice, no source). Groups are
    integer codes 0..G-1 (for instance one per item for item weights); a code with no
    models gets ``equal_fallback`` True. Cost: O(m) with ``np.bincount``.
    """
    a = _check_fraction(
        "significance level alpha",
        alpha,
        low_open=False,
        fix="Use 0 to keep every model, or one of the models' calibration scores.",
    )
    cal = np.asarray(calibration, dtype=float)
    inf = np.asarray(information, dtype=float)
    if cal.ndim != 1 or inf.shape != cal.shape:
        raise ValueError(
            f"calibration and information must be 1-d arrays of equal shape; got {cal.shape} "
            f"and {inf.shape}"
        )
    if groups is None:
        codes = np.zeros(cal.shape, dtype=np.int64)
        n_groups = 1
    else:
        g = np.asarray(groups)
        if g.shape != cal.shape or (g.size and not np.issubdtype(g.dtype, np.integer)):
            raise ValueError(f"groups must be integer codes of shape {cal.shape}; got {g.shape}")
        codes = g.astype(np.int64)
        if codes.size and codes.min() < 0:
            raise ValueError(f"group codes must be >= 0; got {int(codes.min())}")
        n_groups = int(codes.max()) + 1 if codes.size else 0
    finite = np.isfinite(cal) & np.isfinite(inf)
    with np.errstate(invalid="ignore"):
        passed = finite & (cal >= a)
    raw = np.where(passed, np.where(finite, cal * inf, 0.0), 0.0)
    totals = np.bincount(codes, weights=raw, minlength=n_groups)
    sizes = np.bincount(codes, minlength=n_groups)
    fallback = ~(totals > 0)
    weight = np.where(
        fallback[codes],
        np.divide(1.0, sizes[codes], out=np.zeros(cal.shape), where=sizes[codes] > 0),
        np.divide(raw, totals[codes], out=np.zeros(cal.shape), where=totals[codes] > 0),
    )
    return Weights(weight=weight, passed=passed, equal_fallback=fallback)
