"""Variance components from the expected mean squares, with confidence intervals.

σ²(sub) = MS(sampling error), with the exact chi-square interval on its df.
σ²(unit) = (MS(experimental error) − MS(sampling error)) / s; a negative estimate is
reported as 0 with a note. Its interval is approximate: Satterthwaite's degrees of
freedom for a difference of mean squares, then the chi-square interval on those df
(Satterthwaite 1946, Biometrics Bulletin 2: 110-114; the usual textbook method).
"""

from __future__ import annotations

from typing import Any

from scipy import stats

from layout.stats.anova import Table


def _chi2_interval(estimate: float, df: float, level: float) -> tuple[float, float]:
    a = (1 - level) / 2
    return df * estimate / stats.chi2.ppf(1 - a, df), df * estimate / stats.chi2.ppf(a, df)


def components(table: Table, level: float = 0.95) -> dict[str, Any]:
    """{'unit', 'subsample'} estimates, shares, intervals and notes (whole plot too in a split-plot)."""
    s = table.subsamples
    error = table.row("experimental error") or table.row("sub-plot error")
    sampling = table.row("sampling error")
    out: dict[str, Any] = {"level": level, "notes": []}
    if error is None or error.ms is None:
        return out
    if sampling is None or sampling.ms is None:
        out["unit"] = {
            "estimate": error.ms,
            "method": "MS(experimental error); one subsample per unit, so unit and subsample variation cannot be told apart",
        }
        return out
    sub = sampling.ms
    lo, hi = _chi2_interval(sub, sampling.df, level)
    out["subsample"] = {
        "estimate": sub,
        "df": sampling.df,
        "ci": [lo, hi],
        "method": "chi-square on the sampling error's df",
    }
    raw = (error.ms - sub) / s
    unit = max(raw, 0.0)
    if raw < 0:
        out["notes"].append(
            f"σ²(unit) estimated as {raw:.4g}, below zero: reported as 0 (units differ no more than their subsamples)"
        )
    denom = (error.ms / s) ** 2 / error.df + (sub / s) ** 2 / sampling.df
    df = raw**2 / denom if raw > 0 and denom > 0 else 0.0
    ci = list(_chi2_interval(unit, df, level)) if df > 0 else [0.0, None]
    out["unit"] = {
        "estimate": unit,
        "df": df,
        "ci": ci,
        "method": "(MS experimental error − MS sampling error) / s; interval by Satterthwaite's approximate df",
    }
    whole = table.row("whole-plot error")
    if whole is not None and whole.ms is not None:
        per_plot = table.units // max(1, whole.df + 1)
        est = (whole.ms - error.ms) / max(1, s * per_plot)
        out["whole_plot"] = {
            "estimate": max(est, 0.0),
            "method": "(MS whole-plot error − MS sub-plot error) / (s·units per whole plot)",
        }
    total = unit + sub
    if total > 0:
        out["unit"]["share"] = unit / total
        out["subsample"]["share"] = sub / total
    return out
