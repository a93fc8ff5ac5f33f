"""Statistical warnings: subsamples far from their unit, and units whose data look swapped.

Both warnings are controlled per study, as a user meets them: over every round and
numeric response checked, the chance that a clean study gets any outlier-subsample
warning is at most OUTLIER_ALPHA, and any possible-swap warning at most SWAP_ALPHA
(Bonferroni over every value, or every pair of units, tested; 2.5% each, 5% together).

outlier-subsample
    For each unit, round and numeric response with at least 3 subsample values, a value's
    score is z = (x − mean of the unit's other values) / (S·√(1 + 1/(s − 1))), where S is a
    pooled robust scale of the subsample-to-subsample spread: the median of all absolute
    differences between two subsamples of the same unit, divided by 0.6745·√2 (for normal
    data a difference of two subsamples has SD σ√2; 0.6745 is the median of |Z|). Under
    normal data z is close to Student's t with the scale's effective degrees of freedom,
    taken as 0.37 of the within-unit df (the efficiency of a median; from memory, checked
    by the simulation below). Only the largest |z| of a unit can be flagged (a wild value
    also pulls its neighbours' scores), and it is flagged above the t quantile
    1 − OUTLIER_ALPHA / (2N), N the number of values tested in the whole check.

possible-swap
    For each numeric response and round, unit means are fitted with the design's additive
    model (treatment, plus block for rcbd and split-plot, plus row and column for a latin
    square). For a pair of units u, v with different treatments, the model is refitted
    without them, giving clean predictions f(u, t) of unit u under treatment t and an
    experimental-error variance s². The pair's score is how much the squared residuals of
    the two units drop when their data are exchanged:
        [(ȳu − f(u, tu))² + (ȳv − f(v, tv))² − (ȳu − f(u, tv))² − (ȳv − f(v, tu))²] / s²
    With a true swap between treatments δ apart the score is about 2(δ/σ)². With no swap,
    writing d for the difference of the two treatments' fits, the score is
    −2d(ru − rv)/s² − 2d²/s², and its chance of exceeding T is at most that of a normal
    deviate beyond √T (Student's t with the fit's residual df, as s² is estimated), whatever
    d is, once the residuals' own variance σ²(1 + h) is allowed for (h, the mean leverage
    of a prediction from the fit without the pair, is taken as rank / (n − 2)). So with M
    pairs tested in the whole check, T = t⁻¹(1 − SWAP_ALPHA / M)²·(1 + h) bounds the study's
    false-alarm rate. Both units must
    also fit the other's treatment better, and the treatments must be at least
    MIN_SEPARATION = 2.5 s apart. Pairs are formed among the 40 units with the largest
    residuals, best first, each unit once.

Measured (tests/test_robust.py, 500 simulated studies per design, normal unit and
subsample errors; unit means with experimental-error SD 1):
    clean studies with any warning: crd 1.6%, rcbd 2.4%, split-plot 3.4% (4 × 8 units ×
    3 subsamples, two responses; outlier 0.4-1.8%, swap 0.6-2.0%);
    a swap of two units whose treatments are 4 SD apart (crd 4 × 8 × 3): found in 89.8%;
    one subsample 8 subsample-SDs off: found in 94.6%.
"""

from __future__ import annotations

import math
from collections import Counter
from dataclasses import dataclass
from functools import lru_cache
from itertools import combinations
from typing import Final

import numpy as np
from scipy.special import stdtrit  # Student's t quantile; scipy.stats would add 0.3 s to every check

from layout.plan import Plan, Unit

OUTLIER_ALPHA: Final = 0.025
SWAP_ALPHA: Final = 0.025
MIN_SEPARATION: Final = 2.5
_MAX_CANDIDATES: Final = 40
_PAIR_TO_SD: Final = 0.6745 * np.sqrt(2.0)


@dataclass(frozen=True)
class Outlier:
    slot: str
    unit: str
    value: float
    others: float  # mean of the unit's other values
    score: float


@dataclass(frozen=True)
class Swap:
    first: str
    second: str
    score: float


@dataclass
class Grouped:
    """One round and response's values, unit by unit: each unit's values together, in reading order."""

    units: list[str]  # unit codes, in the order first read
    slots: list[str]  # the slot of each value
    values: np.ndarray  # float values, unit after unit
    sizes: np.ndarray  # how many values each unit has

    @classmethod
    def of(cls, values: dict[str, list[tuple[str, float]]]) -> Grouped:
        """From unit → [(slot, value)]."""
        return cls(
            list(values),
            [slot for vs in values.values() for slot, _ in vs],
            np.array([v for vs in values.values() for _, v in vs], dtype=float),
            np.array([len(vs) for vs in values.values()], dtype=np.int64),
        )

    @property
    def starts(self) -> np.ndarray:
        return np.concatenate(([0], np.cumsum(self.sizes)[:-1])).astype(np.int64)

    def means(self) -> dict[str, float]:
        """Each unit's mean, its values added in order."""
        unit = np.repeat(np.arange(len(self.units)), self.sizes)
        totals = np.bincount(unit, self.values, minlength=len(self.units))  # added one by one, in order
        return dict(zip(self.units, (totals / self.sizes).tolist(), strict=True))

    def unit_values(self, k: int) -> list[tuple[str, float]]:
        start = int(self.starts[k])
        end = start + int(self.sizes[k])
        return list(zip(self.slots[start:end], self.values[start:end].tolist(), strict=True))


def _grouped(values: dict[str, list[tuple[str, float]]] | Grouped) -> Grouped:
    return values if isinstance(values, Grouped) else Grouped.of(values)


Sized = dict[int, tuple[list[int], np.ndarray]]  # group size → (the groups' places, their units × values matrix)


def _sized(g: Grouped) -> Sized:
    """The units' values as one matrix per number of values, with the units' places."""
    starts = g.starts
    out: Sized = {}
    for n in np.unique(g.sizes).tolist():
        which = np.flatnonzero(g.sizes == n)
        out[n] = (which.tolist(), g.values[starts[which][:, None] + np.arange(n)].reshape(len(which), n))
    return out


def _scale_of(sized: Sized) -> float:
    """Robust σ of subsamples within units from all within-unit pairwise differences (their median)."""
    diffs = [np.abs(m[:, i] - m[:, j]) for _, m in sized.values() for i, j in combinations(range(m.shape[1]), 2)]
    if not diffs:
        return 0.0
    return float(np.median(np.concatenate(diffs))) / _PAIR_TO_SD


def outlier_threshold(tested: int, df: float = np.inf, alpha: float = OUTLIER_ALPHA) -> float:
    """The |z| above which a value is flagged, when `tested` values are screened in one check.

    df is the effective degrees of freedom of the pooled scale: its estimation noise makes z
    heavier-tailed than normal, like Student's t.
    """
    return float(-stdtrit(max(df, 2.0), alpha / (2 * max(1, tested))))


def scale_df(values: dict[str, list[tuple[str, float]]] | Grouped) -> float:
    """Effective degrees of freedom of the pooled scale: 0.37 of the within-unit df (a median's efficiency)."""
    sizes = _grouped(values).sizes
    return 0.37 * int((sizes[sizes >= 2] - 1).sum())


def swap_threshold(pairs: int, df: float = np.inf, leverage: float = 0.0, alpha: float = SWAP_ALPHA) -> float:
    """The score above which a pair is flagged, when `pairs` pairs are screened.

    df is that of the error variance s²; leverage the mean share of σ² that the left-out
    fit adds to a unit's prediction error (the residuals' variance is σ²(1 + leverage)).
    """
    return float(-stdtrit(max(df, 2.0), alpha / max(1, pairs))) ** 2 * (1.0 + leverage)


def units_with(plan: Plan, means: dict[str, float]) -> tuple[str, ...]:
    """The codes of the units that have a mean, in plan order (usually every unit: then one tuple per plan)."""
    if len(means) == len(plan.units) and means.keys() == plan.unit_by_code.keys():
        return _all_codes(plan)
    return tuple(u.code for u in plan.units if u.code in means)


@lru_cache(maxsize=2)
def _all_codes(plan: Plan) -> tuple[str, ...]:
    return tuple(u.code for u in plan.units)


def fit_size(plan: Plan, means: dict[str, float]) -> tuple[int, float]:
    """Residual df of the additive fit of unit means without a pair, and the mean leverage of a prediction."""
    design = _design(plan, units_with(plan, means))
    if design is None:
        return 0, 0.0
    n = len(design.units) - 2
    return n - design.rank, design.rank / max(1, n)


@dataclass(frozen=True)
class _Design:
    """The additive fit's design for a set of units: the same for every response and round with those units."""

    units: list[Unit]
    treatments: list[str]
    x: np.ndarray
    first: int  # where the treatment columns start
    rank: int
    inv: np.ndarray  # pinv(XᵀX)


@lru_cache(maxsize=8)
def _design(plan: Plan, codes: tuple[str, ...]) -> _Design | None:
    """The design of these units (in plan order), or None when they have fewer than two treatments."""
    units = [plan.unit_by_code[c] for c in codes]
    treatments = sorted({u.treatment for u in units}, key=list(plan.spec.treatments).index)
    if len(treatments) < 2:
        return None
    x, first = _design_matrix(plan, units, treatments)
    return _Design(units, treatments, x, first, int(np.linalg.matrix_rank(x)), np.linalg.pinv(x.T @ x))


def outlier_candidates(values: dict[str, list[tuple[str, float]]] | Grouped) -> int:
    """How many values find_outliers screens (those in units with 3 or more)."""
    sizes = _grouped(values).sizes
    return int(sizes[sizes >= 3].sum())


def swap_candidates(plan: Plan, means: dict[str, float]) -> int:
    """How many pairs of units with different treatments find_swaps could flag."""
    return _pairs(plan, units_with(plan, means))


@lru_cache(maxsize=8)
def _pairs(plan: Plan, codes: tuple[str, ...]) -> int:
    counts = Counter(plan.unit_by_code[code].treatment for code in codes).values()
    n = sum(counts)
    return (n * n - sum(c * c for c in counts)) // 2


def warm_screen(plan: Plan) -> None:
    """The fit's design and the pair count for a return of every unit, made while a workbook is parsed."""
    codes = _all_codes(plan)
    _design(plan, codes)
    _pairs(plan, codes)


def find_outliers(values: dict[str, list[tuple[str, float]]] | Grouped, threshold: float) -> list[Outlier]:
    """The value of a unit farthest from the unit's other values, when it is beyond threshold on the pooled scale."""
    g = _grouped(values)
    sized = _sized(g)
    scale = _scale_of(sized)
    if scale <= 0:
        return []
    maybe = _may_stand_out(sized, len(g.units), scale, threshold)
    found = []
    for k in np.flatnonzero(maybe).tolist():  # the few units that may: exactly, in plain floats
        s = int(g.sizes[k])
        if s < 3:
            continue
        vs = g.unit_values(k)
        total = sum(v for _, v in vs)
        spread = scale * math.sqrt(1 + 1 / (s - 1))  # plain floats: numpy scalars cost a microsecond a value
        slot, v = max(vs, key=lambda sv: abs(sv[1] - (total - sv[1]) / (s - 1)))  # the first of equal scores
        others = (total - v) / (s - 1)
        best = Outlier(slot, g.units[k], v, others, abs(v - others) / spread)
        if best.score > threshold:
            found.append(best)
    return found


def _may_stand_out(sized: Sized, count: int, scale: float, threshold: float) -> np.ndarray:
    """Per unit, whether its farthest value may score above threshold: the same arithmetic in numpy for all
    units of one size, with a margin, so only those few go through the exact per-unit code above."""
    out = np.zeros(count, dtype=bool)
    for s, (which, m) in sized.items():
        if s < 3:
            continue
        total = np.zeros(len(which))
        for j in range(s):  # left to right, as sum() adds
            total = total + m[:, j]
        others = (total[:, None] - m) / (s - 1)
        score = np.abs(m - others).max(axis=1) / (scale * math.sqrt(1 + 1 / (s - 1)))
        out[np.asarray(which, dtype=np.int64)] = score > threshold * (1 - 1e-9)
    return out


def _design_matrix(plan: Plan, units: list[Unit], treatments: list[str]) -> tuple[np.ndarray, int]:
    """Columns: intercept, treatment contrasts, then the design's blocking terms; and where treatments start."""
    cols = [np.ones(len(units))]
    # one array of labels per term, compared with each level in numpy: a Python pass per level costs seconds
    given = np.array([u.treatment for u in units], dtype=object)
    cols += [(given == t).astype(float) for t in treatments[1:]]
    kind = plan.spec.design.type
    terms: list[str] = ["block"] if kind in ("rcbd", "split-plot") else ["row", "col"] if kind == "latin-square" else []
    for term in terms:
        values = [getattr(u, term) for u in units]
        levels = sorted(set(values))
        labels = np.array(values, dtype=object)
        cols += [(labels == lv).astype(float) for lv in levels[1:]]
    return np.column_stack(cols), 1


def find_swaps(plan: Plan, means: dict[str, float], threshold: float) -> list[Swap]:
    """Pairs of units in different treatments whose data fit each other's treatment far better."""
    design = _design(plan, units_with(plan, means))
    if design is None:
        return []
    units, treatments, first = design.units, design.treatments, design.first
    y = np.array([means[u.code] for u in units])
    fit = _Fit(design.x, y, design.inv, design.rank)
    if len(units) - fit.rank < 3 or not np.any(np.abs(fit.resid) > 1e-12):
        return []
    order = np.argsort(-np.abs(fit.resid))
    candidates = [int(i) for i in order[:_MAX_CANDIDATES]]
    column = {t: (first + k - 1 if k else -1) for k, t in enumerate(treatments)}  # -1: the reference treatment
    pairs = [
        (i, j)
        for a, i in enumerate(candidates)
        for j in candidates[a + 1 :]
        if units[i].treatment != units[j].treatment
    ]
    if not pairs:
        return []
    i_of, j_of = (np.array(side, dtype=np.int64) for side in zip(*pairs, strict=True))
    scores = fit.pair_scores(
        i_of,
        j_of,
        np.array([column[units[i].treatment] for i, _ in pairs], dtype=np.int64),
        np.array([column[units[j].treatment] for _, j in pairs], dtype=np.int64),
    )
    high = np.flatnonzero(scores > threshold)  # NaN (no score) is never above
    scored = [(float(scores[k]), pairs[k][0], pairs[k][1]) for k in high.tolist()]
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

    def __init__(self, x: np.ndarray, y: np.ndarray, inv: np.ndarray | None = None, rank: int | None = None) -> None:
        self.x, self.y = x, y
        self.inv = np.linalg.pinv(x.T @ x) if inv is None else inv
        self.rank = int(np.linalg.matrix_rank(x)) if rank is None else rank
        self.beta = self.inv @ (x.T @ y)
        self.resid = y - x @ self.beta
        self.rss = float(self.resid @ self.resid)
        self.tiny = 1e-12 * max(1.0, float(np.var(y)))  # a residual variance this small is none

    def without_pairs(self, i: np.ndarray, j: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """For each pair (i, j) of units, the fit without them: coefficients (pairs × terms), residual variance,
        and whether both exist (some effect may not be estimable without the pair, or no variance is left)."""
        x, inv = self.x, self.inv
        xi, xj = x[i], x[j]
        hi, hj = xi @ inv, xj @ inv  # rows of X_S (XᵀX)⁻
        a, b = 1.0 - (hi * xi).sum(1), -(hi * xj).sum(1)  # I − H_SS, a 2 × 2 block per pair, inverted by formula
        c, d = -(hj * xi).sum(1), 1.0 - (hj * xj).sum(1)
        det = a * d - b * c
        ok = np.abs(det) >= 1e-9
        det = np.where(ok, det, 1.0)
        ei, ej = self.resid[i], self.resid[j]
        w0, w1 = (d * ei - b * ej) / det, (-c * ei + a * ej) / det  # (I − H_SS)⁻¹ e_S
        beta = self.beta - (xi @ inv.T) * w0[:, None] - (xj @ inv.T) * w1[:, None]
        df = len(self.y) - 2 - self.rank
        s2 = (self.rss - (ei * w0 + ej * w1)) / df if df >= 2 else np.zeros(len(i))
        return beta, s2, ok & (s2 > self.tiny)

    def without(self, i: int, j: int) -> tuple[np.ndarray, float] | None:
        """Coefficients and residual variance of the fit without units i and j, or None when not estimable."""
        beta, s2, ok = self.without_pairs(np.array([i]), np.array([j]))
        return (beta[0], float(s2[0])) if ok[0] else None

    def pair_scores(self, i: np.ndarray, j: np.ndarray, ti: np.ndarray, tj: np.ndarray) -> np.ndarray:
        """For each pair (i, j) of units, with treatment columns ti, tj (-1 for the reference treatment): the
        drop in squared residuals, over s², when the two exchange treatments; NaN where there is no score (see
        without_pairs), where the treatments are too close to tell apart (a swap between them changes little),
        or where the swap does not make both units fit better (not one very much better)."""
        beta, s2, ok = self.without_pairs(i, j)
        s2 = np.where(ok, s2, 1.0)
        xi, xj, y = self.x[i], self.x[j], self.y
        rows = np.arange(len(i))
        own_i = np.where(ti >= 0, beta[rows, np.maximum(ti, 0)], 0.0)
        own_j = np.where(tj >= 0, beta[rows, np.maximum(tj, 0)], 0.0)
        fit_i, fit_j = (xi * beta).sum(1), (xj * beta).sum(1)
        swap_i, swap_j = fit_i - own_i + own_j, fit_j - own_j + own_i
        ok &= np.abs(swap_i - fit_i) >= MIN_SEPARATION * np.sqrt(s2)
        yi, yj = y[i], y[j]
        ok &= (np.abs(yi - swap_i) < np.abs(yi - fit_i)) & (np.abs(yj - swap_j) < np.abs(yj - fit_j))
        drop = (yi - fit_i) ** 2 + (yj - fit_j) ** 2 - (yi - swap_i) ** 2 - (yj - swap_j) ** 2
        return np.where(ok, drop / s2, np.nan)
