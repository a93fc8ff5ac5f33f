"""The clean long table: one row per planned slot and round, then any rows that could not be placed."""

from __future__ import annotations

import csv
import io
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
    # column by column, each a comprehension: a dict or an append per cell costs seconds at 100,000 rows
    pairs = [(u, s) for u in plan.units for s in plan.slots_of[u.code]]
    rounds = len(plan.rounds)
    required = [r.name for r in plan.spec.response if r.required]
    ms = [merged.get((s.code, rnd.name)) for rnd in plan.rounds for _, s in pairs]
    data: dict[str, list[Any]] = {
        "code": [s.code for _, s in pairs] * rounds,
        "unit": [u.code for u, _ in pairs] * rounds,
        "serial": [u.serial for u, _ in pairs] * rounds,
        "treatment": [u.treatment for u, _ in pairs] * rounds,
        **{f: [u.levels.get(f) for u, _ in pairs] * rounds for f in factors},
        "block": [u.block for u, _ in pairs] * rounds,
        "row": [u.row for u, _ in pairs] * rounds,
        "col": [u.col for u, _ in pairs] * rounds,
        "whole_plot": [u.whole_plot for u, _ in pairs] * rounds,
        "subsample": [s.subsample for _, s in pairs] * rounds,
        "round": [rnd.name for rnd in plan.rounds for _ in pairs],
        **{r: [m.values.get(r) if m else None for m in ms] for r in responses},
        "missing_reason": [m.reason if m else None for m in ms],
        "note": [m.note if m else None for m in ms],
        "raw": [_raw(m) if m and (m.rejected or m.conflict) else None for m in ms],
        **{added[x]: [m.extras.get(x) if m else None for m in ms] for x in extras},
        "status": [status(m, plan, required) for m in ms],
    }
    sources = [(m.rows or m.blank_rows) if m else [] for m in ms]
    data["source_file"] = [
        (s[0].file if len(s) == 1 else "; ".join(dict.fromkeys(e.file for e in s))) if s else None for s in sources
    ]
    data["source_row"] = [s[0].row if s else None for s in sources]
    data["fix"] = [
        (" ".join(dict.fromkeys(i for e in s for i in e.fixes)) or None) if s and (len(s) > 1 or s[0].fixes) else None
        for s in sources
    ]
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
            data[c].append(row.get(c))
    frame = pd.DataFrame(data, columns=columns)
    for col in ("serial", "block", "row", "col", "whole_plot", "subsample", "source_row"):
        frame[col] = frame[col].astype("Int64")
    for r in plan.spec.response:
        if r.kind == "integer":
            frame[r.name] = frame[r.name].astype("Int64")
        elif r.kind == "number":
            frame[r.name] = frame[r.name].astype("Float64")
    return frame


def tidy_csv(frame: pd.DataFrame) -> str:
    """The text of frame.to_csv(index=False, lineterminator="\\n"), written column by column: the same
    text (tested), in a fraction of the time at 100,000 rows. Both go through the csv module, which writes
    None as an empty cell and a float by its repr."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(frame.columns)
    columns = [frame[c].to_numpy(dtype=object, na_value=None) for c in frame.columns]
    writer.writerows(zip(*columns, strict=True))
    return out.getvalue()
