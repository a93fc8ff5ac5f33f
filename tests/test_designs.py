"""Each randomizer keeps its design's defining property, on many seeds."""

from __future__ import annotations

from collections import Counter, defaultdict
from math import factorial

import pytest
from scipy import stats

from layout import SpecError, make_plan
from layout.fieldmap import walk_cells
from layout.latin import random_latin_square
from layout.rng import Stream
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
        # each block is one full row here, so the walk is the plain serpentine
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


def _is_rectangle(cells: set[tuple[int, int]]) -> bool:
    rows = {r for r, _ in cells}
    cols = {c for _, c in cells}
    return (
        len(cells) == len(rows) * len(cols)
        and max(rows) - min(rows) + 1 == len(rows)
        and (max(cols) - min(cols) + 1 == len(cols))
    )


GRID_CASES = [
    # (design lines, grid rows, grid cols, walk)
    ('type = "rcbd"\nblocks = 3\ntreatments = ["a", "b", "c", "d"]', 2, 6, "rows"),
    ('type = "rcbd"\nblocks = 4\ntreatments = ["a", "b", "c", "d", "e", "f", "g", "h"]', 4, 9, "rows"),
    ('type = "rcbd"\nblocks = 4\ntreatments = ["a", "b", "c", "d", "e", "f", "g", "h"]', 4, 8, "serpentine"),
    ('type = "rcbd"\nblocks = 6\ntreatments = ["a", "b", "c", "d"]', 6, 4, "serpentine"),
    ('type = "rcbd"\nblocks = 4\ntreatments = ["a", "b", "c", "d", "e", "f"]', 6, 4, "serpentine"),
]


class TestGridRectangles:
    @pytest.mark.parametrize(("design", "rows", "cols", "walk"), GRID_CASES)
    @pytest.mark.parametrize("seed", SEEDS[:5])
    def test_blocks_are_rectangles_walked_whole(self, design: str, rows: int, cols: int, walk: str, seed: int) -> None:
        """Every block occupies a rectangle of the grid and is walked completely before the next."""
        plan = make_plan(spec_from(design, extra=f'[layout]\nrows = {rows}\ncols = {cols}\nwalk = "{walk}"'), seed)
        for b in {u.block for u in plan.units}:
            assert _is_rectangle({(u.row, u.col) for u in plan.units if u.block == b}), b
        walked = [u.block for u in sorted(plan.units, key=lambda u: u.walk)]
        assert walked == sorted(walked)
        assert len({(u.row, u.col) for u in plan.units}) == len(plan.units)

    @pytest.mark.parametrize("seed", SEEDS[:10])
    @pytest.mark.parametrize(("rows", "cols"), [(4, 12), (8, 6), (6, 8)])
    def test_whole_plots_are_rectangles_inside_their_block(self, seed: int, rows: int, cols: int) -> None:
        """Split-plot: every whole plot and every block is a rectangle; whole plots are walked whole."""
        extra = SPLIT + f"[layout]\nrows = {rows}\ncols = {cols}"
        plan = make_plan(spec_from('type = "split-plot"\nblocks = 4', extra=extra), seed)
        for key in ("block", "whole_plot"):
            for g in {getattr(u, key) for u in plan.units}:
                assert _is_rectangle({(u.row, u.col) for u in plan.units if getattr(u, key) == g})
        walked = [u.whole_plot for u in sorted(plan.units, key=lambda u: u.walk)]
        assert walked == sorted(walked)

    def test_a_grid_that_would_wrap_a_block_is_refused_with_shapes_that_work(self) -> None:
        """3 blocks of 5 on a 2 × 8 grid cannot be rectangles; the message names grids that can."""
        with pytest.raises(SpecError) as caught:
            spec_from(
                'type = "rcbd"\nblocks = 3\ntreatments = ["a", "b", "c", "d", "e"]',
                extra="[layout]\nrows = 2\ncols = 8",
            )
        (problem,) = caught.value.problems
        assert problem.where == "layout" and "rows = 3 and cols = 5" in problem.message


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

    def test_uniform_over_all_576_squares_of_order_4(self) -> None:
        """20,000 squares of order 4 reach all 576 Latin squares, equally often.

        576 is the number of Latin squares of order 4 (4!·3!·4 reduced squares; OEIS A002860).
        A cyclic square permuted by rows, columns and symbols reaches only 432 of them, so
        all 576 shows the draw is not from one class. Pearson chi-square with 575 df; fails
        when p < 0.001.
        """
        stream = Stream(20261202)
        counts = Counter(tuple(tuple(row) for row in random_latin_square(4, stream)) for _ in range(20_000))
        assert len(counts) == 576
        result = stats.chisquare(list(counts.values()))
        assert result.pvalue > 0.001, result

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


class TestUnequalSubsamples:
    def test_table_per_treatment(self) -> None:
        """subsamples as a table gives each unit its treatment's number of slots, padded codes for 10 or more."""
        spec = spec_from('type = "crd"\nreplicates = 3\ntreatments = ["a", "b"]\nsubsamples = { a = 2, b = 12 }')
        plan = make_plan(spec, 3)
        for u in plan.units:
            assert len(plan.slots_of[u.code]) == {"a": 2, "b": 12}[u.treatment]
        assert len(plan.slots) == 3 * 2 + 3 * 12
        assert all(s.code.split("-")[2][:-1].isdigit() and len(s.code.split("-")[2]) == 3 for s in plan.slots)

    def test_table_per_whole_plot_level(self) -> None:
        """In a split-plot the table may be keyed by the whole-plot factor's levels."""
        spec = spec_from(
            'type = "split-plot"\nblocks = 2\nsubsamples = { none = 1, disc = 2, plough = 3 }', extra=SPLIT
        )
        plan = make_plan(spec, 5)
        for u in plan.units:
            assert len(plan.slots_of[u.code]) == {"none": 1, "disc": 2, "plough": 3}[u.levels["till"]]
