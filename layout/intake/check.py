"""check_returns: every returned file against the plan, all findings collected before reporting."""

from __future__ import annotations

from collections import Counter
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import pandas as pd

from layout.intake.cleanrows import CleanBlock
from layout.intake.findings import Finding, Kind, Severity, finding
from layout.intake.fix_apply import apply_keep_this
from layout.intake.fixes import Applied, FixBook
from layout.intake.gather import gather
from layout.intake.merge import completeness, missing_slots
from layout.intake.proposals import propose_fixes
from layout.intake.readahead import ReadAhead
from layout.intake.returned import Returned, merge_returns, unblock_shared
from layout.intake.robust import warm_screen
from layout.intake.rows import PlanIndex
from layout.intake.safety import DEFAULT_LIMITS, Limits
from layout.intake.screen import statistical_findings
from layout.intake.tidy import tidy_table, warm_tidy
from layout.plan import Plan


@dataclass
class CheckResult:
    """What check_returns found: the findings, the tidy table and a summary."""

    findings: list[Finding]
    tidy: pd.DataFrame
    summary: dict[str, Any]
    outliers: set[tuple[str, str, str]] = field(default_factory=set)  # (slot, round, response)
    swaps: set[tuple[str, str]] = field(default_factory=set)  # (unit, round)
    fixes: list[Applied] = field(default_factory=list)  # the approved fixes applied, in the order applied
    proposals: list[dict[str, Any]] = field(default_factory=list)  # rows of fixes-proposed.csv

    def __iter__(self) -> Iterator[Any]:
        """So that ``findings, tidy = check_returns(plan, paths)`` works."""
        return iter((self.findings, self.tidy))

    @property
    def errors(self) -> int:
        """How many findings are errors."""
        return sum(f.severity is Severity.ERROR for f in self.findings)


def check_returns(
    plan: Plan,
    paths: Sequence[str | Path],
    progress: Callable[[str], None] | None = None,
    fixes: FixBook | None = None,
    limits: Limits = DEFAULT_LIMITS,
    ahead: ReadAhead | None = None,
) -> CheckResult:
    """Check returned .xlsx/.csv files against the plan; returns findings and the tidy table.

    progress, when given, is called with a short description before each step. fixes, when
    given, are applied to the rows as read before anything is checked; the files are only read.
    ahead: the reads of these files, when started before the plan was loaded (ReadAhead(paths, limits)).
    """
    say = progress or (lambda _: None)
    book = fixes or FixBook("")
    idx = PlanIndex(plan)
    _prepare(plan, idx)
    got = gather(plan, paths, say, book, limits, ahead, idx)
    entries, blocks = unblock_shared(idx, got.entries, got.blocks, got.places)
    found = apply_keep_this(entries, list(got.findings), got.keep_this, book)
    found = book.bad + found + _columns_nowhere(plan, entries, blocks)
    say("merging and looking for missing slots")
    merged, merge_findings = merge_returns(idx, entries, blocks, got.places)
    found += merge_findings
    found += completeness(plan, merged.special)
    cause = "; ".join(got.unusable) or None
    missing = missing_slots(idx, merged.present(), cause)
    found = _count_at_causes(found, got.unusable, missing) + missing
    say("looking for outlying subsamples and swapped units")
    stats, outliers, swaps = statistical_findings(plan, merged)
    found += stats
    tidy = tidy_table(plan, merged, got.unmatched)
    result = CheckResult(found, tidy, _summary(plan, found, merged, got.files), outliers, swaps, book.applied)
    result.proposals = propose_fixes(plan, result, merged.special, got.unmatched)
    return result


def _prepare(plan: Plan, idx: PlanIndex) -> None:
    """The plan's look-ups and its part of the tidy table, made while the first file is still being parsed
    (calamine parses without the GIL, in its own thread)."""
    idx.warm()
    warm_tidy(plan)
    warm_screen(plan)


def _columns_nowhere(plan: Plan, entries: list[Any], blocks: list[CleanBlock]) -> list[Finding]:
    """missing-column for a response that no returned file has a column for: its values are nowhere."""
    if not entries and not blocks:
        return []
    wanted = {r.name for r in plan.spec.response}
    seen: set[str] = {name for b in blocks for name in b.values}
    for e in entries:  # usually every response is seen in the first row
        seen.update(e.raw)
        if wanted <= seen:
            break
    return [
        finding(
            Kind.MISSING_COLUMN,
            f"no returned file has the response column {r.header!r}, so none of its values were returned",
            None if r.required else Severity.WARNING,
            column=r.header,
        )
        for r in plan.spec.response
        if r.name not in seen
    ]


def _count_at_causes(found: list[Finding], unusable: list[str], missing: list[Finding]) -> list[Finding]:
    """Tell at each unusable file how many planned slot-rounds are then in no file, listed under it."""
    if not unusable or not missing:
        return found
    n = len(missing)
    note = f"; {n} missing slot or unit finding{'s' if n > 1 else ''} follow{'' if n > 1 else 's'} (listed under it)"
    return [
        replace(f, message=f.message + note)
        if f.file in unusable and f.kind in (Kind.UNREADABLE_FILE, Kind.WRONG_PLAN, Kind.MISSING_COLUMN)
        else f
        for f in found
    ]


def _summary(plan: Plan, found: list[Finding], merged: Returned, files: list[dict[str, Any]]) -> dict[str, Any]:
    by_severity = Counter(f.severity.value for f in found)
    return {
        "plan": plan.fingerprint,
        "study": plan.spec.study.id,
        "files": files,
        "slots_expected": len(plan.slots) * len(plan.rounds),
        "slots_found": merged.clean_count + sum(1 for m in merged.special.values() if m.rows),
        "by_severity": {s.value: by_severity.get(s.value, 0) for s in Severity},
        "by_kind": dict(sorted(Counter(f.kind.value for f in found).items())),
    }
