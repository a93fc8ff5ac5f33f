"""The quick way through rows that need no finding: exact planned code, structure as planned, clean values.

Nearly every row of a large return is like that, and for those the per-cell checks of
layout.intake.rows only confirm what a few comparisons show. A row is taken here only when
every one of its cells passes a test that is stricter than the per-row path's (an exact code,
structure cells equal to the plan's, numbers of the right type inside their range and
decimals, no reason, note, added cell or formula); anything else, however harmless, is left to
the per-row path, so the findings and the entries are the same either way (tests/test_fast_path.py).
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable
from functools import cached_property
from operator import itemgetter
from typing import Any, Final

from layout.intake.columns import Columns
from layout.intake.readers import ReturnedTable
from layout.intake.rows import Entry, PlanIndex
from layout.intake.values import WHOLE_LIMIT
from layout.spec import Response

SLOW: Final = object()  # a cell the per-row path must look at
_BLANK: Final = frozenset({None, ""})

Reader = Callable[[Any], Any]  # a non-blank cell → (its value, its text as typed), or SLOW


_PLAIN = re.compile(r"-?[0-9]+(\.[0-9]+)?")  # a number as typed into a CSV, nothing to clean


def _number_reader(r: Response, decimal_comma: bool) -> Reader:
    low = -math.inf if r.min is None else float(r.min)
    high = math.inf if r.max is None else float(r.max)
    integer = r.kind == "integer"
    places = None if integer or r.decimals is None else r.decimals

    def read(cell: Any) -> Any:
        if type(cell) is str:  # CSV text: plain decimals only, and no decimal comma to undo
            if decimal_comma or not _PLAIN.fullmatch(cell):
                return SLOW
            x, text = float(cell), cell
            if places is not None and "." in cell and len(cell.split(".", 1)[1].rstrip("0")) > places:
                return SLOW
        elif type(cell) is float:
            x = cell
            # round(x, d) == x exactly when x's shortest repr has at most d decimals: no excess decimals
            if places is not None and round(x, places) != x:
                return SLOW
            text = str(int(x)) if x.is_integer() else repr(x)  # as layout.intake.rows.cell_text shows it
        else:
            return SLOW
        if not low <= x <= high:  # NaN and infinities fail here too
            return SLOW
        if integer:
            return (int(x), text) if x.is_integer() and -WHOLE_LIMIT < x < WHOLE_LIMIT else SLOW
        return x, text

    return read


def _level_reader(r: Response) -> Reader:
    levels: dict[str, str] = {}
    for level in r.levels or ():  # the per-row path takes the first level equal but for case
        levels.setdefault(level, next(lv for lv in r.levels or () if lv.lower() == level.lower()))

    def read(cell: Any) -> Any:
        level = levels.get(cell) if type(cell) is str else None
        return SLOW if level is None else (level, cell)

    return read


def _reader(r: Response, decimal_comma: bool) -> Reader | None:
    if r.kind in ("number", "integer"):
        return _number_reader(r, decimal_comma)
    if r.kind == "category":
        return _level_reader(r)
    return None  # text and dates: the per-row path


class FastRows:
    """Entries for the clean rows of one returned table; None for a row the per-row path must see."""

    def __init__(self, table: ReturnedTable, cols: Columns, idx: PlanIndex) -> None:
        plan = idx.plan
        self.file = table.file
        self.code_at = cols.structure["code"]
        self.round_at = cols.structure.get("round")
        self.rounds = {r.name: r.name for r in plan.rounds}
        self.only_round = plan.rounds[0].name if len(plan.rounds) == 1 else None
        self.width = len(table.headers)
        checked = [name for name in ("unit", "block", "row", "col", "treatment") if name in cols.structure]
        self.checked = checked
        self.structure = [cols.structure[name] for name in checked]
        self.subsample_at = cols.structure.get("subsample")
        self._idx = idx
        self.responses = []
        self.response_of = idx.responses
        for name, i in cols.responses.items():
            read = _reader(idx.responses[name], table.decimal_comma)
            self.responses.append((name, i, read))
        self.quiet_at = [i for i in (cols.reason, cols.note, *cols.extras.values()) if i is not None]
        self.quiet = _getter(self.quiet_at)
        self.formula_rows = {row for row, _ in table.formulas}
        self.structure_cells = _getter(self.structure)

    @cached_property
    def _planned(self) -> tuple[dict[str, Any], dict[str, Any], dict[str, Any]]:
        """Each unit's structure cells as the entry workbook writes them: only when a row is looked at here."""
        return self._idx.planned_rows(tuple(self.checked))

    def entry(self, number: int, cells: list[Any]) -> Entry | None:
        """The row's entry when it passes every quick test, else None."""
        if len(cells) < self.width or number in self.formula_rows:
            return None
        slot = self._idx.slot_by_code.get(cells[self.code_at])
        if slot is None:
            return None
        got = self.structure_cells(cells)
        planned, as_written, as_typed = self._planned
        if got != as_written[slot.unit] and got != as_typed[slot.unit]:
            for cell, (want, typed) in zip(got, planned[slot.unit], strict=True):  # a CSV may mix the two
                if cell != want and cell != typed:
                    return None
        if bool in set(map(type, got)):  # True == 1.0, but a ticked box is no block number
            return None
        if self.subsample_at is not None:
            cell = cells[self.subsample_at]
            if (cell != slot.subsample and cell != str(slot.subsample)) or type(cell) is bool:
                return None
        if self.round_at is None:
            rnd = self.only_round
        else:
            rnd = self.rounds.get(cells[self.round_at])
        if rnd is None:
            return None
        if not set(self.quiet(cells)) <= _BLANK:
            return None
        values: dict[str, Any] = {}
        raw: dict[str, str] = {}
        for name, i, read in self.responses:
            cell = cells[i]
            if cell is None or cell == "":
                raw[name] = ""
                continue
            parsed = SLOW if read is None else read(cell)
            if parsed is SLOW:
                return None
            values[name], raw[name] = parsed
        return Entry(slot, rnd, values, None, None, {}, self.file, number, 0, raw)


def _getter(indexes: list[int]) -> Callable[[list[Any]], tuple[Any, ...]]:
    """The cells at these indexes as a tuple, taken in one call."""
    if len(indexes) == 1:
        only = indexes[0]
        return lambda cells: (cells[only],)
    return itemgetter(*indexes) if indexes else lambda cells: ()
