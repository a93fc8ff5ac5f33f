"""The clean long table: one row per planned slot and round, then any rows that could not be placed."""

from __future__ import annotations

from typing import Any

import pandas as pd

from layout.intake.rows import Entry, Unmatched
from layout.names import ADDED_PREFIX
from layout.plan import Plan


def factor_columns(plan: Plan) -> list[str]:
    """Factor names that get their own column (listed treatments have only 'treatment')."""
    return [f.name for f in plan.spec.factor if f.name != "treatment"]


def tidy_table(
    plan: Plan, kept: dict[tuple[str, str], Entry], conflicts: set[tuple[str, str]], unmatched: list[Unmatched]
) -> pd.DataFrame:
    """Plan columns, responses, reason, note, added columns, status, and where each row came from."""
    factors = factor_columns(plan)
    responses = [r.name for r in plan.spec.response]
    extras = sorted({k for e in kept.values() for k in e.extras})
    added = {x: ADDED_PREFIX + x for x in extras}  # a prefix, so an added column never overwrites a plan column
    records: list[dict[str, Any]] = []
    slots_of = plan.slots_of
    for rnd in plan.rounds:
        for u in plan.units:
            for s in slots_of[u.code]:
                e = kept.get((s.code, rnd.name))
                rec: dict[str, Any] = {"code": s.code, "unit": u.code, "serial": u.serial, "treatment": u.treatment}
                rec.update({f: u.levels.get(f) for f in factors})
                rec.update(
                    {
                        "block": u.block,
                        "row": u.row,
                        "col": u.col,
                        "whole_plot": u.whole_plot,
                        "subsample": s.subsample,
                        "round": rnd.name,
                    }
                )
                rec.update({r: (e.values.get(r) if e else None) for r in responses})
                rec["missing_reason"] = e.reason if e else None
                rec["note"] = e.note if e else None
                rec.update({added[x]: (e.extras.get(x) if e else None) for x in extras})
                rec["status"] = _status(e, (s.code, rnd.name) in conflicts)
                rec["source_file"] = e.file if e else None
                rec["source_row"] = e.row if e else None
                records.append(rec)
    for m in unmatched:
        rec = {
            "code": m.code or None,
            "status": "unmatched",
            "note": f"{m.why}: " + "; ".join(f"{k}={v}" for k, v in m.cells.items()),
            "source_file": m.file,
            "source_row": m.row,
        }
        records.append(rec)
    columns = [
        "code",
        "unit",
        "serial",
        "treatment",
        *factors,
        "block",
        "row",
        "col",
        "whole_plot",
        "subsample",
        "round",
        *responses,
        "missing_reason",
        "note",
        *added.values(),
        "status",
        "source_file",
        "source_row",
    ]
    frame = pd.DataFrame.from_records(records, columns=columns)
    for col in ("serial", "block", "row", "col", "whole_plot", "subsample", "source_row"):
        frame[col] = frame[col].astype("Int64")
    for r in plan.spec.response:
        if r.kind == "integer":
            frame[r.name] = frame[r.name].astype("Int64")
        elif r.kind == "number":
            frame[r.name] = frame[r.name].astype("Float64")
    return frame


def _status(e: Entry | None, conflict: bool) -> str:
    if e is None:
        return "missing"
    if conflict:
        return "conflict"
    if e.errors:
        return "error"
    if e.reason:
        return "declared-missing"
    return "ok"
