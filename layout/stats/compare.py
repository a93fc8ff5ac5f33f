"""Treatment means with standard errors from the experimental error, and Tukey's HSD between them.

Tukey's honestly significant difference uses the studentized range (scipy.stats.studentized_range)
with the experimental error's mean square and df, never the sampling error's.
"""

from __future__ import annotations

from itertools import combinations
from typing import Any

import numpy as np
from scipy import optimize, special, stats

LARGE_DF = 10_000


def means_and_pairs(
    groups: dict[str, list[float]], ms_error: float, df_error: int, per_mean: float, alpha: float = 0.05
) -> dict[str, Any]:
    """Means of groups of unit means, SE = √(MS error / observations per mean), and every pair by Tukey's HSD.

    per_mean is how many observations (units × subsamples) each mean rests on.
    """
    means = {k: float(np.mean(v)) for k, v in groups.items()}
    se = float(np.sqrt(ms_error / per_mean)) if ms_error > 0 else 0.0
    k = len(means)
    pairs = []
    if k >= 2 and df_error > 0 and se > 0:
        # From 10,000 error df on, the distribution at infinite df (one integral, not two): p moves by less
        # than 3e-4 for up to 20 means (measured against scipy at df = 10,000).
        both = list(combinations(means, 2))
        q = np.array([abs(means[a] - means[b]) / se for a, b in both])
        if df_error >= LARGE_DF:
            q_crit, p_values = range_ppf_inf(1 - alpha, k), range_sf_inf(q, k)
        else:
            q_crit = float(stats.studentized_range.ppf(1 - alpha, k, df_error))
            p_values = stats.studentized_range.sf(q, k, df_error) if len(q) else []
        for (a, b), p in zip(both, p_values, strict=True):
            diff = means[a] - means[b]
            pairs.append({"a": a, "b": b, "difference": diff, "p": float(p), "significant": bool(p < alpha)})
        hsd = q_crit * se
    else:
        hsd = None
    return {
        "means": [
            {"level": key, "mean": m, "se": se, "df": df_error, "units": len(groups[key])} for key, m in means.items()
        ],
        "tukey": {"alpha": alpha, "hsd": hsd, "pairs": pairs},
    }


# Beyond ±9 the standard normal's density is below 1e-17. The trapezoid rule converges faster than any power
# of the step for this smooth, fast-vanishing integrand: 181 points already agree with scipy to 1e-14.
_Z = np.linspace(-9.0, 9.0, 241)
_PHI = np.exp(-_Z * _Z / 2) / np.sqrt(2 * np.pi)
_CDF = special.ndtr(_Z)


def range_cdf_inf(q: np.ndarray, k: int) -> np.ndarray:
    """P(R ≤ q) for the range R of k standard normals (the studentized range at infinite df).

    P = k ∫ φ(z) [Φ(z) − Φ(z − q)]^(k−1) dz, by the trapezoid rule on a fine grid, which for this
    smooth, fast-vanishing integrand is exact to about 1e-14 (checked against scipy in the tests);
    one array operation for all q, where scipy integrates each q on its own.
    """
    q = np.atleast_1d(np.asarray(q, dtype=float))
    inner = _CDF[None, :] - special.ndtr(_Z[None, :] - q[:, None])
    return np.clip(k * np.trapezoid(_PHI * inner ** (k - 1), _Z, axis=1), 0.0, 1.0)


def range_sf_inf(q: np.ndarray, k: int) -> np.ndarray:
    """P(R > q) at infinite df."""
    return 1.0 - range_cdf_inf(q, k)


def range_ppf_inf(p: float, k: int) -> float:
    """The q with P(R ≤ q) = p at infinite df, by Brent's method (the cdf rises with q)."""
    high = 1.0
    while range_cdf_inf(high, k)[0] < p:
        high *= 2
    return float(optimize.brentq(lambda q: range_cdf_inf(q, k)[0] - p, 0.0, high, xtol=1e-13, rtol=1e-15))
