"""The clean long table: one row per planned slot and round, then any rows that could not be placed."""

from __future__ import annotations

from typing import Any

import pandas as pd

from layout.intake.merge import Key, Merged, status
from layout.intake.rows import Unmatched
from layout.names import ADDED_PREFIX
from layout.plan import Plan


def factor_columns(plan: Plan) -> list[str]:
    """Factor names that get their own column (listed treatments have only 'treatment')."""
    return [f.name for f in plan.spec.factor if f.name != "treatment"]


def _raw(m: Merged | None) -> str | None:
    """What was typed but is not in the value columns: refused text, and every side of a conflict."""
    if m is None:
        return None
    parts = [f"{k}={v}" for k, v in m.rejected.items()]
    parts += [f"{k}={' | '.join(v)}" for k, v in m.conflict.items()]
    return "; ".join(parts) or None


def tidy_table(plan: Plan, merged: dict[Key, Merged], unmatched: list[Unmatched]) -> pd.DataFrame:
    """Plan columns, responses, reason, note, typed text kept aside, added columns, status, and sources."""
    factors = factor_columns(plan)
    responses = [r.name for r in plan.spec.response]
    extras = sorted({k for m in merged.values() for k in m.extras})
    added = {x: ADDED_PREFIX + x for x in extras}  # a prefix, so an added column never overwrites a plan column
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
        "raw",
        *added.values(),
        "status",
        "source_file",
        "source_row",
        "fix",
    ]
    data: dict[str, list[Any]] = {c: [] for c in columns}  # column by column: a dict per row costs seconds at 100,000
    put = {c: data[c].append for c in columns}
    for rnd in plan.rounds:
        for u in plan.units:
            for s in plan.slots_of[u.code]:
                m = merged.get((s.code, rnd.name))
                put["code"](s.code)
                put["unit"](u.code)
                put["serial"](u.serial)
                put["treatment"](u.treatment)
                for f in factors:
                    put[f](u.levels.get(f))
                put["block"](u.block)
                put["row"](u.row)
                put["col"](u.col)
                put["whole_plot"](u.whole_plot)
                put["subsample"](s.subsample)
                put["round"](rnd.name)
                for r in responses:
                    put[r](m.values.get(r) if m else None)
                put["missing_reason"](m.reason if m else None)
                put["note"](m.note if m else None)
                put["raw"](_raw(m))
                for x in extras:
                    put[added[x]](m.extras.get(x) if m else None)
                put["status"](status(m, plan))
                sources = (m.rows or m.blank_rows) if m else []
                put["source_file"]("; ".join(dict.fromkeys(e.file for e in sources)) or None)
                put["source_row"](sources[0].row if sources else None)
                put["fix"](" ".join(dict.fromkeys(i for e in sources for i in e.fixes)) or None)
    for x in unmatched:
        row = {
            "code": x.code or None,
            "status": "unmatched",
            "note": f"{x.why}: " + "; ".join(f"{k}={v}" for k, v in x.cells.items()),
            "source_file": x.file,
            "source_row": x.row,
            "fix": " ".join(x.fixes) or None,
        }
        for c in columns:
            put[c](row.get(c))
    frame = pd.DataFrame(data, columns=columns)
    for col in ("serial", "block", "row", "col", "whole_plot", "subsample", "source_row"):
        frame[col] = frame[col].astype("Int64")
    for r in plan.spec.response:
        if r.kind == "integer":
            frame[r.name] = frame[r.name].astype("Int64")
        elif r.kind == "number":
            frame[r.name] = frame[r.name].astype("Float64")
    return frame
