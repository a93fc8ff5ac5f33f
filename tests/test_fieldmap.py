"""Walk order over a grid."""

from __future__ import annotations

import pytest

from layout.fieldmap import walk_cells


@pytest.mark.parametrize(
    ("walk", "expected"),
    [
        ("rows", [(1, 1), (1, 2), (1, 3), (2, 1), (2, 2), (2, 3)]),
        ("serpentine", [(1, 1), (1, 2), (1, 3), (2, 3), (2, 2), (2, 1)]),
    ],
)
def test_walk_cells(walk: str, expected: list[tuple[int, int]]) -> None:
    """rows reads left to right; serpentine turns back on every second row."""
    assert walk_cells(2, 3, walk) == expected  # type: ignore[arg-type]
