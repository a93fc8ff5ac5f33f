"""Returned files, each beside the findings it must produce (tests/returns/NAME.csv and NAME.csv.expected).

The values are the published flatworm densities (Quinn & Keough 2002, via Logan 2010; see
tests/reference/README.md), each file with one planted fault. Real counts are skewed: two
stones are far enough from their sites' others that the outlier warning fires in every
file, as it would for a user of this data; those two lines are part of every expectation.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from layout import Plan, load_spec, make_plan
from layout.intake.check import check_returns
from layout.intake.findings import Kind

HERE = Path(__file__).parent / "returns"
CASES = sorted(HERE.glob("*.csv"))


@pytest.fixture(scope="module")
def plan() -> Plan:
    return make_plan(load_spec(HERE / "study.toml"))


def found(plan: Plan, path: Path) -> list[str]:
    result = check_returns(plan, [path])
    return sorted({f"{f.kind.value} {f.severity.value} {f.code or '-'} {f.row or '-'}" for f in result.findings})


def test_the_folder_covers_every_kind_a_single_csv_can_show() -> None:
    """Every finding kind has a file here, except those that need a workbook, two files or a spread of units."""
    named = {p.stem for p in CASES}
    elsewhere = {
        "wrong-plan",
        "formula-cell",
        "possible-swap",
        "bad-fix",
    }  # test_identity, test_check, test_robust, test_fixes
    assert {k.value for k in Kind} - elsewhere <= named


@pytest.mark.parametrize("path", CASES, ids=lambda p: p.stem)
def test_findings_as_expected(plan: Plan, path: Path) -> None:
    """The file gives exactly the findings (kind, severity, code, row) written beside it."""
    expected = (path.parent / f"{path.name}.expected").read_text(encoding="utf-8").split("\n")
    assert found(plan, path) == [line for line in expected if line]
