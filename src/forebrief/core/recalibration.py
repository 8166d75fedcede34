"""The beta-transformed linear pool: a recalibration of the equal-weight pool (pure numpy/scipy).

Ranjan & Gneiting (2010, JRSS B 72:71; probabilities of binary events) and Gneiting & Ranjan
(2013, Electron. J. Statist. 7:1747; predictive distributions) recalibrate a linear pool F_pool
by composing it with a Beta(a, b) CDF B_ab (the beta-transformed linear pool):

    F(y) = B_ab(F_pool(y)),   so the quantile at level tau is F_pool^-1(B_ab^-1(tau)).

With the pool fixed, the log-likelihood of the past observations y_i in (a, b) is
sum_i log beta.pdf(u_i; a, b) + const with u_i = F_pool(y_i) the pool's PIT values (the density of
F is b_ab(F_pool(y)) f_pool(y), and the second factor does not depend on (a, b)). So (a, b) is
the maximum-likelihood Beta fit to the PIT values, :func:`fit_beta`; a = b = 1 is no change.
a, b < 1 widen the pool (it was overconfident: PIT values pile up near 0 and 1), a, b > 1 narrow
it, a != b shift it.

The pool's support is bounded ([L*, H*] of :func:`forebrief.core.distributions.support_bounds`), so
the recalibrated quantiles stay inside it: recalibration cannot reach an outcome beyond every
member's range plus the overshoot.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.special import betaincinv, betaln, digamma, polygamma

from forebrief.core.distributions import pool_cdf, support_bounds

__all__ = ["PIT_CLIP", "BetaFit", "beta_levels", "fit_beta", "pool_pit"]

FloatArray = NDArray[np.float64]

#: PIT values are clipped into [PIT_CLIP, 1 - PIT_CLIP]: an observation outside the pool's
#: support gives 0 or 1, where the Beta log-density is infinite.
PIT_CLIP = 1e-6
#: Largest a or b: PIT values that are (nearly) all equal have no finite ML fit; the fit stops
#: on the ray towards it once a parameter reaches this value (``at_bound``).
_MAX_PARAMETER = 1e4


@dataclass(frozen=True)
class BetaFit:
    """A Beta(a, b) maximum-likelihood fit to ``n`` values in (0, 1)."""

    a: float
    b: float
    n: int
    log_likelihood: float  # sum of log beta.pdf(u_i; a, b)
    iterations: int  # Newton steps taken
    at_bound: bool = False  # the likelihood still rose towards a parameter of _MAX_PARAMETER


def _mean_loglik(a: float, b: float, s1: float, s2: float) -> float:
    return (a - 1.0) * s1 + (b - 1.0) * s2 - float(betaln(a, b))


def fit_beta(u: ArrayLike, *, tol: float = 1e-12, max_iter: int = 200) -> BetaFit:
    """Maximum-likelihood Beta(a, b) for values ``u`` strictly inside (0, 1).

    The mean log-likelihood l(a, b) = (a - 1) mean(ln u) + (b - 1) mean(ln(1 - u)) - ln B(a, b)
    has gradient (mean ln u - psi(a) + psi(a + b), mean ln(1 - u) - psi(b) + psi(a + b)) and
    Hessian [[psi'(a+b) - psi'(a), psi'(a+b)], [psi'(a+b), psi'(a+b) - psi'(b)]], negative
    definite (the Beta family is exponential in (a - 1, b - 1)), so l is strictly concave and
    Newton's method with step halving (keeping a, b > 0 and l non-decreasing) converges to the
    unique maximum from the method-of-moments start. This is the fit
    ``scipy.stats.beta.fit(u, floc=0, fscale=1)`` gives (the tests check it). Stops when the largest
    gradient entry is below ``tol``. Cost O(n) once for the sufficient statistics, then
    O(iterations), typically < 10.

    Values outside (0, 1) raise ``ValueError`` (clip PIT values with :data:`PIT_CLIP` first);
    fewer than two distinct values have no finite maximum, and the fit then stops at the bound
    (``at_bound``).
    """
    x = np.asarray(u, dtype=float).ravel()
    if x.size < 2:
        raise ValueError(f"a Beta fit needs at least 2 values; got {x.size}")
    if not (np.all(np.isfinite(x)) and np.all(x > 0.0) and np.all(x < 1.0)):
        bad = x[~(np.isfinite(x) & (x > 0.0) & (x < 1.0))][0]
        raise ValueError(
            f"Beta fit values must lie strictly inside (0, 1); got {bad}. Clip PIT values "
            f"into [{PIT_CLIP}, 1 - {PIT_CLIP}] first."
        )
    s1 = float(np.mean(np.log(x)))
    s2 = float(np.mean(np.log1p(-x)))
    m = float(np.mean(x))
    v = float(np.var(x))
    c = m * (1.0 - m) / v - 1.0 if v > 0.0 else np.inf
    if np.isfinite(c) and c > 0.0:
        a, b = float(np.clip(m * c, 1e-3, 1e3)), float(np.clip((1.0 - m) * c, 1e-3, 1e3))
    else:
        a, b = 1.0, 1.0
    ll = _mean_loglik(a, b, s1, s2)
    at_bound = False
    steps = 0
    while steps < max_iter:
        pab = float(digamma(a + b))
        g = np.array([s1 - float(digamma(a)) + pab, s2 - float(digamma(b)) + pab])
        if np.max(np.abs(g)) < tol:
            break
        t_ab = float(polygamma(1, a + b))
        h = np.array([[t_ab - float(polygamma(1, a)), t_ab], [t_ab, t_ab - float(polygamma(1, b))]])
        step = -np.linalg.solve(h, g)
        t = 1.0
        for _ in range(60):
            na, nb = a + t * step[0], b + t * step[1]
            if na > 0.0 and nb > 0.0:
                nll = _mean_loglik(na, nb, s1, s2)
                if nll >= ll - 1e-15 * max(1.0, abs(ll)):
                    break
            t *= 0.5
        else:
            break  # no step improves l: at the maximum to rounding
        a, b, ll = na, nb, nll
        steps += 1
        if max(a, b) >= _MAX_PARAMETER:
            scale = _MAX_PARAMETER / max(a, b)
            a, b, at_bound = a * scale, b * scale, True
            ll = _mean_loglik(a, b, s1, s2)
            break
    return BetaFit(float(a), float(b), int(x.size), float(ll * x.size), steps, at_bound)


def beta_levels(levels: ArrayLike, a: float, b: float) -> FloatArray:
    """B_ab^-1(tau) for each level: the pool levels whose quantiles the recalibrated pool gives.

    The inverse of the regularised incomplete beta function (``scipy.special.betaincinv``):
    the recalibrated pool's quantile at tau is F_pool^-1(B_ab^-1(tau)) (Gneiting & Ranjan
    2013). a = b = 1 returns the levels unchanged (exactly). O(k).
    """
    tau = np.asarray(levels, dtype=float)
    if a == 1.0 and b == 1.0:
        return tau.copy()
    if not (a > 0.0 and b > 0.0 and np.isfinite(a) and np.isfinite(b)):
        raise ValueError(f"Beta parameters must be finite and positive; got a={a}, b={b}")
    return np.asarray(betaincinv(a, b, tau), dtype=float)


def pool_pit(
    quantiles: ArrayLike,
    levels: ArrayLike,
    observed: ArrayLike,
    *,
    overshoot: float,
    clip: float = PIT_CLIP,
) -> FloatArray:
    """PIT values u_i = F_pool(y_i) of the equal-weight linear pool, clipped into [clip, 1-clip].

    ``quantiles`` (n, m, k) with all-NaN rows for absent members, ``observed`` (n,). The pool is
    the one :func:`forebrief.tables.ensemble.build_ensemble` forms: equal weights over the members
    present, support [L*, H*] from :func:`forebrief.core.distributions.support_bounds` with
    ``overshoot`` on the members' quantiles (not the observation), CDF from
    :func:`forebrief.core.distributions.pool_cdf` (Cooke 1991 ch. 12). Items without members, and
    degenerate items (every quantile equal, L* = H*: a step CDF, no PIT to speak of, as the
    Classical Model leaves such items out), give NaN. O(n m k log k).
    """
    q = np.asarray(quantiles, dtype=float)
    y = np.asarray(observed, dtype=float)
    if q.ndim != 3 or y.shape != (q.shape[0],):
        raise ValueError(
            f"quantiles must be (items, members, levels) and observed (items,); got {q.shape} "
            f"and {y.shape}"
        )
    present = ~np.isnan(q).all(axis=2)
    lower, upper = support_bounds(q, overshoot=overshoot)
    has = present.any(axis=1)
    has[has] = upper[has] > lower[has]
    u = np.full(q.shape[0], np.nan)
    if has.any():
        f = pool_cdf(
            y[has, None], q[has], levels, present[has].astype(float), lower[has], upper[has]
        )
        u[has] = f[:, 0]
    return np.where(np.isnan(u), np.nan, np.clip(u, clip, 1.0 - clip))
