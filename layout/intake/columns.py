"""Find each returned column's role by its header name, never by its position."""

from __future__ import annotations

from dataclasses import dataclass, field

from layout.intake.findings import Finding, Kind, Severity, finding
from layout.intake.readers import ReturnedTable
from layout.intake.values import is_blank
from layout.plan import Plan
from layout.spec import Response

STRUCTURE = ("code", "unit", "block", "row", "col", "subsample", "round", "treatment")
_ALIASES = {"missing reason": "missing_reason", "reason": "missing_reason", "notes": "note", "column": "col"}


def normal(header: object) -> str:
    """A header as compared: trimmed, lower case, single spaces."""
    return " ".join(str(header or "").strip().lower().split())


@dataclass
class Columns:
    """Column index of each role in one returned file."""

    structure: dict[str, int] = field(default_factory=dict)
    responses: dict[str, int] = field(default_factory=dict)  # response name → index
    reason: int | None = None
    note: int | None = None
    extras: dict[str, int] = field(default_factory=dict)
    absent_responses: set[str] = field(default_factory=set)


def map_columns(table: ReturnedTable, plan: Plan) -> tuple[Columns, list[Finding]]:
    """The roles of the file's columns, and findings for missing and added ones."""
    blind = plan.spec.study.blind
    structure = [s for s in STRUCTURE if not (blind and s == "treatment")]
    by_header: dict[str, tuple[str, object]] = {s: ("structure", s) for s in structure}
    for r in plan.spec.response:
        by_header[normal(r.header)] = ("response", r)
        by_header.setdefault(normal(r.name), ("response", r))
    by_header["missing_reason"] = ("reason", None)
    by_header["note"] = ("note", None)
    cols = Columns()
    found: list[Finding] = []
    taken: set[str] = set()
    for i, header in enumerate(table.headers):
        key = _ALIASES.get(normal(header), normal(header))
        role = by_header.get(key)
        label = f"{role[0]}:{role[1].name if isinstance(role[1], Response) else role[1]}" if role else None
        if role and label not in taken:
            taken.add(label)
            kind, what = role
            if kind == "structure":
                cols.structure[str(what)] = i
            elif kind == "response":
                cols.responses[what.name] = i  # type: ignore[union-attr]
            elif kind == "reason":
                cols.reason = i
            else:
                cols.note = i
            continue
        name = str(header).strip() or f"column {i + 1}"
        if not str(header).strip() and all(is_blank(r[i] if i < len(r) else None) for _, r in table.rows):
            continue  # an empty column without a header is nothing
        cols.extras[name] = i
        found.append(
            finding(
                Kind.EXTRA_COLUMN,
                f"column {name!r} is not in the plan; its values are carried into tidy.csv",
                file=table.file,
                row=table.header_row,
                column=name,
            )
        )
    gone = [s for s in structure if s not in cols.structure]
    for s in [g for g in gone if g == "code" or (g == "round" and len(plan.rounds) > 1)]:
        why = (
            "rows cannot be matched to the plan without it"
            if s == "code"
            else "this plan has several rounds, so rows cannot be placed without it"
        )
        found.append(
            finding(
                Kind.MISSING_COLUMN,
                f"the column {s!r} is missing; {why}",
                file=table.file,
                row=table.header_row,
                column=s,
            )
        )
    minor = [g for g in gone if g not in ("code", "round") or len(plan.rounds) == 1 and g == "round"]
    if minor:
        names = ", ".join(repr(g) for g in minor)
        found.append(
            finding(
                Kind.MISSING_COLUMN,
                f"the column{'s' if len(minor) > 1 else ''} {names} "
                f"{'are' if len(minor) > 1 else 'is'} missing; only compared with the plan, so the rows are still checked by code",
                Severity.WARNING,
                file=table.file,
                row=table.header_row,
                column=minor[0],
            )
        )
    for r in plan.spec.response:
        if r.name not in cols.responses:
            cols.absent_responses.add(r.name)
            found.append(
                finding(
                    Kind.MISSING_COLUMN,
                    f"the response column {r.header!r} is missing; its values are not in this file",
                    file=table.file,
                    row=table.header_row,
                    column=r.header,
                )
            )
    return cols, found
