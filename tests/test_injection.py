"""Text from a spec or a returned file never becomes a formula in a spreadsheet or markup in a page.

OWASP, "CSV Injection": cells beginning with =, +, -, @, tab or carriage return are
neutralised in CSV files meant for a spreadsheet (key.csv, fixes-proposed.csv); tidy.csv is
for analysis software and keeps every value exactly. Every HTML page escapes user text.
"""

from __future__ import annotations

import csv
import io
import re
from pathlib import Path

import pandas as pd

from layout import SheetOptions, loads_spec, make_plan, write_sheets
from layout.intake.check import check_returns
from layout.intake.report import write_report
from layout.outputs.keyfile import key_csv
from layout.spreadsheet_text import TRIGGERS, neutral, restored

SPEC = """
[study]
id = "IJ1"
title = "<script>alert('title')</script> & trial"
seed = 5
[design]
type = "rcbd"
blocks = 2
subsamples = 2
unit_name = "<i>pot</i>"
treatments = ["=HYPERLINK(\\"http://x\\")", "+1", "-2", "@SUM(A1)", "<b>bold</b>"]
[[response]]
name = "y"
kind = "number"
[[response]]
name = "<img src=x onerror=alert(1)>"
kind = "text"
required = false
"""


def plan():  # noqa: ANN201 - a small helper, not a fixture
    return make_plan(loads_spec(SPEC, "ij.toml"))


def test_key_csv_neutralises_formula_starts() -> None:
    """Every key.csv cell that begins with a formula character starts with an apostrophe (OWASP)."""
    cells = [c for row in csv.reader(io.StringIO(key_csv(plan()))) for c in row]
    assert not [c for c in cells if c.startswith(TRIGGERS)]
    assert {'\'=HYPERLINK("http://x")', "'+1", "'-2", "'@SUM(A1)"} <= set(cells)


def test_neutral_and_restored_are_inverse() -> None:
    for text in ("=1", "+a", "-b", "@c", "\tx", "\ry", "plain", "'quoted", "", "'=kept"):
        assert restored(str(neutral(text))) == text


def test_tidy_keeps_values_exact_and_pages_escape_user_text(tmp_path: Path) -> None:
    """A returned note and text value that look like formulas or markup reach tidy.csv exactly,
    and no HTML output carries them as live markup."""
    p = plan()
    written = write_sheets(p, tmp_path / "out", SheetOptions(only=("sheets", "labels", "map")))
    returned = tmp_path / "typed.csv"
    s = p.slots[0]
    with returned.open("w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["code", "y", "<img src=x onerror=alert(1)>", "note"])
        w.writerow([s.code, "=1+2", "<script>alert(2)</script>", "=cmd|' /C calc'!A0"])
    result = check_returns(p, [returned])
    pages = [*(f for f in written if f.suffix == ".html"), *write_report(p, result, tmp_path / "checked")]
    for page in (f for f in pages if f.suffix == ".html"):
        html = page.read_text(encoding="utf-8")
        assert not re.search(r"<script>alert|<img src=x|<b>bold|<i>pot", html), page.name
    tidy = pd.read_csv(tmp_path / "checked" / "tidy.csv", dtype=str, keep_default_na=False)
    row = tidy[tidy["code"] == s.code].iloc[0]
    assert row["note"] == "=cmd|' /C calc'!A0"  # exactly as typed: tidy.csv is for analysis software
    assert row["<img src=x onerror=alert(1)>"] == "<script>alert(2)</script>"
    assert "y==1+2" in row["raw"]  # the refused text is kept as typed
