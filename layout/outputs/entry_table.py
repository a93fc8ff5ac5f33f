"""The rows and columns people fill in: one row per slot and round, in collection order.

Shared by the workbook and the printed sheets so both list the same rows in the same order.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from functools import lru_cache
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
    """Structure columns the design fills: no block without blocks, no row and col without a grid, no treatment when blind."""
    return list(_structure_columns(plan))


@lru_cache(maxsize=16)  # asked once per row of the sheet; a Plan hashes by identity
def _structure_columns(plan: Plan) -> tuple[str, ...]:
    cols = list(STRUCTURE)
    if all(u.block is None for u in plan.units):
        cols.remove("block")
    if all(u.row is None for u in plan.units):
        cols.remove("row")
        cols.remove("col")
    if not plan.spec.study.blind:
        cols.append("treatment")
    return tuple(cols)


def shown_header(plan: Plan, name: str) -> str:
    """A structure column's header with the study's own noun beside it: 'unit (pot)', 'subsample (seedling)'."""
    d = plan.spec.design
    noun = {"unit": d.unit_name, "subsample": d.subsample_name}.get(name)
    return f"{name} ({noun})" if noun and noun.lower() != name else name


def headers(plan: Plan) -> list[str]:
    """The full header row of the entry sheet."""
    return (
        [shown_header(plan, c) for c in structure_columns(plan)]
        + [r.header for r in plan.spec.response]
        + list(TRAILING)
    )


@dataclass(frozen=True)
class Part:
    """One round or one block of the plan, for a copy of the sheets that one person fills."""

    by: str  # "round" or "block"
    value: str | int
    slug: str  # for file names: entry-<slug>.xlsx

    def holds(self, row: EntryRow) -> bool:
        """Whether a row of the entry sheet belongs to this part."""
        return (row.round if self.by == "round" else row.unit.block) == self.value


def parts(plan: Plan, split: str) -> list[Part]:
    """The rounds or blocks of a plan as parts with file-safe, distinct names."""
    if split == "round":
        values: list[str | int] = [r.name for r in plan.rounds]
        slugs = [re.sub(r"[^A-Za-z0-9._-]+", "_", str(v)).strip("._") or "round" for v in values]
    else:
        values = sorted({u.block for u in plan.units if u.block is not None})
        slugs = [f"block{v}" for v in values]
    seen: dict[str, int] = {}
    out = []
    for value, slug in zip(values, slugs, strict=True):
        seen[slug] = seen.get(slug, 0) + 1
        out.append(Part(split, value, slug if seen[slug] == 1 else f"{slug}-{seen[slug]}"))
    return out


def entry_rows(plan: Plan, part: Part | None = None) -> list[EntryRow]:
    """Every slot in every round (or in one part), rounds in spec order, units in the round's order."""
    rows: list[EntryRow] = []
    for rnd in plan.rounds:
        for code in rnd.order:
            unit = plan.unit_by_code[code]
            rows += [EntryRow(s.code, unit, s.subsample, rnd.name) for s in plan.slots_of[code]]
    return [r for r in rows if part is None or part.holds(r)]


def structure_values(plan: Plan, row: EntryRow) -> list[object]:
    """The structure cells of one row, in header order."""
    u = row.unit
    every = {
        "code": row.code,
        "unit": u.code,
        "block": u.block,
        "row": u.row,
        "col": u.col,
        "subsample": row.subsample,
        "round": row.round,
        "treatment": u.treatment,
    }
    return [every[c] for c in _structure_columns(plan)]


def allowed_text(r: Response) -> str:
    """What a response accepts, in words (kept here for the outputs that import it)."""
    return r.allowed_text
