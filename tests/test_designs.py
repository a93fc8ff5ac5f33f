"""Each randomizer keeps its design's defining property, on many seeds."""

from __future__ import annotations

from collections import Counter, defaultdict
from math import factorial

import pytest
from scipy import stats

from layout import make_plan
from layout.fieldmap import walk_cells
from tests.helpers import spec_from

SEEDS = range(40)

FACTORS_2x2 = '[[factor]]\nname = "a"\nlevels = ["a1", "a2"]\n[[factor]]\nname = "b"\nlevels = ["b1", "b2"]\n'
SPLIT = (
    '[[factor]]\nname = "till"\nlevels = ["none", "disc", "plough"]\nwhole_plot = true\n'
    '[[factor]]\nname = "cv"\nlevels = ["A", "B"]\n[[factor]]\nname = "n"\nlevels = ["lo", "hi"]\n'
)


class TestCrd:
    @pytest.mark.parametrize("seed", SEEDS)
    def test_equal_replication(self, seed: int) -> None:
        """Every treatment gets exactly its replicates."""
        plan = make_plan(spec_from('type = "crd"\nreplicates = 4\nsubsamples = 2\ntreatments = ["a", "b", "c"]'), seed)
        assert Counter(u.treatment for u in plan.units) == {"a": 4, "b": 4, "c": 4}
        assert len(plan.slots) == 24

    @pytest.mark.parametrize("seed", SEEDS)
    def test_unequal_replication(self, seed: int) -> None:
        """A per-treatment table of replicates is honoured; replicate numbers run 1..r."""
        spec = spec_from('type = "crd"\ntreatments = ["a", "b", "c"]\nreplicates = { a = 2, b = 5, c = 3 }')
        plan = make_plan(spec, seed)
        assert Counter(u.treatment for u in plan.units) == {"a": 2, "b": 5, "c": 3}
        for t, n in {"a": 2, "b": 5, "c": 3}.items():
            assert sorted(u.replicate for u in plan.units if u.treatment == t) == list(range(1, n + 1))

    def test_assignments_unbiased_chi_square(self) -> None:
        """All 90 assignments of 3 treatments × 2 replicates are equally likely.

        Pearson chi-square over seeds 0..8999 (100 expected per assignment, 89 df); the test
        fails when p < 0.001, a threshold a fair shuffle fails one run in a thousand.
        """
        spec = spec_from('type = "crd"\nreplicates = 2\ntreatments = ["a", "b", "c"]')
        counts = Counter(tuple(u.treatment for u in make_plan(spec, seed).units) for seed in range(9000))
        assert len(counts) == factorial(6) // 8 == 90
        result = stats.chisquare(list(counts.values()))
        assert result.pvalue > 0.001, result


class TestRcbd:
    @pytest.mark.parametrize("seed", SEEDS)
    def test_each_treatment_once_per_block(self, seed: int) -> None:
        """Every block holds every treatment exactly once."""
        plan = make_plan(spec_from('type = "rcbd"\nblocks = 5\n', extra=FACTORS_2x2), seed)
        by_block = defaultdict(list)
        for u in plan.units:
            by_block[u.block].append(u.treatment)
        assert sorted(by_block) == [1, 2, 3, 4, 5]
        assert all(sorted(ts) == ["a1/b1", "a1/b2", "a2/b1", "a2/b2"] for ts in by_block.values())

    @pytest.mark.parametrize("seed", SEEDS[:10])
    def test_blocks_are_contiguous_bands_in_walk_order(self, seed: int) -> None:
        """On a grid, each block fills one unbroken stretch of the walk."""
        plan = make_plan(
            spec_from(
                'type = "rcbd"\nblocks = 3\ntreatments = ["a", "b", "c", "d", "e"]',
                extra='[layout]\nrows = 3\ncols = 5\nwalk = "serpentine"',
            ),
            seed,
        )
        blocks = [u.block for u in sorted(plan.units, key=lambda u: u.walk)]
        assert blocks == sorted(blocks)
        assert [(u.row, u.col) for u in plan.units] == walk_cells(3, 5, "serpentine")

    def test_blocks_shuffled_independently(self) -> None:
        """Blocks do not repeat one order: over seeds, block 1 and block 2 orders differ often."""
        spec = spec_from('type = "rcbd"\nblocks = 2\ntreatments = ["a", "b", "c", "d"]')
        same = 0
        for seed in range(200):
            units = make_plan(spec, seed).units
            same += [u.treatment for u in units[:4]] == [u.treatment for u in units[4:]]
        # Independent shuffles agree with probability 1/24: about 8 of 200.
        assert same < 25


class TestLatinSquare:
    @pytest.mark.parametrize("seed", SEEDS)
    @pytest.mark.parametrize("t", [3, 4, 6])
    def test_once_per_row_and_column(self, seed: int, t: int) -> None:
        """Each treatment appears once in every row and every column."""
        names = ", ".join(f'"t{i}"' for i in range(t))
        plan = make_plan(spec_from(f'type = "latin-square"\ntreatments = [{names}]'), seed)
        assert len(plan.units) == t * t
        for key in ("row", "col"):
            groups = defaultdict(set)
            for u in plan.units:
                groups[getattr(u, key)].add(u.treatment)
            assert len(groups) == t and all(len(g) == t for g in groups.values())

    def test_squares_vary(self) -> None:
        """Different seeds give many different squares of 4."""
        spec = spec_from('type = "latin-square"\ntreatments = ["a", "b", "c", "d"]')
        squares = {tuple(u.treatment for u in make_plan(spec, s).units) for s in range(100)}
        assert len(squares) > 50


class TestSplitPlot:
    @pytest.mark.parametrize("seed", SEEDS)
    def test_whole_plot_constant_and_once_per_block(self, seed: int) -> None:
        """A whole plot holds one tillage level; each level is one whole plot per block; sub-plots complete."""
        plan = make_plan(spec_from('type = "split-plot"\nblocks = 4', extra=SPLIT), seed)
        plots = defaultdict(list)
        for u in plan.units:
            plots[u.whole_plot].append(u)
        assert len(plots) == 12
        for units in plots.values():
            assert len({u.levels["till"] for u in units}) == 1
            assert len({u.block for u in units}) == 1
            assert sorted((u.levels["cv"], u.levels["n"]) for u in units) == [
                ("A", "hi"),
                ("A", "lo"),
                ("B", "hi"),
                ("B", "lo"),
            ]
        for block in range(1, 5):
            levels = [units[0].levels["till"] for units in plots.values() if units[0].block == block]
            assert sorted(levels) == ["disc", "none", "plough"]

    @pytest.mark.parametrize("seed", SEEDS[:10])
    def test_whole_plots_contiguous(self, seed: int) -> None:
        """Sub-plots of a whole plot are neighbours in the walk."""
        plan = make_plan(spec_from('type = "split-plot"\nblocks = 2', extra=SPLIT), seed)
        plots = [u.whole_plot for u in plan.units]
        assert plots == sorted(plots)


class TestSerialsRevealNothing:
    def test_serials_follow_walk(self) -> None:
        """Serial numbers are the walk order, not grouped by treatment."""
        plan = make_plan(
            spec_from(
                'type = "crd"\nreplicates = 5\ntreatments = ["a", "b", "c", "d"]', extra="[layout]\nrows = 4\ncols = 5"
            ),
            4817,
        )
        assert [u.serial for u in plan.units] == [u.walk for u in plan.units] == list(range(1, 21))
        first_five = [u.treatment for u in plan.units[:5]]
        assert len(set(first_five)) > 1


class TestCollectionOrder:
    def test_random_order_per_round_within_blocks(self) -> None:
        """With order = random each round gets its own order, and blocks stay together."""
        spec = spec_from(
            'type = "rcbd"\nblocks = 3\ntreatments = ["a", "b", "c", "d", "e", "f"]',
            extra='[collection]\nrounds = ["r1", "r2", "r3"]\norder = "random"',
        )
        plan = make_plan(spec, 11)
        orders = [r.order for r in plan.rounds]
        assert len(set(orders)) == 3
        block_of = {u.code: u.block for u in plan.units}
        for order in orders:
            assert sorted(order) == sorted(u.code for u in plan.units)
            blocks = [block_of[c] for c in order]
            assert blocks == sorted(blocks)

    def test_walk_order_is_serial_order(self) -> None:
        """With order = walk every round follows the walk."""
        plan = make_plan(
            spec_from(
                'type = "crd"\nreplicates = 2\ntreatments = ["a", "b"]', extra='[collection]\nrounds = ["x", "y"]'
            ),
            2,
        )
        assert all(r.order == tuple(u.code for u in plan.units) for r in plan.rounds)
