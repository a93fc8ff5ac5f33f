"""Grid positions and the order in which people walk them."""

from __future__ import annotations

from typing import Literal

Walk = Literal["serpentine", "rows"]


def walk_cells(rows: int, cols: int, walk: Walk) -> list[tuple[int, int]]:
    """Every (row, col) of the grid, 1-based, in the order they are walked.

    ``rows`` reads every row left to right; ``serpentine`` turns at the end of each row,
    so odd rows run left to right and even rows right to left.
    """
    cells: list[tuple[int, int]] = []
    for r in range(1, rows + 1):
        cols_in_order = range(1, cols + 1)
        if walk == "serpentine" and r % 2 == 0:
            cols_in_order = range(cols, 0, -1)
        cells.extend((r, c) for c in cols_in_order)
    return cells
