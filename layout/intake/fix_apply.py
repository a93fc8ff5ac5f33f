"""Apply approved fixes to rows as read: in memory, before the checks, never to the files.

Row fixes (recode, ignore-row, set-value, set-missing) change a copy of one file's cells;
keep-this settles a conflicting slot once every file's rows are placed.
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

from layout.codes import compact
from layout.intake.columns import Columns
from layout.intake.findings import Finding
from layout.intake.fixes import Applied, Fix, FixBook
from layout.intake.readers import ReturnedTable
from layout.intake.rows import (
    Entry,
    cell_text,  # the same reading of a cell as the checks use
)
from layout.intake.values import is_blank
from layout.names import normal
from layout.plan import Plan


def _column(f: Fix, cols: Columns, plan: Plan) -> tuple[int | None, str]:
    """The file's column index a fix names (a response by header or name), and the response's header."""
    for r in plan.spec.response:
        if normal(f.column) in (normal(r.header), normal(r.name)) and r.name in cols.responses:
            return cols.responses[r.name], r.header
    return None, f.column


def apply_row_fixes(
    plan: Plan, table: ReturnedTable, cols: Columns, fixes: list[Fix], book: FixBook
) -> tuple[ReturnedTable, Columns, dict[int, list[str]], list[Fix]]:
    """The table with its row fixes applied, its columns, row → ids of the fixes applied there,
    and the keep-this fixes left for after merging. A fix that finds no target is a bad-fix."""
    if not fixes:
        return table, cols, {}, []
    width = len(table.headers)
    rows = {n: list(c) + [None] * (width - len(c)) for n, c in table.rows}
    headers = list(table.headers)
    traces: dict[int, list[str]] = {}
    later: list[Fix] = []
    touched: set[tuple[int, str]] = set()
    code_at = cols.structure["code"]
    for f in fixes:
        assert f.row is not None  # a fix without a row is refused when the fixes file is read
        cells = rows.get(f.row)
        if cells is None or all(is_blank(c) for c in cells):
            book.reject(f, f"row {f.row} of {table.file} holds no entry")
            continue
        here = cell_text(cells[code_at])
        if f.code and compact(here) != compact(f.code):
            book.reject(f, f"row {f.row} of {table.file} holds code {here!r}, not {f.code!r}")
            continue
        target = "row" if f.action in ("ignore-row", "keep-this") else "code" if f.action == "recode" else f.column
        if (f.row, normal(target)) in touched:
            book.reject(f, f"another fix already changes {target} in row {f.row}")
            continue
        touched.add((f.row, normal(target)))
        if f.action == "keep-this":
            later.append(f)
            continue
        if f.action == "ignore-row":
            del rows[f.row]
            book.applied.append(Applied(f, f"row {f.row} left out", here or None, None))
            continue
        if f.action == "recode":
            cells[code_at] = f.value
            book.applied.append(Applied(f, f"code read as {f.value}", here, f.value))
        else:
            at, header = _column(f, cols, plan)
            if at is None:
                book.reject(f, f"{table.file} has no response column {f.column!r}")
                touched.discard((f.row, normal(target)))
                continue
            was = cell_text(cells[at]) or None
            if f.action == "set-value":
                cells[at] = f.value
                book.applied.append(Applied(f, f"{header} read as {f.value}", was, f.value))
            else:
                if cols.reason is None:  # the file had no reason column: one is added in memory
                    cols = replace(cols, reason=len(headers))
                    headers.append("missing_reason")
                    for c in rows.values():
                        c.append(None)
                cells[at] = None
                cells[cols.reason] = f.value
                book.applied.append(Applied(f, f"{header} blank, missing reason {f.value}", was, f.value))
        traces.setdefault(f.row, []).append(f.fix)
    fixed = replace(table, headers=headers, rows=sorted(rows.items()))
    return fixed, cols, traces, later


def apply_keep_this(entries: list[Entry], findings: list[Finding], fixes: list[Fix], book: FixBook) -> list[Finding]:
    """Settle conflicting slots: the chosen row's cells win, the other rows of its slot and round are set
    aside (they leave the entries, with the findings about them). Returns the findings that remain."""
    aside: set[tuple[str, int]] = set()
    settled: set[tuple[str, str]] = set()
    for f in fixes:
        kept = next((e for e in entries if e.row == f.row and e.file == book.claimed.get(id(f))), None)
        if kept is None:
            book.reject(f, f"row {f.row} of {f.file} was not placed in the plan (fix its code first)")
            continue
        key = (kept.slot.code, kept.round)
        if key in settled:
            book.reject(f, f"another keep-this already settles {kept.slot.code} round {kept.round}")
            continue
        others = [e for e in entries if (e.slot.code, e.round) == key and e is not kept]
        if not others:
            book.reject(f, f"{kept.slot.code} round {kept.round} has no other row to set aside")
            continue
        settled.add(key)
        kept.fixes.append(f.fix)
        aside |= {(e.file, e.row) for e in others}
        where = ", ".join(f"{Path(e.file).name} row {e.row}" for e in others)
        book.applied.append(Applied(f, f"{kept.slot.code} round {kept.round} taken from this row; set aside: {where}"))
    entries[:] = [e for e in entries if (e.file, e.row) not in aside]
    return [f for f in findings if f.row is None or (f.file, f.row) not in aside]
