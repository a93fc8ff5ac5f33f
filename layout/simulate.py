"""Invented data for a plan: a filled-in copy of entry.xlsx, for the demo and for tests.

Numbers come from a model with a treatment effect, a unit-to-unit effect and a
subsample-to-subsample effect, drawn from the plan's own seed (so the same plan always
fills the same way); a few slots are left blank with a missing reason.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date, timedelta
from pathlib import Path
from typing import Any

import numpy as np
from openpyxl import load_workbook

from layout.files import write_new
from layout.plan import Plan
from layout.spec import Response


@dataclass(frozen=True)
class Filled:
    """One simulated row: its values, or a missing reason."""

    values: dict[str, Any]
    reason: str | None


def _draw(r: Response, rng: np.random.Generator, effect: float, unit: float) -> Any:
    lo = r.min if r.min is not None else 0.0
    hi = r.max if r.max is not None else lo + 100.0
    if r.kind in ("number", "integer"):
        centre = lo + (hi - lo) * (0.35 + 0.3 * effect)
        x = centre + (hi - lo) * (0.02 * unit + 0.03 * rng.normal())
        x = min(max(x, lo), hi)
        return int(round(x)) if r.kind == "integer" else round(x, r.decimals if r.decimals is not None else 2)
    if r.kind == "category":
        levels = r.levels or ("",)
        return levels[0] if rng.random() < 0.8 else levels[int(rng.integers(len(levels)))]
    if r.kind == "date":
        return (date(2026, 6, 1) + timedelta(days=int(rng.integers(0, 5)))).isoformat()
    return "ok" if rng.random() < 0.9 else "see photo"


def simulate(plan: Plan, missing_share: float = 0.04) -> dict[tuple[str, str], Filled]:
    """Invented values for every slot and round of the plan."""
    rng = np.random.default_rng(plan.seed)
    treatments = list(plan.spec.treatments)
    effect = {t: i / max(1, len(treatments) - 1) for i, t in enumerate(treatments)}
    unit_effect = {u.code: rng.normal() for u in plan.units}
    reasons = plan.spec.collection.missing_reasons
    out: dict[tuple[str, str], Filled] = {}
    for rnd in plan.rounds:
        for s in plan.slots:
            u = plan.unit_by_code[s.unit]
            if rng.random() < missing_share:
                out[(s.code, rnd.name)] = Filled({}, reasons[int(rng.integers(len(reasons)))])
                continue
            values = {r.name: _draw(r, rng, effect[u.treatment], unit_effect[u.code]) for r in plan.spec.response}
            out[(s.code, rnd.name)] = Filled(values, None)
    return out


def fill_workbook(
    plan: Plan, blank: str | Path, target: str | Path, filled: dict[tuple[str, str], Filled], force: bool = False
) -> Path:
    """A copy of a blank entry.xlsx with the simulated values typed in; the blank stays as it is."""
    wb = load_workbook(blank)
    ws = wb["entry"]
    head = [c.value for c in ws[1]]
    col = {h: i for i, h in enumerate(head)}
    for row in ws.iter_rows(min_row=2):
        code, rnd = row[col["code"]].value, row[col["round"]].value
        f = filled.get((code, str(rnd)))
        if f is None:
            continue
        for r in plan.spec.response:
            if r.name in f.values:
                value = f.values[r.name]
                row[col[r.header]].value = date.fromisoformat(value) if r.kind == "date" else value
        if f.reason:
            row[col["missing_reason"]].value = f.reason
    import io

    buf = io.BytesIO()
    wb.save(buf)
    return write_new(target, buf.getvalue(), force=force)
