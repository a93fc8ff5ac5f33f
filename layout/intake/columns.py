"""Find each returned column's role by its header name, never by its position."""

from __future__ import annotations

from dataclasses import dataclass, field

from layout.intake.findings import Finding, Kind, Severity, finding
from layout.intake.readers import ReturnedTable
from layout.intake.values import close_to, is_blank
from layout.names import ALIASES, STRUCTURE_COLUMNS, normal
from layout.plan import Plan

__all__ = ["Columns", "map_columns", "normal"]


@dataclass
class Columns:
    """Column index of each role in one returned file."""

    structure: dict[str, int] = field(default_factory=dict)
    responses: dict[str, int] = field(default_factory=dict)  # response name → index
    reason: int | None = None
    note: int | None = None
    extras: dict[str, int] = field(default_factory=dict)


def _roles(plan: Plan) -> dict[str, tuple[str, str]]:
    """Normalised header → (role, name): structure columns, responses (header or bare name), reason, note."""
    blind = plan.spec.study.blind
    roles = {s: ("structure", s) for s in STRUCTURE_COLUMNS if not (blind and s == "treatment")}
    d = plan.spec.design
    # the workbook shows the study's nouns beside unit and subsample: 'unit (pot)'
    roles[normal(f"unit ({d.unit_name})")] = ("structure", "unit")
    roles[normal(f"subsample ({d.subsample_name})")] = ("structure", "subsample")
    for r in plan.spec.response:
        roles[normal(r.header)] = ("response", r.name)
        roles.setdefault(normal(r.name), ("response", r.name))
    roles["missing_reason"] = ("reason", "missing_reason")
    roles["note"] = ("note", "note")
    return roles


def _squash(text: str) -> str:
    return "".join(ch for ch in text.lower() if ch not in " _-")


def map_columns(table: ReturnedTable, plan: Plan) -> tuple[Columns, list[Finding]]:
    """The roles of the file's columns, and findings for missing and added ones."""
    roles = _roles(plan)
    squashed: dict[str, tuple[str, str]] = {}
    for k, v in roles.items():
        squashed.setdefault(_squash(k), v)
    cols = Columns()
    found: list[Finding] = []
    at = {"file": table.file, "row": table.header_row}
    taken: set[tuple[str, str]] = set()
    for i, header in enumerate(table.headers):
        key = normal(header)
        # an alias never takes a column that a declared response owns ("notes" as a response stays a response);
        # a header that differs only in case, spaces or underscores ("Weed count") is the same column
        role = roles.get(key) or roles.get(ALIASES.get(key, key)) or squashed.get(_squash(key))
        if role and role not in taken:  # a second column of the same name counts as added
            taken.add(role)
            kind, name = role
            if kind == "structure":
                cols.structure[name] = i
            elif kind == "response":
                cols.responses[name] = i
            elif kind == "reason":
                cols.reason = i
            else:
                cols.note = i
            continue
        name = str(header).strip() or f"column {i + 1}"
        if not str(header).strip() and all(is_blank(r[i] if i < len(r) else None) for _, r in table.rows):
            continue  # an empty column without a header is nothing
        cols.extras[name] = i
        meant = close_to(name, [h for h, (kind, _) in roles.items() if kind != "structure" or h in STRUCTURE_COLUMNS])
        found.append(
            finding(
                Kind.EXTRA_COLUMN,
                f"column {name!r} is not in the plan; its values are carried into tidy.csv"
                + (f"; did you mean {meant!r}?" if meant else ""),
                column=name,
                suggestion=meant,
                **at,
            )
        )
    found += _missing(plan, cols, roles, at)
    return cols, found


def _missing(plan: Plan, cols: Columns, roles: dict[str, tuple[str, str]], at: dict[str, object]) -> list[Finding]:
    found: list[Finding] = []
    has = {"block": any(u.block is not None for u in plan.units), "row": any(u.row is not None for u in plan.units)}
    has["col"] = has["row"]
    # a column the plan leaves empty (block in a crd, row and col without a grid) is not missing
    gone = list(
        dict.fromkeys(
            name
            for kind, name in roles.values()
            if kind == "structure" and name not in cols.structure and has.get(name, True)
        )
    )
    needed = {"code": "rows cannot be matched to the plan without it"}
    if len(plan.rounds) > 1:
        needed["round"] = "this plan has several rounds, so rows cannot be placed without it"
    for name in [g for g in gone if g in needed]:
        found.append(finding(Kind.MISSING_COLUMN, f"the column {name!r} is missing; {needed[name]}", column=name, **at))
    minor = [g for g in gone if g not in needed]
    if minor:
        many = len(minor) > 1
        found.append(
            finding(
                Kind.MISSING_COLUMN,
                f"the column{'s' if many else ''} {', '.join(repr(g) for g in minor)} {'are' if many else 'is'} missing; "
                "only compared with the plan, so the rows are still checked by code",
                Severity.WARNING,
                column=minor[0],
                **at,
            )
        )
    for r in plan.spec.response:
        if r.name not in cols.responses:
            # another file may carry it (people type what they measured); check_returns says so when none does
            found.append(
                finding(
                    Kind.MISSING_COLUMN,
                    f"the response column {r.header!r} is missing; this file says nothing about it",
                    Severity.WARNING,
                    column=r.header,
                    **at,
                )
            )
    return found
