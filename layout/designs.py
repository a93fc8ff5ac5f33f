"""One randomizer per design type; each returns the units in walk order.

The stream is used in a fixed order (documented per function), so the same spec and
seed always give the same layout.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

from layout.fieldmap import grouped_cells, tiling, walk_cells
from layout.latin import random_latin_square
from layout.rng import Stream
from layout.spec import Spec
from layout.spec_rules import group_sizes


@dataclass(frozen=True)
class Placement:
    """One experimental unit before it gets its serial number and code."""

    treatment: str
    levels: dict[str, str] = field(hash=False)
    block: int | None = None
    whole_plot: int | None = None
    row: int | None = None
    col: int | None = None


def _crd(spec: Spec, stream: Stream) -> list[Placement]:
    """Every treatment's replicates in spec order, then one shuffle over all units."""
    reps = spec.design.replicates
    pool: list[tuple[str, dict[str, str]]] = []
    for label, levels in spec.treatment_levels():
        n = reps[label] if isinstance(reps, dict) else int(reps or 0)
        pool += [(label, levels)] * n
    return [Placement(label, dict(levels)) for label, levels in stream.shuffle(pool)]


def _rcbd(spec: Spec, stream: Stream) -> list[Placement]:
    """Block by block, an independent shuffle of all treatments."""
    out: list[Placement] = []
    for block in range(1, (spec.design.blocks or 0) + 1):
        for label, levels in stream.shuffle(spec.treatment_levels()):
            out.append(Placement(label, dict(levels), block=block))
    return out


def _split_plot(spec: Spec, stream: Stream) -> list[Placement]:
    """Per block: shuffle the whole-plot levels; per whole plot: shuffle the sub-plot treatments."""
    whole = next(f for f in spec.factor if f.whole_plot)
    subs = [f for f in spec.factor if not f.whole_plot]
    sub_combos: list[dict[str, str]] = [{}]
    for f in subs:
        sub_combos = [{**c, f.name: level} for c in sub_combos for level in f.levels]
    out: list[Placement] = []
    plot = 0
    for block in range(1, (spec.design.blocks or 0) + 1):
        for level in stream.shuffle(whole.levels):
            plot += 1
            for combo in stream.shuffle(sub_combos):
                levels = {f.name: (level if f.whole_plot else combo[f.name]) for f in spec.factor}
                out.append(Placement("/".join(levels.values()), levels, block=block, whole_plot=plot))
    return out


def _latin_square(spec: Spec, stream: Stream) -> list[Placement]:
    """A square drawn uniformly from all Latin squares of order t (layout.latin), walked row by row."""
    treatments = spec.treatment_levels()
    t = len(treatments)
    square = random_latin_square(t, stream)
    walk = spec.layout.walk if spec.layout else "serpentine"
    out: list[Placement] = []
    for r, c in walk_cells(t, t, walk):
        label, levels = treatments[square[r - 1][c - 1]]
        out.append(Placement(label, dict(levels), row=r, col=c))
    return out


RANDOMIZERS: dict[str, Callable[[Spec, Stream], list[Placement]]] = {
    "crd": _crd,
    "rcbd": _rcbd,
    "split-plot": _split_plot,
    "latin-square": _latin_square,
}


def randomize(spec: Spec, stream: Stream) -> list[Placement]:
    """The design's units in walk order, with grid positions when the spec has a grid."""
    placements = RANDOMIZERS[spec.design.type](spec, stream)
    grid = spec.layout
    if grid is None or spec.design.type == "latin-square":
        return placements
    # blocks and whole plots are rectangles, each walked completely before the next (layout.fieldmap)
    groups, sizes = group_sizes(spec)
    shapes = tiling(grid.rows, grid.cols, groups, sizes) if sizes else []
    if shapes is None:  # refused by the spec rules; kept here so a bypassed spec still fails loudly
        raise ValueError("the grid cannot hold the blocks as rectangles")
    cells = grouped_cells(grid.rows, grid.cols, grid.walk, groups, shapes)
    return [
        Placement(p.treatment, p.levels, p.block, p.whole_plot, r, c)
        for p, (r, c) in zip(placements, cells[: len(placements)], strict=True)
    ]


def collection_order(placements: list[Placement], stream: Stream) -> list[int]:
    """A fresh measuring order (indexes into placements), shuffled within each block."""
    groups: dict[int | None, list[int]] = {}
    for i, p in enumerate(placements):
        groups.setdefault(p.block, []).append(i)
    return [i for block in groups for i in stream.shuffle(groups[block])]
