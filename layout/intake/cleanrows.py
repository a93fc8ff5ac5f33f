"""Clean rows in columns: the rows of a return that fill every required response and need no finding, as arrays.

Nearly every row of a large return is clean, and for those an Entry per row (and a Merged per
slot after it) only costs time. take_clean tests a whole table column by column with the same
tests as layout.intake.fastrows (the rows it takes are exactly the rows FastRows.entry accepts
with every required response filled), and keeps those rows as arrays in a CleanBlock. Every other row
stays in the table for layout.intake.rows, as before. A clean row that turns out to share its
slot and round with another row is turned back into the Entry FastRows makes (CleanBlock.entry),
so merging sees it as it always did (tests/test_fast_path.py).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace
from itertools import repeat
from typing import Any

import numpy as np

from layout.intake.columns import Columns
from layout.intake.fastrows import SLOW, FastRows
from layout.intake.readers import ReturnedTable
from layout.intake.rows import Entry, PlanIndex
from layout.intake.values import WHOLE_LIMIT

_QUIET = frozenset({None, ""})


@dataclass
class CleanBlock:
    """The clean rows of one file: where they are, whose slot and round, and their values."""

    file: str
    numbers: np.ndarray  # spreadsheet row numbers
    slots: np.ndarray  # index into plan.slots
    rounds: np.ndarray  # index into plan.rounds
    values: dict[str, np.ndarray]  # response → one value per row (float64, int64, or object for levels)
    has: dict[str, np.ndarray]  # response → whether the row fills it (an optional response may be blank)
    cells: list[list[Any]]  # the rows as read, to make an Entry of one when it must be merged with others
    fast: FastRows

    def __len__(self) -> int:
        return len(self.numbers)

    def entry(self, k: int) -> Entry:
        """Row k as the Entry the per-row path makes of it."""
        e = self.fast.entry(int(self.numbers[k]), self.cells[k])
        assert e is not None, "a clean row is one FastRows takes"
        return e


def _columns(cells: Sequence[list[Any]], width: int, lengths: set[int]) -> list[Sequence[Any]]:
    """The table's first `width` columns; a short row's missing cells are None (such a row is not clean)."""
    if len(lengths) == 1 and min(lengths) >= width:
        return list(zip(*cells, strict=True))  # one transposition in C
    return [[c[i] if len(c) > i else None for c in cells] for i in range(width)]


def _read_numbers(column: list[Any], fast: FastRows, name: str) -> tuple[np.ndarray, np.ndarray] | None:
    """(values, ok) for a column of plain floats, as FastRows' number reader would take them; None otherwise."""
    if set(map(type, column)) != {float}:  # blanks, text (a CSV) or odd cells: cell by cell
        return None
    r = fast.response_of[name]
    x = np.array(column, dtype=float)
    low = -np.inf if r.min is None else float(r.min)
    high = np.inf if r.max is None else float(r.max)
    with np.errstate(invalid="ignore"):
        ok = (x >= low) & (x <= high)  # NaN fails here, as in the reader
    if r.kind == "integer":
        ok &= (np.abs(x) < WHOLE_LIMIT) & (np.floor(x) == x)  # whole, and held by an int64 (infinities fail)
        return np.where(ok, x, 0).astype(np.int64), ok
    if r.decimals is not None:
        ok &= has_decimals(x, column, r.decimals)
    return x, ok


def has_decimals(x: np.ndarray, column: Sequence[float], places: int) -> np.ndarray:
    """Per value, round(value, places) == value (Python's round, as FastRows' reader: correctly rounded).

    numpy's rint(x·10ᵈ)/10ᵈ gives the same answer while |x|·10ᵈ < 2⁵⁰: x·10ᵈ is then within a unit in the last
    place of a whole k (when x is the double nearest k/10ᵈ) and rint finds k, and the division is correctly
    rounded, so both say whether x is the double nearest some k/10ᵈ. Larger values go through Python's round
    (tested against it on random floats).
    """
    if places > 15:
        return np.fromiter(map(round, column, repeat(places)), float, len(column)) == x
    scale = 10.0**places
    with np.errstate(invalid="ignore", over="ignore"):
        out = np.rint(x * scale) / scale == x
        large = ~(np.abs(x) * scale < 2.0**50)  # NaN counts as large: Python decides
    for k in np.flatnonzero(large).tolist():
        out[k] = round(column[k], places) == column[k]
    return out


def _read_cells(column: list[Any], read: Any) -> tuple[list[Any], np.ndarray]:
    """(values, ok) cell by cell with FastRows' reader; a blank cell is not ok here, its value None."""
    values: list[Any] = []
    ok = np.zeros(len(column), dtype=bool)
    for k, cell in enumerate(column):
        parsed = SLOW if cell is None or cell == "" or read is None else read(cell)
        if parsed is SLOW:
            values.append(None)
            continue
        values.append(parsed[0])
        ok[k] = True
    return values, ok


def take_clean(
    table: ReturnedTable, cols: Columns, idx: PlanIndex, skip: set[int] | frozenset[int] = frozenset()
) -> tuple[CleanBlock | None, ReturnedTable]:
    """The clean, fully filled rows of table as a CleanBlock, and the table of every other row.

    skip: row numbers that must go the per-row way (rows a fix changed or a keep-this fix names).
    """
    plan = idx.plan
    rows = table.rows
    if not rows or set(cols.responses) != set(idx.responses):  # a file without some response: per row
        return None, table
    fast = FastRows(table, cols, idx)
    numbers, cells = zip(*rows, strict=True)
    width = fast.width
    lengths = set(map(len, cells))
    ragged = min(lengths) < width
    ok = np.ones(len(rows), dtype=bool)
    if ragged:
        ok &= np.fromiter((len(c) >= width for c in cells), bool, len(cells))
    bad_rows = fast.formula_rows | set(skip)
    if bad_rows:
        ok &= np.fromiter((n not in bad_rows for n in numbers), bool, len(numbers))
    columns = _columns(cells, width, lengths)
    codes = np.empty(len(cells), dtype=object)
    codes[:] = columns[fast.code_at]
    slot = idx.slot_lookup.get_indexer(codes).astype(np.int64)  # -1 where the cell is no planned code
    ok &= slot >= 0
    slot = np.where(ok, slot, 0)
    unit = idx.unit_of_slot[slot]
    for name, i in zip(fast.checked, fast.structure, strict=True):
        column = columns[i]
        written, typed = idx.planned_column(name)
        got = np.array(column, dtype=object)
        with np.errstate(all="ignore"):
            same = got == written[unit]
            if not same[ok].all():  # a CSV: the planned text, or a mix of the two
                same |= got == typed[unit]
        ok &= same
        if bool in set(map(type, column)):  # True == 1.0, but a ticked box is no block number
            ok &= np.fromiter((type(c) is not bool for c in column), bool, len(column))
    if fast.subsample_at is not None:
        column = columns[fast.subsample_at]
        sub = idx.subsample_of_slot[slot]
        got = np.array(column, dtype=object)
        same = got == sub
        if not same[ok].all():
            same |= got == idx.subsample_text[slot]
        ok &= same
        if bool in set(map(type, column)):
            ok &= np.fromiter((type(c) is not bool for c in column), bool, len(column))
    round_no = {r.name: k for k, r in enumerate(plan.rounds)}
    if fast.round_at is None:
        rnd = np.zeros(len(cells), dtype=np.int64)
        if fast.only_round is None:
            ok[:] = False
    else:
        column = columns[fast.round_at]
        named = set(column)
        if len(named) == 1:  # one round per file, as people usually return them: one look-up
            rnd = np.full(len(cells), round_no.get(named.pop(), -1), dtype=np.int64)
        else:
            rnd = np.fromiter(map(round_no.get, column, repeat(-1)), np.int64, len(cells))
        ok &= rnd >= 0
    for i in fast.quiet_at:
        column = columns[i]
        if not set(column) <= _QUIET:
            ok &= np.fromiter((c is None or c == "" for c in column), bool, len(column))
    values: dict[str, Any] = {}
    has: dict[str, np.ndarray] = {}
    for name, i, read in fast.responses:
        r = fast.response_of[name]
        column = columns[i]
        numeric = _read_numbers(column, fast, name) if r.kind in ("number", "integer") else None
        values[name], has[name] = numeric if numeric is not None else _read_cells(column, read)
        if r.required:
            ok &= has[name]
        elif not has[name].all():  # an optional response may be left blank in a clean row; typed must read cleanly
            ok &= has[name] | np.fromiter((c is None or c == "" for c in column), bool, len(column))
    if not ok.any():
        return None, table
    every = bool(ok.all())
    take = np.flatnonzero(ok)
    kept = list(cells) if every else [cells[k] for k in take.tolist()]
    block = CleanBlock(
        table.file,
        np.array(numbers, dtype=np.int64)[take],
        slot[take],
        rnd[take],
        {name: _pick(v, take, idx.responses[name].kind) for name, v in values.items()},
        {name: h[take] for name, h in has.items()},
        kept,
        fast,
    )
    rest = [] if every else [row for row, clean in zip(rows, ok.tolist(), strict=True) if not clean]
    return block, replace(table, rows=rest)


def _pick(values: Any, take: np.ndarray, kind: str) -> np.ndarray:
    """The taken rows' values, as floats, whole numbers or (levels) objects."""
    if isinstance(values, np.ndarray):
        return values[take]
    picked = [values[k] for k in take.tolist()]
    if kind in ("number", "integer"):  # a blank optional value: 0 here, and not had
        return np.array([0 if v is None else v for v in picked], dtype=float if kind == "number" else np.int64)
    return np.array(picked, dtype=object)
