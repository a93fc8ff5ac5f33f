"""The rows and columns people fill in: one row per slot and round, in collection order.

Shared by the workbook and the printed sheets so both list the same rows in the same order.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Final

from layout.plan import Plan, Unit
from layout.spec import Response

STRUCTURE: Final = ("code", "unit", "block", "row", "col", "subsample", "round")
TRAILING: Final = ("missing_reason", "note")


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
    slots_of: dict[str, list[tuple[str, int]]] = {}
    for s in plan.slots:
        slots_of.setdefault(s.unit, []).append((s.code, s.subsample))
    rows: list[EntryRow] = []
    for rnd in plan.rounds:
        for code in rnd.order:
            unit = plan.unit_by_code[code]
            rows += [EntryRow(slot, unit, sub, rnd.name) for slot, sub in slots_of[code]]
    return rows


def structure_values(plan: Plan, row: EntryRow) -> list[object]:
    """The structure cells of one row, in header order."""
    u = row.unit
    values: list[object] = [row.code, u.code, u.block, u.row, u.col, row.subsample, row.round]
    if not plan.spec.study.blind:
        values.append(u.treatment)
    return values


def allowed_text(r: Response) -> str:
    """What a response accepts, in words, for input messages and sheet headers."""
    if r.kind in ("number", "integer"):
        unit = f" {r.unit}" if r.unit else ""
        if r.min is not None and r.max is not None:
            rng = f"{r.min:g} to {r.max:g}{unit}"
        elif r.min is not None:
            rng = f"at least {r.min:g}{unit}"
        elif r.max is not None:
            rng = f"at most {r.max:g}{unit}"
        else:
            rng = f"any value{unit}"
        if r.kind == "integer":
            return f"whole number, {rng}"
        if r.decimals is None:
            return f"number, {rng}"
        places = "no decimals" if r.decimals == 0 else f"{r.decimals} decimal{'s' if r.decimals > 1 else ''}"
        return f"number, {rng}, {places}"
    if r.kind == "category":
        return "one of: " + ", ".join(r.levels or ())
    if r.kind == "date":
        return "date, YYYY-MM-DD"
    return "free text"
