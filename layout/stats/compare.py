"""Treatment means with standard errors from the experimental error, and Tukey's HSD between them.

Tukey's honestly significant difference uses the studentized range (scipy.stats.studentized_range)
with the experimental error's mean square and df, never the sampling error's.
"""

from __future__ import annotations

from itertools import combinations
from typing import Any

import numpy as np
from scipy import stats

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
        # From 10,000 error df on, the distribution at infinite df (one integral, not two; a hundred times
        # faster): p moves by less than 3e-4 for up to 20 means (measured against scipy at df = 10,000).
        df = np.inf if df_error >= LARGE_DF else df_error
        q_crit = float(stats.studentized_range.ppf(1 - alpha, k, df))
        both = list(combinations(means, 2))
        q = np.array([abs(means[a] - means[b]) / se for a, b in both])
        p_values = stats.studentized_range.sf(q, k, df) if len(q) else []
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
