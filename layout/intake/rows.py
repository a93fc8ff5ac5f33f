"""Check every returned row against the plan: its code, its place, and each value."""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property
from typing import Any

import numpy as np
import pandas as pd

from layout.codes import CodeParts, compact, index_codes, parse_code, serial_width, subsample_width, suggest
from layout.intake.columns import Columns
from layout.intake.findings import Finding, Kind, Severity, finding, show_value
from layout.intake.readers import ReturnedTable
from layout.intake.values import close_to, excess_decimals, is_blank, parse
from layout.plan import Plan, Slot, Unit


@dataclass(slots=True)  # one per row or slot: slots make them smaller and quicker
class Entry:
    """What one returned row says about one slot in one round."""

    slot: Slot
    round: str
    values: dict[str, Any]
    reason: str | None
    note: str | None
    extras: dict[str, Any]
    file: str
    row: int
    errors: int = 0
    raw: dict[str, str] = field(default_factory=dict)  # response → the cell as typed ("" when blank)
    rejected: dict[str, str] = field(default_factory=dict)  # response → typed text that is not a valid value
    fixes: list[str] = field(default_factory=list)  # ids of the approved fixes that shaped this row

    @property
    def filled(self) -> bool:
        """Whether the row says anything about the slot: a response cell or a missing reason."""
        return bool(self.reason) or any(self.raw.values())


@dataclass(slots=True)  # one per row or slot: slots make them smaller and quicker
class Unmatched:
    """A row that could not be placed in the plan; kept so no entered value is lost."""

    code: str
    cells: dict[str, str]
    file: str
    row: int
    why: str
    fixes: list[str] = field(default_factory=list)


def code_lengths(plan: Plan) -> tuple[int, int]:
    """The lengths of the plan's slot and unit serial parts, as parse_code takes them."""
    width = serial_width(len(plan.units))
    return width + subsample_width(plan.spec.design.most_subsamples), width


class PlanIndex:
    """Look-ups into a plan for matching rows, built once per check."""

    def __init__(self, plan: Plan) -> None:
        self.plan = plan
        self.rounds = {r.name.lower(): r.name for r in plan.rounds}
        self.responses = {r.name: r for r in plan.spec.response}
        self.reasons = {m.lower(): m for m in plan.spec.collection.missing_reasons}
        self.study = plan.spec.study.id
        self.lengths = code_lengths(plan)
        self._planned_columns: dict[str, tuple[np.ndarray, np.ndarray]] = {}
        self._planned_rows: dict[tuple[str, ...], Any] = {}

    @cached_property
    def slot_by_code(self) -> dict[str, Slot]:
        """Slots by code: for rows checked one by one (rows in columns use slot_lookup)."""
        return {s.code: s for s in self.plan.slots}

    # the indexes of codes as people type them are needed only for a row whose code is not exact: made then
    @cached_property
    def slots(self) -> dict[str, str]:
        """Slot codes by their compact form (no separators, upper case)."""
        return index_codes(s.code for s in self.plan.slots)

    @cached_property
    def units(self) -> dict[str, str]:
        """Unit codes by their compact form."""
        return index_codes(u.code for u in self.plan.units)

    @cached_property
    def by_unit_sub(self) -> dict[tuple[str, int], Slot]:
        return {(s.unit, s.subsample): s for s in self.plan.slots}

    @cached_property
    def round_number(self) -> dict[str, int]:
        """Each round name's place in plan.rounds."""
        return {r.name: k for k, r in enumerate(self.plan.rounds)}

    @cached_property
    def slot_number(self) -> dict[str, int]:
        """Each slot code's place in plan.slots."""
        return {s.code: k for k, s in enumerate(self.plan.slots)}

    @cached_property
    def slot_lookup(self) -> pd.Index:
        """The slot codes as a pandas index: a column of cells looked up in one call (a hash table in C)."""
        index = pd.Index(self.slot_codes, dtype=object)
        index.get_indexer(self.slot_codes[:1])  # its hash table is built on first use: now
        return index

    @cached_property
    def slot_codes(self) -> np.ndarray:
        """The slot codes in plan order, as an array to pick from."""
        return np.array([s.code for s in self.plan.slots], dtype=object)

    @cached_property
    def unit_of_slot(self) -> np.ndarray:
        """Each slot's unit, as its place in plan.units."""
        place = {u.code: k for k, u in enumerate(self.plan.units)}
        return np.array([place[s.unit] for s in self.plan.slots], dtype=np.int64)

    @cached_property
    def subsample_of_slot(self) -> np.ndarray:
        """Each slot's subsample number (Python ints, to compare with cells as they are)."""
        return np.array([s.subsample for s in self.plan.slots], dtype=object)

    @cached_property
    def subsample_text(self) -> np.ndarray:
        return np.array([str(s.subsample) for s in self.plan.slots], dtype=object)

    def planned_column(self, name: str) -> tuple[np.ndarray, np.ndarray]:
        """A structure column's planned value per unit, as a workbook cell and as CSV text (see planned_cell)."""
        if name not in self._planned_columns:
            units = self.plan.units
            planned = [u.code for u in units] if name == "unit" else [getattr(u, name) for u in units]
            written = np.empty(len(planned), dtype=object)
            typed = np.empty(len(planned), dtype=object)
            if any(type(v) is int for v in planned):  # as planned_cell: a number is a float cell or its text
                written[:] = [float(v) if type(v) is int else v for v in planned]
                typed[:] = [str(v) if type(v) is int else v for v in planned]
            else:
                written[:] = typed[:] = planned
            self._planned_columns[name] = (written, typed)
        return self._planned_columns[name]

    def planned_rows(self, names: tuple[str, ...]) -> tuple[dict[str, Any], dict[str, Any], dict[str, Any]]:
        """Per unit code: the (cell, text) pairs of these structure columns, the cells, and the texts."""
        if names not in self._planned_rows:
            planned = {u.code: tuple(planned_cell(u, name) for name in names) for u in self.plan.units}
            written = {code: tuple(w for w, _ in p) for code, p in planned.items()}
            typed = {code: tuple(t for _, t in p) for code, p in planned.items()}
            self._planned_rows[names] = (planned, written, typed)
        return self._planned_rows[names]

    def warm(self) -> None:
        """Build now what a check of returns in columns looks up, while the returns are still being read."""
        for name in ("slot_number", "slot_lookup", "unit_of_slot", "subsample_of_slot", "round_number"):
            getattr(self, name)
        for name in ("unit", "block", "row", "col", "treatment"):
            self.planned_column(name)

    def parse(self, text: str) -> CodeParts | None:
        """A typed code taken apart with this plan's study id and widths."""
        return parse_code(text, self.study, self.lengths)


def planned_cell(unit: Unit, name: str) -> tuple[Any, Any]:
    """The planned value of a structure column as a workbook cell (numbers read as floats) and as CSV text."""
    value = unit.code if name == "unit" else getattr(unit, name)  # block, row, col, treatment
    if isinstance(value, int):
        return float(value), str(value)
    return value, value


def cell_text(cell: Any) -> str:
    """A cell as the text a person typed: stripped, whole floats without '.0', blank as ''."""
    t = type(cell)  # the common types first: this runs for every cell of every row
    if t is str:
        return cell.strip()
    if cell is None:
        return ""
    if t is float and cell.is_integer():
        return str(int(cell))
    return "" if is_blank(cell) else show_value(cell).strip()


def _same(column: str, cell: Any, planned: Any) -> bool:
    """Whether a structure cell agrees with the plan; a cleared cell is harmless (the code says where the row belongs)."""
    if (type(cell) is float or type(cell) is int) and type(planned) is int:
        return cell == planned
    if is_blank(cell):
        return True
    if planned is None:
        return False
    if column == "unit":
        return cell == planned or compact(str(cell)) == compact(str(planned))
    if isinstance(planned, int):
        try:
            return float(str(cell).strip().replace(",", ".")) == planned
        except ValueError:
            return False
    return str(cell).strip().casefold() == str(planned).casefold()


def _round_of(cells: list[Any], cols: Columns, idx: PlanIndex) -> str | None:
    if "round" not in cols.structure:
        return idx.plan.rounds[0].name if len(idx.plan.rounds) == 1 else None
    return idx.rounds.get(cell_text(cells[cols.structure["round"]]).lower())


def check_rows(
    table: ReturnedTable, cols: Columns, idx: PlanIndex, quick: bool = True
) -> tuple[list[Entry], list[Unmatched], list[Finding]]:
    """Entries for every placed row, the rows that could not be placed, and every finding.

    quick lets rows that need no finding through layout.intake.fastrows; the result is the same without it.
    """
    from layout.intake.fastrows import FastRows  # here, not above: fastrows builds on this module's Entry

    entries: list[Entry] = []
    unmatched: list[Unmatched] = []
    found: list[Finding] = []
    width = len(table.headers)
    fast = FastRows(table, cols, idx).entry if quick and table.rows else None
    for number, raw_cells in table.rows:
        if fast is not None:
            entry = fast(number, raw_cells)
            if entry is not None:
                entries.append(entry)
                continue
        cells = raw_cells if len(raw_cells) >= width else list(raw_cells) + [None] * (width - len(raw_cells))
        if all(is_blank(c) for c in cells):
            continue
        first = len(found)
        placed = _place(cells, cols, idx, {"file": table.file, "row": number}, found)
        if isinstance(placed, str):
            shown = {
                h or f"column {i + 1}": cell_text(c)
                for i, (h, c) in enumerate(zip(table.headers, cells, strict=True))
                if not is_blank(c)
            }
            unmatched.append(Unmatched(cell_text(cells[cols.structure["code"]]), shown, table.file, number, placed))
            continue
        slot, rnd = placed
        entry = Entry(slot, rnd, {}, None, None, {}, table.file, number)
        _read_values(entry, cells, cols, idx, table, found)
        entry.errors = sum(f.severity is Severity.ERROR for f in found[first:])
        entries.append(entry)
    return entries, unmatched, found


def _place(
    cells: list[Any], cols: Columns, idx: PlanIndex, at: dict[str, Any], found: list[Finding]
) -> tuple[Slot, str] | str:
    """The row's slot and round, or why it cannot be placed; findings for its code and structure cells."""
    plan = idx.plan
    code_text = cell_text(cells[cols.structure["code"]])
    if not code_text:
        hint = _code_from_place(cells, cols, idx)
        found.append(finding(Kind.BLANK_CODE, "the row has values but no code", column="code", suggestion=hint, **at))
        return "blank code"
    slot_code = code_text if code_text in idx.slot_by_code else idx.slots.get(compact(code_text))
    if slot_code is None:
        found.append(_code_finding(code_text, idx, at))
        return "code not in the plan"
    slot = idx.slot_by_code[slot_code]
    unit = plan.unit_by_code[slot.unit]
    where = {**at, "code": slot.code, "unit": unit.code}
    planned = {
        "unit": unit.code,
        "block": unit.block,
        "row": unit.row,
        "col": unit.col,
        "subsample": slot.subsample,
        "treatment": unit.treatment,
    }
    for name, i in cols.structure.items():
        if name in planned and not _same(name, cells[i], planned[name]):
            expected = show_value(planned[name]) if planned[name] is not None else "none"
            found.append(
                finding(
                    Kind.UNIT_MISMATCH,
                    f"{name} is {cell_text(cells[i])!r} but the plan has {expected} for {slot.code}",
                    column=name,
                    value=cell_text(cells[i]),
                    **where,
                )
            )
    rnd = _round_of(cells, cols, idx)
    if rnd is None:
        got = cell_text(cells[cols.structure["round"]]) if "round" in cols.structure else ""
        near = close_to(got, [r.name for r in plan.rounds]) if got else None
        found.append(
            finding(
                Kind.UNIT_MISMATCH,
                f"round {got!r} is not a round of this plan ({', '.join(r.name for r in plan.rounds)})"
                + (f"; did you mean {near!r}?" if near else ""),
                column="round",
                value=got,
                suggestion=near,
                **where,
            )
        )
        return "unknown round"
    return slot, rnd


def _code_finding(code_text: str, idx: PlanIndex, at: dict[str, Any]) -> Finding:
    """unknown-code for a code that passes its check but is no slot of the plan; bad-code (with suggestions) otherwise."""
    where = {"column": "code", "value": code_text, "code": code_text, **at}
    if compact(code_text) in idx.units:
        return finding(
            Kind.UNKNOWN_CODE, f"code {code_text!r} is a unit code; each row needs its subsample slot's code", **where
        )
    parts = idx.parse(code_text)
    salt = idx.plan.salt
    if parts is not None and parts.study != idx.study:
        meant = idx.slots.get(compact(idx.study + parts.digits + parts.letter))
        if meant is not None:
            return finding(
                Kind.BAD_CODE,
                f"code {code_text!r} has study id {parts.study!r}, but this plan's is {idx.study!r}; did you mean {meant}?",
                suggestion=meant,
                **where,
            )
        return finding(
            Kind.UNKNOWN_CODE,
            f"code {code_text!r} is of study {parts.study}, not this plan's {idx.study} (another study's sheet?)",
            suggestion=" or ".join(suggest(code_text, idx.slots)) or None,
            **where,
        )
    elif parts is not None and parts.passes(salt):
        return finding(
            Kind.UNKNOWN_CODE,
            f"code {code_text!r} passes its check but is not a slot of this plan (a unit or subsample it does not have?)",
            **where,
        )
    near = suggest(code_text, idx.slots)
    hint = " or ".join(near) if near else None
    msg = (
        f"code {code_text!r} fails its check letter (a typing or reading error)"
        if parts is not None
        else f"{code_text!r} is not a code of this plan's form ({idx.plan.slots[0].code})"
    )
    msg += f"; did you mean {hint}?" if hint else "; no planned code is one edit away"
    return finding(Kind.BAD_CODE, msg, suggestion=hint, **where)


def _read_values(
    entry: Entry, cells: list[Any], cols: Columns, idx: PlanIndex, table: ReturnedTable, found: list[Finding]
) -> None:
    """Parse the row's responses, reason, note and added cells into entry; findings for each bad cell.

    Whether a blank needs a reason is judged after merging, when every file's rows of the slot are known.
    """
    responses, reasons = idx.responses, idx.reasons
    where = {"file": table.file, "row": entry.row, "code": entry.slot.code, "unit": entry.slot.unit}
    for name, i in cols.responses.items():
        r, cell = responses[name], cells[i]
        entry.raw[name] = cell_text(cell)
        if (entry.row, i) in table.formulas:
            found.append(
                finding(
                    Kind.FORMULA_CELL,
                    f"{r.header} holds a formula; its last computed value {cell_text(cell)!r} was used",
                    column=r.header,
                    value=cell_text(cell),
                    **where,
                )
            )
        if is_blank(cell):
            continue
        p = parse(cell, r, table.decimal_comma)
        if p.problem is None:
            entry.values[name] = p.value
            extra = excess_decimals(cell, r, table.decimal_comma)
            if extra:
                found.append(
                    finding(
                        Kind.TOO_MANY_DECIMALS,
                        f"{cell_text(cell)!r} has {extra} decimals; {r.header} is recorded to {r.decimals} "
                        "(a unit or reading mistake?)",
                        column=r.header,
                        value=cell_text(cell),
                        **where,
                    )
                )
        else:
            entry.rejected[name] = cell_text(cell)
            found.append(
                finding(
                    p.problem,
                    f"{cell_text(cell)!r} {p.message}",
                    column=r.header,
                    value=cell_text(cell),
                    suggestion=p.suggestion,
                    **where,
                )
            )
    if cols.reason is not None and not is_blank(cells[cols.reason]):
        text = cell_text(cells[cols.reason])
        entry.reason = reasons.get(text.lower(), text)
        if text.lower() not in reasons:
            near = close_to(text, list(reasons.values()))
            found.append(
                finding(
                    Kind.NOT_A_LEVEL,
                    f"missing_reason {text!r} is not one of {', '.join(reasons.values())}"
                    + (f"; did you mean {near!r}?" if near else ""),
                    column="missing_reason",
                    value=text,
                    suggestion=near,
                    **where,
                )
            )
    if cols.note is not None and not is_blank(cells[cols.note]):
        entry.note = cell_text(cells[cols.note])
    entry.extras = {name: cell_text(cells[i]) for name, i in cols.extras.items() if not is_blank(cells[i])}


def _code_from_place(cells: list[Any], cols: Columns, idx: PlanIndex) -> str | None:
    """The slot code that the row's unit and subsample cells point to, if they do."""
    if "unit" not in cols.structure or "subsample" not in cols.structure:
        return None
    unit = idx.units.get(compact(cell_text(cells[cols.structure["unit"]])))
    try:
        sub = int(float(cell_text(cells[cols.structure["subsample"]])))
    except ValueError:
        return None
    slot = idx.by_unit_sub.get((unit, sub)) if unit else None
    return slot.code if slot else None
