"""The rows and columns people fill in: one row per slot and round, in collection order.

Shared by the workbook and the printed sheets so both list the same rows in the same order.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Final

from layout.names import STRUCTURE_COLUMNS, TRAILING_COLUMNS
from layout.plan import Plan, Unit
from layout.spec import Response

STRUCTURE: Final = tuple(c for c in STRUCTURE_COLUMNS if c != "treatment")
TRAILING: Final = TRAILING_COLUMNS


@dataclass(frozen=True)
class EntryRow:
    """One line of the entry sheet."""

    code: str
    unit: Unit
    subsample: int
    round: str


def structure_columns(plan: Plan) -> list[str]:
    """Structure column headers; treatment only when the study is not blind."""
    cols = list(STRUCTURE)
    if not plan.spec.study.blind:
        cols.append("treatment")
    return cols


def headers(plan: Plan) -> list[str]:
    """The full header row of the entry sheet."""
    return structure_columns(plan) + [r.header for r in plan.spec.response] + list(TRAILING)


def entry_rows(plan: Plan) -> list[EntryRow]:
    """Every slot in every round, rounds in spec order, units in the round's order."""
    rows: list[EntryRow] = []
    for rnd in plan.rounds:
        for code in rnd.order:
            unit = plan.unit_by_code[code]
            rows += [EntryRow(s.code, unit, s.subsample, rnd.name) for s in plan.slots_of[code]]
    return rows


def structure_values(plan: Plan, row: EntryRow) -> list[object]:
    """The structure cells of one row, in header order."""
    u = row.unit
    values: list[object] = [row.code, u.code, u.block, u.row, u.col, row.subsample, row.round]
    if not plan.spec.study.blind:
        values.append(u.treatment)
    return values


def allowed_text(r: Response) -> str:
    """What a response accepts, in words (kept here for the outputs that import it)."""
    return r.allowed_text
