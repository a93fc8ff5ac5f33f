"""Whether a returned file belongs to this plan at all: another study's codes, or another draw's.

A file from elsewhere is one cause, so it gets one `wrong-plan` finding and its rows are
not checked one by one (which would bury the cause under hundreds of bad codes).
"""

from __future__ import annotations

from collections import Counter
from typing import Final

from layout.codes import compact, implied_salt
from layout.intake.columns import Columns
from layout.intake.findings import Finding, Kind, finding
from layout.intake.readers import ReturnedTable
from layout.intake.rows import PlanIndex
from layout.intake.values import is_blank

FEWEST_CODES: Final = 3  # fewer codes than this are judged row by row: a typo or two is likelier
SHARE: Final = 0.6  # the share of a file's codes that must point to one other study or draw


def code_cells(table: ReturnedTable, cols: Columns) -> list[str]:
    """The code cells of the file's non-blank rows, as typed."""
    i = cols.structure.get("code")
    if i is None:
        return []
    return [str(cells[i]).strip() for _, cells in table.rows if i < len(cells) and not is_blank(cells[i])]


def _mostly_planned(table: ReturnedTable, cols: Columns, idx: PlanIndex) -> bool:
    """True as soon as more than 1 − SHARE of the rows hold a planned slot code exactly: the file cannot be foreign
    then (a usual file is settled within its first half, without reading every code as text)."""
    i = cols.structure.get("code")
    if i is None:
        return False
    enough = (1 - SHARE) * len(table.rows)
    exact = idx.slot_number
    known = 0
    for _, cells in table.rows:
        if i < len(cells) and cells[i] in exact:
            known += 1
            if known > enough:
                return True
    return False


def foreign_file(table: ReturnedTable, cols: Columns, idx: PlanIndex) -> Finding | None:
    """wrong-plan when most of the file's codes belong to another study or another draw of this one."""
    if _mostly_planned(table, cols, idx):
        return None
    codes = code_cells(table, cols)
    if len(codes) < FEWEST_CODES:
        return None
    exact = idx.slot_by_code
    strangers = [c for c in codes if c not in exact and compact(c) not in idx.slots and compact(c) not in idx.units]
    if len(strangers) < SHARE * len(codes):
        return None
    parts = [p for p in (idx.parse(c) for c in strangers) if p is not None]
    studies = Counter(p.study for p in parts if p.study != idx.study)
    if studies:
        study, n = studies.most_common(1)[0]
        if n >= SHARE * len(codes):
            return finding(
                Kind.WRONG_PLAN,
                f"{n} of its {len(codes)} codes belong to study {study}, not {idx.study}; its rows were not checked",
                file=table.file,
                value=study,
            )
    salts = Counter(
        s
        for p in parts
        if p.study == idx.study and len(p.digits) in idx.lengths
        for s in [implied_salt(p.digits, p.letter)]
        if s is not None and s != idx.plan.salt
    )
    if salts:
        salt, n = salts.most_common(1)[0]
        if n >= SHARE * len(codes):
            return finding(
                Kind.WRONG_PLAN,
                f"these codes belong to another randomization of {idx.study}: {n} of its {len(codes)} codes fail "
                "their check letters for this plan but all fit one other draw (a sheet printed before "
                "'layout plan --force' or with another seed?); its rows were not checked",
                file=table.file,
                value=f"salt {salt}",
            )
    return None
