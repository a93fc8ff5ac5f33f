"""Grid positions and the order in which people walk them.

Blocks and whole plots are laid out as rectangles: a block of k units is an h × w
rectangle (h·w = k), the blocks sit on a grid of such rectangles, and inside a block the
whole plots are smaller rectangles that tile it exactly. The walk visits each block
completely (and inside it each whole plot) before the next, so a collector finishes one
block before starting another.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Literal

Walk = Literal["serpentine", "rows"]
Cell = tuple[int, int]
Shape = tuple[int, int]


def walk_cells(rows: int, cols: int, walk: Walk) -> list[Cell]:
    """Every (row, col) of the grid, 1-based, in the order they are walked.

    ``rows`` reads every row left to right; ``serpentine`` turns at the end of each row,
    so odd rows run left to right and even rows right to left.
    """
    cells: list[Cell] = []
    for r in range(1, rows + 1):
        cols_in_order = range(1, cols + 1)
        if walk == "serpentine" and r % 2 == 0:
            cols_in_order = range(cols, 0, -1)
        cells.extend((r, c) for c in cols_in_order)
    return cells


def _shapes(size: int) -> list[Shape]:
    """Every h × w with h·w = size, flattest (fewest rows) first."""
    return [(h, size // h) for h in range(1, size + 1) if size % h == 0]


def tiling(rows: int, cols: int, groups: int, sizes: Sequence[int]) -> list[Shape] | None:
    """Rectangle shapes for nested groups, outermost first, or None when the grid cannot hold them.

    groups is how many outer groups there are (blocks); sizes are the units per group at
    each level (a block's units, then a whole plot's). Outer groups may leave cells of
    the grid empty; inner groups tile their parent exactly.
    """
    if not sizes:
        return []
    for h, w in _shapes(sizes[0]):
        if h > rows or w > cols or (rows // h) * (cols // w) < groups:
            continue
        inner = _inner(h, w, sizes[1:])
        if inner is not None:
            return [(h, w), *inner]
    return None


def _inner(rows: int, cols: int, sizes: Sequence[int]) -> list[Shape] | None:
    if not sizes:
        return []
    for h, w in _shapes(sizes[0]):
        if rows % h == 0 and cols % w == 0:
            inner = _inner(h, w, sizes[1:])
            if inner is not None:
                return [(h, w), *inner]
    return None


def grouped_cells(rows: int, cols: int, walk: Walk, groups: int, shapes: Sequence[Shape]) -> list[Cell]:
    """The cells of every group in walk order: groups one after another, each walked completely."""
    if not shapes:
        return walk_cells(rows, cols, walk)
    h, w = shapes[0]
    anchors = walk_cells(rows // h, cols // w, walk)[:groups]
    out: list[Cell] = []
    for br, bc in anchors:
        inner_groups = (h // shapes[1][0]) * (w // shapes[1][1]) if len(shapes) > 1 else 0
        # a serpentine walk runs right to left through the groups of its even rows, so they are mirrored
        mirrored = walk == "serpentine" and br % 2 == 0
        for r, c in grouped_cells(h, w, walk, inner_groups, shapes[1:]):
            out.append(((br - 1) * h + r, (bc - 1) * w + (w + 1 - c if mirrored else c)))
    return out


def workable_grids(units: int, groups: int, sizes: Sequence[int], near: Shape, count: int = 4) -> list[Shape]:
    """Grid shapes of exactly `units` cells that can hold the groups, nearest to `near` first."""
    found = [
        (r, units // r)
        for r in range(1, units + 1)
        if units % r == 0 and tiling(r, units // r, groups, sizes) is not None
    ]
    found.sort(key=lambda g: (abs(g[0] - near[0]) + abs(g[1] - near[1]), g))
    return found[:count]
