"""The statistical warnings, proved by simulation with fixed seeds (see layout/intake/robust.py)."""

from __future__ import annotations

import numpy as np
import pytest

from layout import Plan, loads_spec, make_plan
from layout.intake.robust import find_outliers, find_swaps, outlier_threshold, swap_threshold
from layout.intake.screen import screen

SPEC = """
[study]
id = "SIM"
title = "simulation"
[design]
type = "crd"
replicates = 8
subsamples = 3
treatments = ["a", "b", "c", "d"]
[[response]]
name = "y"
kind = "number"
"""
TRIALS = 200
# Unit means have experimental-error SD 1: unit effect variance 0.5 plus subsample variance 1.5 / 3.
UNIT_SD, SUB_SD = np.sqrt(0.5), np.sqrt(1.5)


def simulate_trial(rng: np.random.Generator, spacing: float) -> tuple[Plan, dict[str, list[tuple[str, float]]]]:
    plan = make_plan(loads_spec(SPEC, "sim.toml"), seed=int(rng.integers(2**31)))
    centre = {t: k * spacing for k, t in enumerate(plan.spec.treatments)}
    values = {}
    for u in plan.units:
        effect = rng.normal(0, UNIT_SD)
        values[u.code] = [(f"{u.code}/{k}", centre[u.treatment] + effect + rng.normal(0, SUB_SD)) for k in range(3)]
    return plan, values


def means(values: dict[str, list[tuple[str, float]]]) -> dict[str, float]:
    return {u: float(np.mean([v for _, v in vs])) for u, vs in values.items()}


STUDIES = 500
DESIGNS = {
    # 4 × 8 units × 3 subsamples in each design, two numeric responses
    "crd": 'type = "crd"\nreplicates = 8\nsubsamples = 3\ntreatments = ["a", "b", "c", "d"]',
    "rcbd": 'type = "rcbd"\nblocks = 8\nsubsamples = 3\ntreatments = ["a", "b", "c", "d"]',
    "split-plot": (
        'type = "split-plot"\nblocks = 8\nsubsamples = 3\n'
        '[[factor]]\nname = "w"\nlevels = ["w1", "w2"]\nwhole_plot = true\n'
        '[[factor]]\nname = "s"\nlevels = ["s1", "s2"]'
    ),
}


def study(design: str) -> Plan:
    text = f'[study]\nid = "SIM"\ntitle = "t"\nseed = 1\n[design]\n{DESIGNS[design]}\n'
    text += '[[response]]\nname = "y"\nkind = "number"\n[[response]]\nname = "z"\nkind = "number"\n'
    return make_plan(loads_spec(text, "sim.toml"))


def clean_groups(plan: Plan, rng: np.random.Generator, spacing: float) -> dict:
    """Normal data: treatment effects `spacing` apart, block effects, unit effect and subsample error."""
    effect = {t: k * spacing for k, t in enumerate(plan.spec.treatments)}
    block = {b: rng.normal(0, 1) for b in range(1, 9)}
    groups: dict = {}
    for rnd in ("1",):
        for response in ("y", "z"):
            g = {}
            for u in plan.units:
                mu = effect[u.treatment] + block.get(u.block or 0, 0.0) + rng.normal(0, UNIT_SD)
                g[u.code] = [(s.code, mu + rng.normal(0, SUB_SD)) for s in plan.slots_of[u.code]]
            groups[(rnd, response)] = g
    return groups


@pytest.mark.slow
class TestPerStudy:
    """Error rates as a user meets them: the share of whole clean studies with any warning."""

    @pytest.mark.parametrize("design", list(DESIGNS))
    def test_clean_studies_rarely_warned(self, design: str) -> None:
        """500 clean studies (2 responses): at most 5% get any outlier or swap warning."""
        plan = study(design)
        rng = np.random.default_rng(len(design))
        warned = outliers = swaps = 0
        for k in range(STUDIES):
            got = screen(plan, clean_groups(plan, rng, spacing=(1.0, 2.5, 4.0)[k % 3]))
            outliers += bool(got.outliers)
            swaps += bool(got.swaps)
            warned += bool(got.outliers or got.swaps)
        RATES[design] = (warned / STUDIES, outliers / STUDIES, swaps / STUDIES)
        assert warned / STUDIES <= 0.05, RATES[design]

    def test_finds_four_in_five_swaps_4sd_apart(self) -> None:
        """crd 4 × 8 × 3: two units of treatments 4 experimental-error SDs apart exchanged are found 80% of the time."""
        plan = study("crd")
        rng = np.random.default_rng(4)
        found = 0
        for _ in range(STUDIES):
            groups = clean_groups(plan, rng, spacing=4.0)
            a = next(u.code for u in plan.units if u.treatment == "a")
            b = next(u.code for u in plan.units if u.treatment == "b")
            for g in groups.values():
                g[a], g[b] = g[b], g[a]
            found += any({s.first, s.second} == {a, b} for _, _, s, _, _ in screen(plan, groups).swaps)
        RATES["swap power"] = (found / STUDIES,)
        assert found / STUDIES >= 0.80, found / STUDIES

    def test_finds_a_value_eight_sd_off(self) -> None:
        """One subsample moved 8 subsample SDs is found in 90% or more of studies."""
        plan = study("crd")
        rng = np.random.default_rng(12)
        found = 0
        for t in range(STUDIES):
            groups = clean_groups(plan, rng, spacing=2.0)
            g = groups[("1", "y")]
            unit = sorted(g)[t % len(g)]
            slot, v = g[unit][1]
            g[unit][1] = (slot, v + 8 * SUB_SD * (1 if t % 2 else -1))
            found += any(o.slot == slot for _, _, o in screen(plan, groups).outliers)
        RATES["outlier power"] = (found / STUDIES,)
        assert found / STUDIES >= 0.90, found / STUDIES


RATES: dict[str, tuple[float, ...]] = {}


class TestRules:
    def test_no_swap_between_equal_treatments(self) -> None:
        """With no treatment effect at all nothing is flagged: a swap cannot be told apart."""
        rng = np.random.default_rng(7)
        plan, values = simulate_trial(rng, 0.0)
        assert find_swaps(plan, means(values), swap_threshold(384)) == []

    def test_needs_three_subsamples(self) -> None:
        """With two subsamples a unit cannot say which value is off, so nothing is flagged."""
        values = {f"u{i}": [(f"u{i}/0", 0.0), (f"u{i}/1", 100.0 if i == 0 else 0.5)] for i in range(10)}
        assert find_outliers(values, outlier_threshold(20)) == []

    def test_thresholds_grow_with_what_is_tested(self) -> None:
        """Bonferroni: more values or pairs screened in one check, higher thresholds (scipy's normal quantiles)."""
        assert outlier_threshold(96) == pytest.approx(3.6518, abs=1e-3)  # normal quantile 1 − 0.025/192 (scipy)
        assert outlier_threshold(96, df=24) > outlier_threshold(96) and outlier_threshold(1000) > outlier_threshold(96)
        assert swap_threshold(384) == pytest.approx(3.8261**2, rel=1e-3)  # normal quantile 1 − 0.025/384, squared


class TestDeletionFormula:
    def test_leave_two_out_equals_a_refit(self) -> None:
        """Coefficients and residual variance without a pair equal a plain numpy lstsq refit without it."""
        from layout.intake.robust import _design_matrix, _Fit

        rng = np.random.default_rng(3)
        rcbd = SPEC.replace('type = "crd"\nreplicates = 8', 'type = "rcbd"\nblocks = 6')
        plan = make_plan(loads_spec(rcbd, "s.toml"), 1)
        units = list(plan.units)
        y = np.array([4.0 * "abcd".index(u.treatment) + 0.5 * (u.block or 0) + rng.normal() for u in units])
        x, _ = _design_matrix(plan, units, list(plan.spec.treatments))
        fit = _Fit(x, y)
        for i in range(0, len(units), 3):
            for j in range(i + 1, len(units), 2):
                keep = np.ones(len(y), bool)
                keep[[i, j]] = False
                beta, *_ = np.linalg.lstsq(x[keep], y[keep], rcond=None)
                s2 = float(np.sum((y[keep] - x[keep] @ beta) ** 2)) / (keep.sum() - np.linalg.matrix_rank(x[keep]))
                got = fit.without(i, j)
                assert got is not None
                np.testing.assert_allclose(got[0], beta, rtol=1e-9, atol=1e-9)
                assert got[1] == pytest.approx(s2, rel=1e-9)

    def test_pair_scores_equal_scores_from_a_refit(self) -> None:
        """The swap scores of all pairs at once equal the score computed pair by pair from a plain numpy lstsq
        refit without the pair: the exchange's drop in squared residuals over the refit's residual variance."""
        from layout.intake.robust import MIN_SEPARATION, _design_matrix, _Fit

        rng = np.random.default_rng(5)
        rcbd = SPEC.replace('type = "crd"\nreplicates = 8', 'type = "rcbd"\nblocks = 6')
        plan = make_plan(loads_spec(rcbd, "s.toml"), 2)
        units = list(plan.units)
        treatments = list(plan.spec.treatments)
        y = np.array([3.0 * treatments.index(u.treatment) + 0.5 * (u.block or 0) + rng.normal() for u in units])
        y[[0, 5]] = y[[5, 0]]  # one exchange, so some pairs score high
        x, first = _design_matrix(plan, units, treatments)
        col = [first + treatments.index(u.treatment) - 1 if treatments.index(u.treatment) else -1 for u in units]
        pairs = [(i, j) for i in range(len(units)) for j in range(i + 1, len(units)) if col[i] != col[j]]
        i_of, j_of = np.array([p[0] for p in pairs]), np.array([p[1] for p in pairs])
        got = _Fit(x, y).pair_scores(i_of, j_of, np.array(col)[i_of], np.array(col)[j_of])
        scored = 0
        for k, (i, j) in enumerate(pairs):
            keep = np.ones(len(y), bool)
            keep[[i, j]] = False
            beta, *_ = np.linalg.lstsq(x[keep], y[keep], rcond=None)
            s2 = float(np.sum((y[keep] - x[keep] @ beta) ** 2)) / (keep.sum() - np.linalg.matrix_rank(x))
            fit_i, fit_j = x[i] @ beta, x[j] @ beta
            swapped = beta.copy()
            shift = (swapped[col[j]] if col[j] >= 0 else 0.0) - (swapped[col[i]] if col[i] >= 0 else 0.0)
            swap_i, swap_j = fit_i + shift, fit_j - shift
            better = abs(y[i] - swap_i) < abs(y[i] - fit_i) and abs(y[j] - swap_j) < abs(y[j] - fit_j)
            if abs(abs(shift) - MIN_SEPARATION * np.sqrt(s2)) < 1e-9 * abs(shift):
                continue  # at the very edge of the separation rule: either answer is right
            if abs(shift) < MIN_SEPARATION * np.sqrt(s2) or not better:
                assert np.isnan(got[k])  # no score
                continue
            want = ((y[i] - fit_i) ** 2 + (y[j] - fit_j) ** 2 - (y[i] - swap_i) ** 2 - (y[j] - swap_j) ** 2) / s2
            assert got[k] == pytest.approx(want, rel=1e-8)
            scored += 1
        assert scored >= 2 and np.isnan(got).sum() > 0

    def test_not_estimable_without_the_pair(self) -> None:
        """When a treatment has no unit left without the pair, the pair is not scored."""
        from layout.intake.robust import _design_matrix, _Fit

        crd = SPEC.replace("replicates = 8", "replicates = { a = 1, b = 3, c = 3, d = 3 }")
        plan = make_plan(loads_spec(crd, "s.toml"), 1)
        units = list(plan.units)
        x, _ = _design_matrix(plan, units, list(plan.spec.treatments))
        fit = _Fit(x, np.arange(len(units), dtype=float) ** 1.5)
        lone = next(k for k, u in enumerate(units) if u.treatment == "a")
        other = next(k for k, u in enumerate(units) if u.treatment == "b")
        assert fit.without(lone, other) is None
