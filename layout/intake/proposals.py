"""fixes-proposed.csv: one row per error a fix can be proposed for, with the approval left empty.

The study lead copies the rows they approve into a fixes file, fills who, when and why
(and the value where it is left blank), and checks again with --fixes.
"""

from __future__ import annotations

import csv
import hashlib
import io
from typing import TYPE_CHECKING, Any

from layout.codes import parse_code
from layout.intake.findings import Kind, Severity
from layout.intake.fixes import FIX_COLUMNS
from layout.intake.merge import Key, Merged
from layout.intake.rows import Unmatched, code_lengths
from layout.plan import Plan
from layout.spreadsheet_text import neutral

if TYPE_CHECKING:
    from layout.intake.check import CheckResult


def fix_id(sha: str, row: int, column: str, action: str, value: str) -> str:
    """A short id made from what the fix does, so the same proposal keeps its id from check to check."""
    digest = hashlib.sha256(f"{sha}|{row}|{column}|{action}|{value}".encode()).hexdigest()
    return "fx-" + digest[:8]


def propose_fixes(
    plan: Plan, result: CheckResult, merged: dict[Key, Merged], unmatched: list[Unmatched]
) -> list[dict[str, Any]]:
    """The proposals, in the order of the files and rows they touch."""
    sha = {f["file"]: f.get("sha256") or "" for f in result.summary["files"]}
    out: list[dict[str, Any]] = []

    def add(file: str, row: int, code: str, column: str, action: str, value: str, why: str) -> None:
        digest = sha.get(file, "")
        out.append(
            {
                "fix": fix_id(digest, row, column, action, value),
                "file": file,
                "file_sha256": digest,
                "row": row,
                "code": code,
                "column": column,
                "action": action,
                "value": value,
                "approved_by": "",
                "approved_on": "",
                "reason": "",
                "_why": why,
            }
        )

    for f in result.findings:
        if f.severity is not Severity.ERROR or f.file is None or f.row is None:
            continue
        if f.kind in (Kind.BAD_CODE, Kind.UNKNOWN_CODE) and f.suggestion:
            # one suggestion is proposed as it is; among several the lead picks, so the value is left blank
            one = " or " not in f.suggestion
            add(f.file, f.row, f.value or "", "code", "recode", f.suggestion if one else "", f.message)
        elif f.kind is Kind.OUT_OF_RANGE and f.column:
            add(f.file, f.row, f.code or "", f.column, "set-value", "", f.message)
    for m in merged.values():
        if m.conflict:
            for e in m.rows:
                add(e.file, e.row, e.slot.code, "", "keep-this", "", f"{m.slot.code} round {m.round}: conflicting rows")
    study, lengths = plan.spec.study.id, code_lengths(plan)  # only the code's parts: no index of every code
    for x in unmatched:
        parts = parse_code(x.code, study, lengths) if x.code else None
        if parts is not None and parts.study != study:
            add(x.file, x.row, x.code, "", "ignore-row", "", f"a row of study {parts.study}")
    seen: set[str] = set()
    unique = [p for p in out if not (p["fix"] in seen or seen.add(p["fix"]))]  # type: ignore[func-returns-value]
    return sorted(unique, key=lambda p: (p["file"], p["row"], p["action"]))


def proposals_csv(rows: list[dict[str, Any]]) -> str:
    """The proposals as CSV (the caller writes it with a BOM so Excel reads it as UTF-8)."""
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\r\n")
    writer.writerow([*FIX_COLUMNS, "finding"])  # the last column says why; a fixes file may keep or drop it
    for p in rows:  # opened in a spreadsheet: typed text must not become a formula there (read_fixes undoes it)
        writer.writerow([neutral(v) for v in (*(p[c] for c in FIX_COLUMNS), p["_why"])])
    return buf.getvalue()
