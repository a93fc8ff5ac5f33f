"""check_returns: every returned file against the plan, all findings collected before reporting."""

from __future__ import annotations

from collections import Counter
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from layout.errors import UnreadableFile
from layout.intake.columns import map_columns
from layout.intake.findings import Finding, Kind, Severity, finding
from layout.intake.merge import merge_entries, missing_slots
from layout.intake.origin import foreign_file
from layout.intake.readers import read_returned
from layout.intake.robust import find_outliers, find_swaps
from layout.intake.rows import Entry, PlanIndex, Unmatched, check_rows
from layout.intake.tidy import tidy_table
from layout.plan import Plan


@dataclass
class CheckResult:
    """What check_returns found: the findings, the tidy table and a summary."""

    findings: list[Finding]
    tidy: pd.DataFrame
    summary: dict[str, Any]
    outliers: set[tuple[str, str, str]] = field(default_factory=set)  # (slot, round, response)
    swaps: set[tuple[str, str]] = field(default_factory=set)  # (unit, round)

    def __iter__(self) -> Iterator[Any]:
        """So that ``findings, tidy = check_returns(plan, paths)`` works."""
        return iter((self.findings, self.tidy))

    @property
    def errors(self) -> int:
        """How many findings are errors."""
        return sum(f.severity is Severity.ERROR for f in self.findings)


def check_returns(
    plan: Plan, paths: Sequence[str | Path], progress: Callable[[str], None] | None = None
) -> CheckResult:
    """Check returned .xlsx/.csv files against the plan; returns findings and the tidy table.

    progress, when given, is called with a short description before each step.
    """
    say = progress or (lambda _: None)
    idx = PlanIndex(plan)
    found: list[Finding] = []
    entries: list[Entry] = []
    unmatched: list[Unmatched] = []
    files: list[dict[str, Any]] = []
    for path in paths:
        name = str(path)
        say(f"reading {name}")
        try:
            table = read_returned(path)
        except UnreadableFile as exc:
            found.append(finding(Kind.UNREADABLE_FILE, f"cannot be checked: {exc.problems[0].message}", file=name))
            files.append({"file": name, "status": "unreadable"})
            continue
        except OSError as exc:
            found.append(finding(Kind.UNREADABLE_FILE, f"cannot be checked: {exc.strerror or exc}", file=name))
            files.append({"file": name, "status": "unreadable"})
            continue
        if table.fingerprint and table.fingerprint != plan.fingerprint:
            whose = (
                f"another randomization of {table.study}"
                if table.study == plan.spec.study.id
                else f"study {table.study or 'unknown'}"
            )
            found.append(
                finding(
                    Kind.WRONG_PLAN,
                    f"made from plan {table.fingerprint[:12]} ({whose}), not this plan "
                    f"{plan.fingerprint[:12]}; its rows were not checked",
                    file=name,
                    value=table.fingerprint,
                )
            )
            files.append({"file": name, "status": "wrong-plan"})
            continue
        cols, column_findings = map_columns(table, plan)
        found += column_findings
        blocked = any(f.severity is Severity.ERROR and f.column in ("code", "round") for f in column_findings)
        if blocked or not table.headers:
            if not table.headers:
                found.append(
                    finding(
                        Kind.MISSING_COLUMN,
                        "no header row with a 'code' column in the first 20 rows",
                        file=name,
                        column="code",
                    )
                )
            files.append({"file": name, "status": "not placed", "rows": len(table.rows)})
            continue
        foreign = foreign_file(table, cols, idx)
        if foreign is not None:
            found.append(foreign)
            files.append({"file": name, "status": "wrong-plan", "rows": len(table.rows)})
            continue
        e, u, f = check_rows(table, cols, idx)
        entries += e
        unmatched += u
        found += f
        files.append(
            {
                "file": name,
                "status": "read",
                "rows": len(e) + len(u),
                "sheet": table.sheet,
                "fingerprint": table.fingerprint,
            }
        )
    say("merging and looking for missing slots")
    kept, conflicts, merge_findings = merge_entries(plan, entries)
    found += merge_findings
    found += missing_slots(plan, kept)
    say("looking for outlying subsamples and swapped units")
    stats, outliers, swaps = _statistical(plan, kept, conflicts)
    found += stats
    tidy = tidy_table(plan, kept, conflicts, unmatched)
    return CheckResult(found, tidy, _summary(plan, found, kept, files), outliers, swaps)


def _statistical(
    plan: Plan, kept: dict[tuple[str, str], Entry], conflicts: set[tuple[str, str]]
) -> tuple[list[Finding], set[tuple[str, str, str]], set[tuple[str, str]]]:
    found: list[Finding] = []
    outliers: set[tuple[str, str, str]] = set()
    swaps: set[tuple[str, str]] = set()
    numeric = [r for r in plan.spec.response if r.kind in ("number", "integer")]
    pair_hits: dict[tuple[str, str, str], list[str]] = {}
    for rnd in plan.rounds:
        for r in numeric:
            values: dict[str, list[tuple[str, float]]] = {}
            for (slot, rname), e in kept.items():
                if rname == rnd.name and (slot, rname) not in conflicts and r.name in e.values:
                    values.setdefault(e.slot.unit, []).append((slot, float(e.values[r.name])))
            for o in find_outliers(values):
                outliers.add((o.slot, rnd.name, r.name))
                found.append(
                    finding(
                        Kind.OUTLIER_SUBSAMPLE,
                        f"{r.header} {o.value:g} in round {rnd.name} is far from the "
                        f"other {plan.spec.design.subsample_name}s of {o.unit} (median {o.median:g}; "
                        f"score {o.score:.1f}, flagged above 4)",
                        code=o.slot,
                        unit=o.unit,
                        column=r.header,
                        value=o.value,
                    )
                )
            means = {u: float(np.mean([v for _, v in vs])) for u, vs in values.items()}
            for s in find_swaps(plan, means):
                pair_hits.setdefault((s.first, s.second, rnd.name), []).append(f"{r.header} (score {s.score:.0f})")
    for (a, b, rname), hits in pair_hits.items():
        swaps |= {(a, rname), (b, rname)}
        found.append(
            finding(
                Kind.POSSIBLE_SWAP,
                f"{a} and {b} in round {rname}: their data fit each other's treatment far "
                f"better than their own in {', '.join(hits)}; check their labels and sheets",
                code=a,
                unit=a,
                value=b,
                suggestion=f"compare the labels of {a} and {b}",
            )
        )
    return found, outliers, swaps


def _summary(
    plan: Plan, found: list[Finding], kept: dict[tuple[str, str], Entry], files: list[dict[str, Any]]
) -> dict[str, Any]:
    by_severity = Counter(f.severity.value for f in found)
    return {
        "plan": plan.fingerprint,
        "study": plan.spec.study.id,
        "files": files,
        "slots_expected": len(plan.slots) * len(plan.rounds),
        "slots_found": len(kept),
        "by_severity": {s.value: by_severity.get(s.value, 0) for s in Severity},
        "by_kind": dict(sorted(Counter(f.kind.value for f in found).items())),
    }
