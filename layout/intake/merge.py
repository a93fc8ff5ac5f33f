"""Bring every file's rows of a slot together, cell by cell, then judge what is still missing.

A row whose response cells are all blank and that gives no reason is "not filled here": it
never conflicts with the same slot filled in another file and never hides that file's
values (people fill their own copies by round or by block). A file without a response
column says nothing about that response. Two rows conflict only on a cell filled in both
with different values; a second row with the same values is a duplicate. Notes and added
cells of every row are kept.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from layout.intake.findings import Finding, Kind, finding, show_value
from layout.intake.rows import Entry, PlanIndex
from layout.plan import Plan, Slot

Key = tuple[str, str]  # (slot code, round)


@dataclass(slots=True)  # one per row or slot: slots make them smaller and quicker
class Merged:
    """All that the returned rows say about one slot in one round."""

    slot: Slot
    round: str
    values: dict[str, Any] = field(default_factory=dict)
    reason: str | None = None
    notes: list[str] = field(default_factory=list)
    extras: dict[str, str] = field(default_factory=dict)
    rejected: dict[str, str] = field(default_factory=dict)  # response → typed text that was refused
    seen: set[str] = field(default_factory=set)  # responses some row had a column for
    rows: list[Entry] = field(default_factory=list)  # the rows that filled something, first first
    blank_rows: list[Entry] = field(default_factory=list)
    conflict: dict[str, list[str]] = field(default_factory=dict)  # response or missing_reason → the differing texts
    errors: int = 0

    @property
    def note(self) -> str | None:
        return " | ".join(self.notes) if self.notes else None

    @property
    def anchor(self) -> Entry:
        """The row findings about the merged slot point to."""
        return (self.rows or self.blank_rows)[0]


def _cell(e: Entry, name: str) -> str:
    """A filled cell as compared: the parsed value where it parsed (217 and '217.0' agree), else the text."""
    return show_value(e.values[name]) if name in e.values else e.raw.get(name, "")


def merge_entries(plan: Plan, entries: list[Entry], quick: bool = True) -> tuple[dict[Key, Merged], list[Finding]]:
    """One Merged per (slot, round) that any row names, and the findings of bringing rows together.

    quick builds the Merged of a slot's first filled row (without note or added cells) in one step; the same
    result as the general way (tests/test_fast_path.py).
    """
    merged: dict[Key, Merged] = {}
    found: list[Finding] = []
    for e in entries:
        key = (e.slot.code, e.round)
        m = merged.get(key)
        if quick and m is None and not e.note and not e.extras and e.filled:
            # the first row of a slot, and the usual one: what _take would copy into an empty Merged
            merged[key] = Merged(
                e.slot, e.round, dict(e.values), e.reason, [], {}, dict(e.rejected), set(e.raw), [e], errors=e.errors
            )
            continue
        if m is None:
            m = merged[key] = Merged(e.slot, e.round)
        m.seen.update(e.raw)
        if e.note and e.note not in m.notes:
            m.notes.append(e.note)
        for k, v in e.extras.items():
            m.extras[k] = v if k not in m.extras or m.extras[k] == v else f"{m.extras[k]} | {v}"
        if not e.filled:
            m.blank_rows.append(e)
            continue
        if m.rows:
            found += _compare(m, e)
        _take(m, e)
    return merged, found


def _take(m: Merged, e: Entry) -> None:
    """Fill the slot's empty cells from row e."""
    for name, text in e.raw.items():
        if not text or name in m.conflict:
            continue
        if name in e.values and name not in m.values and name not in m.rejected:
            m.values[name] = e.values[name]
        elif name in e.rejected and name not in m.values and name not in m.rejected:
            m.rejected[name] = e.rejected[name]
    if e.reason and m.reason is None:
        m.reason = e.reason
    m.rows.append(e)
    m.errors += e.errors


def _compare(m: Merged, e: Entry) -> list[Finding]:
    """duplicate-slot or conflicting-slot for a second filled row of a slot; nothing when it only adds cells."""
    diffs: list[tuple[str, str, str]] = []
    overlap = 0
    for name, text in e.raw.items():
        if not text:
            continue
        before = next((r for r in m.rows if r.raw.get(name)), None)
        if before is None:
            continue
        overlap += 1
        a, b = _cell(before, name), _cell(e, name)
        if a != b:
            diffs.append((name, a, b))
            m.conflict.setdefault(name, [a]).append(b)
    if e.reason and m.reason:
        overlap += 1
        if e.reason != m.reason:
            diffs.append(("missing_reason", m.reason, e.reason))
            m.conflict.setdefault("missing_reason", [m.reason]).append(e.reason)
    first = m.rows[0]
    where = {"file": e.file, "row": e.row, "code": e.slot.code, "unit": e.slot.unit}
    other = f"{first.file} row {first.row}"
    if diffs:
        name, a, b = diffs[0]
        return [
            finding(
                Kind.CONFLICTING_SLOT,
                f"{e.slot.code} round {e.round} has different values here and in {other} "
                f"({', '.join(d[0] for d in diffs)}): {a or 'blank'} there, {b or 'blank'} here",
                column=name,
                value=f"{a} | {b}",
                suggestion=f"keep one of: {other}, {e.file} row {e.row}",
                **where,
            )
        ]
    adds_nothing = all(not text or any(r.raw.get(name) for r in m.rows) for name, text in e.raw.items())
    if overlap and adds_nothing and not (e.reason and not m.reason):
        return [
            finding(
                Kind.DUPLICATE_SLOT,
                f"{e.slot.code} round {e.round} is entered again, with the same values as {other}",
                **where,
            )
        ]
    return []


def completeness(plan: Plan, merged: dict[Key, Merged]) -> list[Finding]:
    """missing-value, declared-missing and reason-with-value for each slot, once every file's rows are merged."""
    responses = {r.name: r for r in plan.spec.response}
    found: list[Finding] = []
    every = len(responses)
    for m in merged.values():
        if not m.reason and len(m.values) == every:
            continue  # every response has a value and no reason is given: nothing to say (most slots)
        e = m.anchor
        where = {"file": e.file, "row": e.row, "code": m.slot.code, "unit": m.slot.unit}
        blank = [
            n for n in responses if n in m.seen and n not in m.values and n not in m.rejected and n not in m.conflict
        ]
        needed = [n for n in blank if responses[n].required]
        if m.reason:
            # the reason speaks for the blank required values (or for all, when nothing was entered)
            declared = needed or (blank if not m.values else [])
            if declared:
                found.append(
                    finding(
                        Kind.DECLARED_MISSING,
                        f"{', '.join(responses[b].header for b in declared)} missing: {m.reason}",
                        column=responses[declared[0]].header,
                        value=m.reason,
                        **where,
                    )
                )
            entered = [n for n in responses if n in m.values]
            if entered:
                found.append(
                    finding(
                        Kind.REASON_WITH_VALUE,
                        f"missing_reason {m.reason!r} is given, but {', '.join(responses[n].header for n in entered)} "
                        "has a value; the value is kept",
                        column="missing_reason",
                        value=m.reason,
                        **where,
                    )
                )
        else:
            found += [
                finding(
                    Kind.MISSING_VALUE,
                    f"{responses[n].header} is blank and no missing_reason is given",
                    column=responses[n].header,
                    **where,
                )
                for n in needed
            ]
    return found


def status(m: Merged | None, plan: Plan, required: list[str] | None = None) -> str:
    """The tidy table's status of a slot-round; required, when given, names the required responses."""
    if m is None:
        return "missing"
    if m.conflict:
        return "conflict"
    if not (m.errors or m.rejected or m.reason) and len(m.values) == len(plan.spec.response):
        return "ok"  # every response has a value (most slots)
    if required is None:
        required = [r.name for r in plan.spec.response if r.required]
    required_blank = [n for n in required if n in m.seen and n not in m.values and n not in m.rejected]
    if m.errors or m.rejected or (required_blank and not m.reason):
        return "error"
    if required_blank or (m.reason and not m.values):
        return "declared-missing"
    return "ok"


def missing_slots(idx: PlanIndex, present: np.ndarray, cause: str | None = None) -> list[Finding]:
    """missing-unit when every slot of a unit is absent in a round, else missing-slot per absent slot.

    present: per round × slots + slot, whether some row names that slot in that round. cause names the
    unusable file these may follow from, so reports can group them under it.
    """
    plan = idx.plan
    found: list[Finding] = []
    slots = len(plan.slots)
    unit_of_slot, place_of_slot = idx.unit_of_slot, idx.slot_number
    for r, rnd in enumerate(plan.rounds):
        here = present[r * slots : (r + 1) * slots]
        lacking = np.bincount(unit_of_slot[~here], minlength=len(plan.units))
        for k in np.flatnonzero(lacking).tolist():  # units in plan order, only those with an absent slot
            u = plan.units[k]
            of_unit = plan.slots_of[u.code]
            absent = [s.code for s in of_unit if not here[place_of_slot[s.code]]]
            if len(absent) == len(of_unit):
                found.append(
                    finding(
                        Kind.MISSING_UNIT,
                        f"{plan.spec.design.unit_name} {u.code}: none of its "
                        f"{len(absent)} slots is in any file for round {rnd.name}",
                        code=u.code,
                        unit=u.code,
                        cause=cause,
                    )
                )
            else:
                found += [
                    finding(
                        Kind.MISSING_SLOT,
                        f"{c} (round {rnd.name}) is in no returned file",
                        code=c,
                        unit=u.code,
                        cause=cause,
                    )
                    for c in absent
                ]
    return found
