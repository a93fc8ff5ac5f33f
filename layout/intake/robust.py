"""Statistical warnings: subsamples far from their unit, and units whose data look swapped.

outlier-subsample
    For each unit, round and numeric response with at least 3 subsample values, the score
    of a value is |x − median(unit)| / S, where S is a pooled robust scale of the
    subsample-to-subsample spread: the median of all absolute differences between two
    subsamples of the same unit, divided by 0.6745·√2 (for normal data a difference of two
    subsamples has standard deviation σ√2, and 0.6745 is the median of |Z|). One wild value
    moves its own unit's median little and the pooled scale hardly at all. A value is
    flagged when its score exceeds OUTLIER_THRESHOLD = 4. By simulation
    (tests/test_robust.py, 32 units × 3 subsamples): about 0.1-0.3% of clean units
    flagged; a value 8 σ off is found nearly always, one 6 σ off about 85% of the time.

possible-swap
    For each numeric response and round, unit means are fitted with the design's additive
    model (treatment, plus block for rcbd and split-plot, plus row and column for a latin
    square). For a pair of units u, v with different treatments, the model is refitted
    without them, giving clean predictions f(u, t) of unit u under treatment t and an
    experimental-error variance s² with its residual degrees of freedom. The pair's score
    is how much the squared residuals of the two units drop when their data are exchanged:
        [(ȳu − f(u, tu))² + (ȳv − f(v, tv))² − (ȳu − f(u, tv))² − (ȳv − f(v, tu))²] / s²
    With a true swap between treatments δ apart the score is about 2(δ/σ)²; with no swap it
    is mostly negative. Both units must fit the other's treatment better, and the two
    treatments must be at least MIN_SEPARATION = 2.5 s apart (closer treatments cannot be
    told apart, and a swap between them changes little). Pairs are formed among the 40
    units with the largest residuals in the full fit, taken best first, each unit once. A
    pair is flagged when its score exceeds SWAP_THRESHOLD = 12. By simulation
    (tests/test_robust.py, crd of 4 treatments × 8 units × 3 subsamples, 200 trials):
    under 1% of clean units flagged, over 90% of swaps found between treatments 4 σ apart.
    Small experiments have more false alarms (with 5 units per treatment about 1.5-2% of
    units) and find fewer swaps (about 85%): the evidence is thinner, not the rule looser.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Final

import numpy as np

from layout.plan import Plan, Unit

OUTLIER_THRESHOLD: Final = 4.0
SWAP_THRESHOLD: Final = 12.0
MIN_SEPARATION: Final = 2.5
_MAX_CANDIDATES: Final = 40
_PAIR_TO_SD: Final = 0.6745 * np.sqrt(2.0)


@dataclass(frozen=True)
class Outlier:
    slot: str
    unit: str
    value: float
    median: float
    score: float


@dataclass(frozen=True)
class Swap:
    first: str
    second: str
    score: float


def pooled_subsample_scale(groups: Sequence[Sequence[float]]) -> float:
    """Robust σ of subsamples within units from all within-unit pairwise differences."""
    diffs = [abs(a - b) for g in groups for i, a in enumerate(g) for b in g[i + 1 :]]
    if not diffs:
        return 0.0
    return float(np.median(diffs)) / _PAIR_TO_SD


def find_outliers(values: dict[str, list[tuple[str, float]]], threshold: float = OUTLIER_THRESHOLD) -> list[Outlier]:
    """Subsample values far from their unit's median, on the pooled robust scale."""
    scale = pooled_subsample_scale([[v for _, v in vs] for vs in values.values()])
    if scale <= 0:
        return []
    found = []
    for unit, vs in values.items():
        if len(vs) < 3:
            continue
        med = float(np.median([v for _, v in vs]))
        for slot, v in vs:
            score = abs(v - med) / scale
            if score > threshold:
                found.append(Outlier(slot, unit, v, med, score))
    return found


def _design_matrix(plan: Plan, units: list[Unit], treatments: list[str]) -> tuple[np.ndarray, int]:
    """Columns: intercept, treatment contrasts, then the design's blocking terms; and where treatments start."""
    cols = [np.ones(len(units))]
    for t in treatments[1:]:
        cols.append(np.array([u.treatment == t for u in units], dtype=float))
    kind = plan.spec.design.type
    terms: list[str] = ["block"] if kind in ("rcbd", "split-plot") else ["row", "col"] if kind == "latin-square" else []
    for term in terms:
        levels = sorted({getattr(u, term) for u in units})
        for lv in levels[1:]:
            cols.append(np.array([getattr(u, term) == lv for u in units], dtype=float))
    return np.column_stack(cols), 1


def find_swaps(plan: Plan, means: dict[str, float], threshold: float = SWAP_THRESHOLD) -> list[Swap]:
    """Pairs of units in different treatments whose data fit each other's treatment far better."""
    units = [u for u in plan.units if u.code in means]
    treatments = sorted({u.treatment for u in units}, key=list(plan.spec.treatments).index)
    if len(treatments) < 2:
        return []
    y = np.array([means[u.code] for u in units])
    x, first = _design_matrix(plan, units, treatments)
    fit = _Fit(x, y)
    if len(units) - fit.rank < 3 or not np.any(np.abs(fit.resid) > 1e-12):
        return []
    order = np.argsort(-np.abs(fit.resid))
    candidates = [int(i) for i in order[:_MAX_CANDIDATES]]
    t_col = {t: (first + k - 1 if k else None) for k, t in enumerate(treatments)}
    scored: list[tuple[float, int, int]] = []
    for a_pos, i in enumerate(candidates):
        for j in candidates[a_pos + 1 :]:
            if units[i].treatment == units[j].treatment:
                continue
            score = fit.pair_score(i, j, t_col[units[i].treatment], t_col[units[j].treatment])
            if score is not None and score > threshold:
                scored.append((score, i, j))
    used: set[int] = set()
    found = []
    for score, i, j in sorted(scored, reverse=True):
        if i in used or j in used:
            continue
        used |= {i, j}
        found.append(Swap(units[i].code, units[j].code, score))
    return found


class _Fit:
    """A least-squares fit of unit means, with the leave-two-out refit by the deletion formulas.

    Without the units S = {i, j}: β₋ = β − (XᵀX)⁻X_Sᵀ(I − H_SS)⁻¹e_S and
    RSS₋ = RSS − e_Sᵀ(I − H_SS)⁻¹e_S, where H_SS is the 2 × 2 block of the hat matrix and e
    the full fit's residuals; this equals refitting without the pair, at a fraction of the cost.
    """

    def __init__(self, x: np.ndarray, y: np.ndarray) -> None:
        self.x, self.y = x, y
        self.inv = np.linalg.pinv(x.T @ x)
        self.rank = int(np.linalg.matrix_rank(x))
        self.beta = self.inv @ (x.T @ y)
        self.resid = y - x @ self.beta
        self.rss = float(self.resid @ self.resid)

    def without(self, i: int, j: int) -> tuple[np.ndarray, float] | None:
        """Coefficients and residual variance of the fit without units i and j, or None when not estimable."""
        xs = self.x[[i, j]]
        m = np.eye(2) - xs @ self.inv @ xs.T
        if abs(np.linalg.det(m)) < 1e-9:
            return None  # without the pair some effect cannot be estimated
        m_inv = np.linalg.inv(m)
        es = self.resid[[i, j]]
        beta = self.beta - self.inv @ xs.T @ (m_inv @ es)
        df = len(self.y) - 2 - self.rank
        s2 = (self.rss - float(es @ m_inv @ es)) / df if df >= 2 else 0.0
        if s2 <= 1e-12 * max(1.0, float(np.var(self.y))):
            return None
        return beta, s2

    def pair_score(self, i: int, j: int, ti: int | None, tj: int | None) -> float | None:
        """The drop in squared residuals, over s², when units i and j exchange treatments."""
        refit = self.without(i, j)
        if refit is None:
            return None
        beta, s2 = refit
        y, x = self.y, self.x

        def predict(row: int, own: int | None, other: int | None) -> float:
            v = x[row].copy()
            if own is not None:
                v[own] = 0.0
            if other is not None:
                v[other] = 1.0
            return float(v @ beta)

        fit_i, fit_j = float(x[i] @ beta), float(x[j] @ beta)
        swap_i, swap_j = predict(i, ti, tj), predict(j, tj, ti)
        if abs(swap_i - fit_i) < MIN_SEPARATION * np.sqrt(s2):
            return None  # treatments this close cannot be told apart, and a swap between them changes little
        if abs(y[i] - swap_i) >= abs(y[i] - fit_i) or abs(y[j] - swap_j) >= abs(y[j] - fit_j):
            return None  # a swap must make both units fit better, not one very much better
        drop = (y[i] - fit_i) ** 2 + (y[j] - fit_j) ** 2 - (y[i] - swap_i) ** 2 - (y[j] - swap_j) ** 2
        return float(drop / s2)
