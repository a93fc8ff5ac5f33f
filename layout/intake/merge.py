"""Bring the entries of every file together: one per slot and round, or a finding saying why not."""

from __future__ import annotations

from layout.intake.findings import Finding, Kind, finding
from layout.intake.rows import Entry
from layout.plan import Plan


def _signature(e: Entry) -> tuple[object, ...]:
    # parsed values where they parsed (217 and "217.0" agree), the typed text where they did not
    cells = {name: e.values.get(name, text) for name, text in e.raw.items()}
    return (tuple(sorted((k, str(v)) for k, v in cells.items())), e.reason)


def _shown(e: Entry, name: str) -> str:
    from layout.intake.findings import show_value

    return show_value(e.values[name]) if name in e.values else e.raw.get(name, "")


def merge_entries(
    plan: Plan, entries: list[Entry]
) -> tuple[dict[tuple[str, str], Entry], set[tuple[str, str]], list[Finding]]:
    """The kept entry per (slot, round), the keys in conflict, and the findings of merging."""
    kept: dict[tuple[str, str], Entry] = {}
    conflicts: set[tuple[str, str]] = set()
    found: list[Finding] = []
    for e in entries:
        key = (e.slot.code, e.round)
        first = kept.get(key)
        if first is None:
            kept[key] = e
            continue
        where = {"file": e.file, "row": e.row, "code": e.slot.code, "unit": e.slot.unit}
        other = f"{first.file} row {first.row}"
        if _signature(first) == _signature(e):
            found.append(
                finding(
                    Kind.DUPLICATE_SLOT,
                    f"{e.slot.code} round {e.round} is entered again, with the same values as {other}",
                    **where,
                )
            )
            continue
        conflicts.add(key)
        diffs = [name for name in sorted(set(first.raw) | set(e.raw)) if _shown(first, name) != _shown(e, name)]
        if first.reason != e.reason:
            diffs.append("missing_reason")
        column = diffs[0] if diffs else None
        a = (_shown(first, column) if column != "missing_reason" else first.reason or "") if column else ""
        b = (_shown(e, column) if column != "missing_reason" else e.reason or "") if column else ""
        found.append(
            finding(
                Kind.CONFLICTING_SLOT,
                f"{e.slot.code} round {e.round} has different values here and in {other} ({', '.join(diffs)}): "
                f"{a or 'blank'!s} there, {b or 'blank'!s} here",
                column=column,
                value=f"{a} | {b}",
                suggestion=f"keep one of: {other}, {e.file} row {e.row}",
                **where,
            )
        )
    return kept, conflicts, found


def missing_slots(plan: Plan, kept: dict[tuple[str, str], Entry]) -> list[Finding]:
    """missing-unit when every slot of a unit is absent in a round, else missing-slot per absent slot."""
    found: list[Finding] = []
    slots_of: dict[str, list[str]] = {}
    for s in plan.slots:
        slots_of.setdefault(s.unit, []).append(s.code)
    for rnd in plan.rounds:
        for u in plan.units:
            absent = [c for c in slots_of[u.code] if (c, rnd.name) not in kept]
            if not absent:
                continue
            if len(absent) == len(slots_of[u.code]):
                found.append(
                    finding(
                        Kind.MISSING_UNIT,
                        f"{plan.spec.design.unit_name} {u.code}: none of its "
                        f"{len(absent)} slots is in any file for round {rnd.name}",
                        code=u.code,
                        unit=u.code,
                    )
                )
            else:
                for c in absent:
                    found.append(
                        finding(
                            Kind.MISSING_SLOT, f"{c} (round {rnd.name}) is in no returned file", code=c, unit=u.code
                        )
                    )
    return found
