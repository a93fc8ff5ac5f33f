"""Read every returned file into rows of the plan, and say once about a file that cannot give any.

A file that cannot be read, belongs to another plan, draw or study, or repeats a file
already given (same content) is one finding at the file; its rows are not checked one by
one, so a single cause never turns into hundreds of findings.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from layout.errors import UnreadableFile
from layout.intake.cleanrows import CleanBlock, take_clean
from layout.intake.columns import map_columns
from layout.intake.findings import Finding, Kind, Severity, finding
from layout.intake.fix_apply import apply_row_fixes
from layout.intake.fixes import Fix, FixBook
from layout.intake.origin import foreign_file
from layout.intake.readahead import ReadAhead
from layout.intake.readers import ReturnedTable
from layout.intake.rows import Entry, PlanIndex, Unmatched, check_rows
from layout.intake.safety import DEFAULT_LIMITS, Limits
from layout.plan import Plan

UNUSABLE = ("unreadable", "wrong-plan", "not placed")


@dataclass
class Gathered:
    """Rows of every usable file, the findings of reading, and one record per file."""

    entries: list[Entry] = field(default_factory=list)
    blocks: list[CleanBlock] = field(default_factory=list)  # the clean rows of each file, in columns
    unmatched: list[Unmatched] = field(default_factory=list)
    findings: list[Finding] = field(default_factory=list)
    files: list[dict[str, Any]] = field(default_factory=list)
    keep_this: list[Fix] = field(default_factory=list)  # fixes that settle conflicts, applied after reading

    @property
    def places(self) -> dict[str, int]:
        """Each file's place in the order read."""
        return {f["file"]: k for k, f in enumerate(self.files)}

    @property
    def unusable(self) -> list[str]:
        """Files that gave no rows because of a problem with the whole file."""
        return [f["file"] for f in self.files if f["status"] in UNUSABLE]


def _digest(path: Path) -> str | None:
    try:
        h = hashlib.sha256()
        with path.open("rb") as fh:
            for block in iter(lambda: fh.read(1 << 20), b""):
                h.update(block)
        return h.hexdigest()
    except OSError:
        return None


def gather(
    plan: Plan,
    paths: Sequence[str | Path],
    say: Callable[[str], None],
    fixes: FixBook | None = None,
    limits: Limits = DEFAULT_LIMITS,
    ahead: ReadAhead | None = None,
    idx: PlanIndex | None = None,
) -> Gathered:
    """Every returned file read, its approved row fixes applied, and its rows checked, in the order given.

    ahead: the files' reads, when the caller started them already (they must be of these paths).
    """
    if ahead is not None and ahead.paths != [str(p) for p in paths]:
        raise ValueError("the reads started are not of the files to check")
    ahead = ahead or ReadAhead(paths, limits)
    idx = idx or PlanIndex(plan)
    out = Gathered()
    book = fixes or FixBook("")
    seen: dict[str, str] = {}
    for place, path in enumerate(paths):
        name = str(path)
        say(f"reading {name}")
        digest = _digest(Path(path))
        if digest is not None and digest in seen:
            out.findings.append(
                finding(
                    Kind.DUPLICATE_SLOT,
                    f"the same file as {seen[digest]} (identical content); it was read once",
                    file=name,
                    value=digest[:12],
                )
            )
            out.files.append({"file": name, "status": "same as " + seen[digest], "sha256": digest})
            book.left_unused(book.for_file(name, digest), [], f"{name} is a copy of {seen[digest]}, read instead")
            continue
        if digest is not None:
            seen[digest] = name
        record: dict[str, Any] = {"file": name, "sha256": digest}
        out.files.append(record)
        try:
            table = ahead.take(place)
        except UnreadableFile as exc:
            out.findings.append(
                finding(Kind.UNREADABLE_FILE, f"cannot be checked: {exc.problems[0].message}", file=name)
            )
            record["status"] = "unreadable"
            book.left_unused(book.for_file(name, digest), [], f"{name} cannot be read")
            continue
        except OSError as exc:
            out.findings.append(finding(Kind.UNREADABLE_FILE, f"cannot be checked: {exc.strerror or exc}", file=name))
            record["status"] = "unreadable"
            continue
        mine = book.for_file(name, digest)
        _rows_of(plan, idx, table, record, out, mine, book)
        book.left_unused(mine, out.keep_this, f"the rows of {name} were not checked ({record['status']})")
    book.aimed_nowhere([str(p) for p in paths])
    return out


def _rows_of(
    plan: Plan,
    idx: PlanIndex,
    table: ReturnedTable,
    record: dict[str, Any],
    out: Gathered,
    fixes: list[Fix],
    book: FixBook,
) -> None:
    name = table.file
    record.update({"sheet": table.sheet, "fingerprint": table.fingerprint, "rows": len(table.rows)})
    if table.fingerprint and table.fingerprint != plan.fingerprint:
        whose = (
            f"another randomization of {table.study}"
            if table.study == plan.spec.study.id
            else f"study {table.study or 'unknown'}"
        )
        out.findings.append(
            finding(
                Kind.WRONG_PLAN,
                f"made from plan {table.fingerprint[:12]} ({whose}), not this plan {plan.fingerprint[:12]}; "
                f"its {len(table.rows)} rows were not checked",
                file=name,
                value=table.fingerprint,
            )
        )
        record["status"] = "wrong-plan"
        return
    cols, column_findings = map_columns(table, plan)
    blocked = any(f.severity is Severity.ERROR and f.column in ("code", "round") for f in column_findings)
    if not table.headers:
        out.findings.append(
            finding(
                Kind.MISSING_COLUMN, "no header row with a 'code' column in the first 20 rows", file=name, column="code"
            )
        )
        record["status"] = "not placed"
        return
    foreign = foreign_file(table, cols, idx)
    if foreign is not None:
        out.findings.append(foreign)
        record["status"] = "wrong-plan"
        return
    out.findings += column_findings
    if blocked:
        record["status"] = "not placed"
        return
    table, cols, traces, later = apply_row_fixes(plan, table, cols, fixes, book)
    out.keep_this += later
    block, table = take_clean(table, cols, idx, {*traces, *(f.row for f in later)})
    if block is not None:
        out.blocks.append(block)
    entries, unmatched, found = check_rows(table, cols, idx)
    for row in (*entries, *unmatched):
        row.fixes = list(traces.get(row.row, []))
    out.entries += entries
    out.unmatched += unmatched
    out.findings += found
    record.update({"status": "read", "rows": len(entries) + len(unmatched) + (len(block) if block else 0)})
