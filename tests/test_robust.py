"""The statistical warnings, proved by simulation with fixed seeds (see layout/intake/robust.py)."""

from __future__ import annotations

import numpy as np
import pytest

from layout import Plan, loads_spec, make_plan
from layout.intake.robust import find_outliers, find_swaps

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


class TestPossibleSwap:
    @pytest.mark.parametrize("spacing", [1.0, 2.5], ids=["treatments-1sd-apart", "treatments-2.5sd-apart"])
    def test_false_alarms_at_most_one_percent_of_units(self, spacing: float) -> None:
        """On 200 clean simulated trials at most 1% of units are flagged (spacings near the worst case)."""
        rng = np.random.default_rng(20261201)
        flagged = total = 0
        for _ in range(TRIALS):
            plan, values = simulate_trial(rng, spacing)
            flagged += 2 * len(find_swaps(plan, means(values)))
            total += len(plan.units)
        assert flagged / total <= 0.01, flagged / total

    def test_finds_nine_in_ten_swaps_between_treatments_4sd_apart(self) -> None:
        """With two units of treatments 4 experimental-error SDs apart exchanged, 90% or more are found."""
        rng = np.random.default_rng(4)
        found = 0
        for _ in range(TRIALS):
            plan, values = simulate_trial(rng, 4.0)
            a = next(u.code for u in plan.units if u.treatment == "a")
            b = next(u.code for u in plan.units if u.treatment == "b")
            values[a], values[b] = values[b], values[a]
            found += any({s.first, s.second} == {a, b} for s in find_swaps(plan, means(values)))
        assert found / TRIALS >= 0.90, found / TRIALS

    def test_no_swap_between_equal_treatments(self) -> None:
        """With no treatment effect at all nothing is flagged: a swap cannot be told apart."""
        rng = np.random.default_rng(7)
        plan, values = simulate_trial(rng, 0.0)
        assert find_swaps(plan, means(values)) == []


class TestOutlierSubsample:
    def test_false_alarms_at_most_one_percent_of_units(self) -> None:
        """On 200 clean simulated trials at most 1% of units get an outlier warning."""
        rng = np.random.default_rng(11)
        flagged = total = 0
        for _ in range(TRIALS):
            _, values = simulate_trial(rng, 2.0)
            flagged += len({o.unit for o in find_outliers(values)})
            total += len(values)
        assert flagged / total <= 0.01, flagged / total

    def test_finds_a_value_eight_sd_off(self) -> None:
        """One subsample moved 8 subsample SDs is found in 90% or more of 200 trials."""
        rng = np.random.default_rng(12)
        found = 0
        for t in range(TRIALS):
            _, values = simulate_trial(rng, 2.0)
            unit = sorted(values)[t % len(values)]
            slot, v = values[unit][1]
            values[unit][1] = (slot, v + 8 * SUB_SD * (1 if t % 2 else -1))
            found += any(o.slot == slot for o in find_outliers(values))
        assert found / TRIALS >= 0.90, found / TRIALS

    def test_needs_three_subsamples(self) -> None:
        """With two subsamples a unit cannot say which value is off, so nothing is flagged."""
        values = {f"u{i}": [(f"u{i}/0", 0.0), (f"u{i}/1", 100.0 if i == 0 else 0.5)] for i in range(10)}
        assert find_outliers(values) == []


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
