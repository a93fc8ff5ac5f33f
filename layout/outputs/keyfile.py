"""key.csv: unit code → treatment and factor levels, for the study lead only.

It is opened in a spreadsheet, so text that could start a formula is neutralised (OWASP).
"""

from __future__ import annotations

import csv
import io

from layout.plan import Plan
from layout.spreadsheet_text import neutral


def key_csv(plan: Plan) -> str:
    """The treatment key as CSV text."""
    factors = [f.name for f in plan.spec.factor] or ["treatment"]
    columns = [
        "unit",
        "serial",
        "treatment",
        *[f for f in factors if f != "treatment"],
        "block",
        "whole_plot",
        "row",
        "col",
    ]
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow([neutral(c) for c in columns])
    for u in plan.units:
        levels = [u.levels.get(f, "") for f in factors if f != "treatment"]
        cells = [u.code, u.serial, u.treatment, *levels, u.block, u.whole_plot, u.row, u.col]
        writer.writerow([neutral(c) for c in cells])
    return buf.getvalue()
