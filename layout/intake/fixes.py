"""Approved fixes: corrections kept as signed data beside the returned files, never in them.

A fixes file has one row per correction the study lead approved (DESIGN.md, "Approved
fixes"). It is read here, each fix is judged complete and current against the returned
files, and the good ones are applied to the rows as read, before any check runs. The
returned files themselves are only ever read.
"""

from __future__ import annotations

import datetime as dt
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Final

from layout.errors import Problem, UnreadableFile, UsageError
from layout.intake.findings import Finding, Kind, finding
from layout.intake.readers import read_returned
from layout.intake.values import is_blank
from layout.spreadsheet_text import restored

FIX_COLUMNS: Final = (
    "fix",
    "file",
    "file_sha256",
    "row",
    "code",
    "column",
    "action",
    "value",
    "approved_by",
    "approved_on",
    "reason",
)
ACTIONS: Final = ("recode", "keep-this", "ignore-row", "set-value", "set-missing")
_NEEDS_COLUMN: Final = ("set-value", "set-missing")
_NEEDS_VALUE: Final = ("recode", "set-value", "set-missing")
_SHA: Final = re.compile(r"[0-9a-f]{64}")


@dataclass(frozen=True)
class Fix:
    """One approved correction, as read from its line of the fixes file."""

    fix: str
    file: str
    file_sha256: str
    row: int | None
    code: str
    column: str
    action: str
    value: str
    approved_by: str
    approved_on: str
    reason: str
    line: int  # where it is in the fixes file, for messages

    def to_dict(self) -> dict[str, Any]:
        return {name: getattr(self, name) for name in FIX_COLUMNS}


@dataclass
class Applied:
    """A fix as applied: what it changed, from what to what."""

    fix: Fix
    changed: str  # in words: 'code BC26-001-1X → BC26-001-1F'
    was: str | None = None
    now: str | None = None

    def to_dict(self) -> dict[str, Any]:
        return {**self.fix.to_dict(), "changed": self.changed, "was": self.was, "now": self.now}


@dataclass
class FixBook:
    """The fixes of one file: those fit to apply, and a bad-fix finding for each of the others."""

    path: str
    fixes: list[Fix] = field(default_factory=list)
    bad: list[Finding] = field(default_factory=list)
    applied: list[Applied] = field(default_factory=list)
    claimed: dict[int, str] = field(default_factory=dict)  # id of a fix → the returned file it was matched to

    def for_file(self, name: str, digest: str | None) -> list[Fix]:
        """The fixes aimed at one returned file; a stale one becomes a bad-fix finding here.

        A fix that names its file by a bare name claims the given file of that name whose content
        it was proposed for, so two folders' "returns.csv" never take each other's fixes.
        """
        good = []
        for f in self.fixes:
            how = match(f.file, name)
            if not how or id(f) in self.claimed:
                continue
            if digest is not None and f.file_sha256 != digest:
                if how == "name":
                    continue  # perhaps another file of that name; aimed_nowhere says so if none is
                self.claimed[id(f)] = name
                self.reject(f, f"{name} has changed since this fix was proposed (its SHA-256 is now {digest[:12]}…)")
            else:
                self.claimed[id(f)] = name
                good.append(f)
        return good

    def reject(self, f: Fix, why: str) -> None:
        self.bad.append(
            finding(
                Kind.BAD_FIX,
                f"fix {f.fix or '(no id)'} (line {f.line} of {Path(self.path).name}) was not applied: {why}",
                file=self.path,
                row=f.line,
                code=f.code or None,
                column=f.column or None,
                value=f.fix or None,
            )
        )

    def left_unused(self, fixes: list[Fix], pending: list[Fix], why: str) -> None:
        """bad-fix for each of fixes that was neither applied, rejected nor left pending."""
        done = {id(a.fix) for a in self.applied} | {id(f) for f in pending}
        rejected = {(b.row, b.value) for b in self.bad}
        for f in fixes:
            if id(f) not in done and (f.line, f.fix or None) not in rejected:
                self.reject(f, why)

    def aimed_nowhere(self, names: list[str]) -> None:
        """bad-fix for every fix that no returned file took."""
        for f in self.fixes:
            if id(f) in self.claimed:
                continue
            if any(match(f.file, n) for n in names):
                self.reject(f, f"no returned file named {Path(f.file).name!r} has the content it was proposed for")
            else:
                self.reject(f, f"its file {f.file!r} is not among the returned files given")


def match(fixed: str, given: str) -> str | None:
    """How a fix's file names a given file: 'path' (as written or the same full path), 'name' (a bare file
    name), or None."""
    if fixed == given:
        return "path"
    a, b = Path(fixed), Path(given)
    try:
        if a.resolve() == b.resolve():
            return "path"
    except OSError:
        pass
    return "name" if a.name == b.name and len(a.parts) == 1 else None


def _text(cell: Any) -> str:
    if is_blank(cell):
        return ""
    if isinstance(cell, float) and cell.is_integer():
        return str(int(cell))
    if isinstance(cell, dt.datetime):
        return cell.date().isoformat() if cell.time() == dt.time() else cell.isoformat()
    if isinstance(cell, dt.date):
        return cell.isoformat()
    return restored(str(cell).strip())


def read_fixes(path: str | Path) -> FixBook:
    """Read a fixes file (CSV in UTF-8 with or without BOM, or a workbook saved from it).

    Structural problems (not a table, missing columns, unknown actions, row numbers that are
    not numbers) stop the command with one message each; incomplete approvals become bad-fix
    findings, so the rest of the file still applies.
    """
    name = str(path)
    try:
        table = read_returned(path)
    except UnreadableFile as exc:
        raise UsageError(f"{name}: the fixes file cannot be read: {exc.problems[0].message}") from None
    headers = [h.strip().lower() for h in table.headers]
    missing = [c for c in FIX_COLUMNS if c not in headers]
    if not table.headers or missing:
        raise UsageError(
            f"{name}: not a fixes file: no header row with the columns {', '.join(FIX_COLUMNS)}"
            + (f" (missing: {', '.join(missing)})" if table.headers else "")
        )
    at = {c: headers.index(c) for c in FIX_COLUMNS}
    book = FixBook(name)
    problems: list[Problem] = []
    for line, cells in table.rows:
        cells = list(cells) + [None] * (len(headers) - len(cells))
        get = {c: _text(cells[i]) for c, i in at.items()}
        if not any(get.values()):
            continue
        action = get["action"].lower()
        if action not in ACTIONS:
            problems.append(
                Problem(name, f"line {line}, column 'action'", f"{get['action']!r} is not one of {', '.join(ACTIONS)}")
            )
            continue
        row: int | None = None
        if get["row"]:
            try:
                row = int(float(get["row"]))
            except ValueError:
                problems.append(Problem(name, f"line {line}, column 'row'", f"{get['row']!r} is not a row number"))
                continue
        book.fixes.append(
            Fix(
                get["fix"], get["file"], get["file_sha256"].lower(), row, get["code"], get["column"], action,
                get["value"], get["approved_by"], get["approved_on"], get["reason"], line,
            )
        )  # fmt: skip
    if problems:
        raise UsageError(*problems)
    _judge(book)
    return book


def _judge(book: FixBook) -> None:
    """Keep the complete fixes; every incomplete or repeated one is a bad-fix finding."""
    good: list[Fix] = []
    seen: set[str] = set()
    for f in book.fixes:
        why = _incomplete(f)
        if why is None and f.fix in seen:
            why = f"the id {f.fix!r} is used by an earlier line too; give each fix its own id"
        if why is not None:
            book.reject(f, why)
            continue
        seen.add(f.fix)
        good.append(f)
    book.fixes = good


def _incomplete(f: Fix) -> str | None:
    """Why a fix cannot be applied as written, or None."""
    blank = [n for n in ("fix", "file", "approved_by", "approved_on", "reason") if not getattr(f, n)]
    if blank:
        return f"{', '.join(blank)} {'is' if len(blank) == 1 else 'are'} blank (approve a fix by filling who, when and why)"
    try:
        dt.date.fromisoformat(f.approved_on[:10])
    except ValueError:
        return f"approved_on {f.approved_on!r} is not a date written YYYY-MM-DD"
    if not _SHA.fullmatch(f.file_sha256):
        return "file_sha256 is not the SHA-256 of the file (copy it from fixes-proposed.csv or report.json)"
    if f.row is None:
        return "row is blank"
    if f.action in _NEEDS_COLUMN and not f.column:
        return f"{f.action} needs the column it changes"
    if f.action in _NEEDS_VALUE and not f.value:
        what = {"recode": "the code to read", "set-value": "the value to read", "set-missing": "the missing reason"}
        return f"{f.action} needs {what[f.action]} in 'value'"
    return None
