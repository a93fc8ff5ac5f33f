"""layout check on the command line: exit codes, report files, and never overwriting a report."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from layout import Plan
from layout.cli import main
from layout.intake.findings import Kind
from layout.outputs.workbook import workbook_bytes
from layout.simulate import fill_workbook, simulate


@pytest.fixture()
def setup(tmp_path: Path, rcbd_plan: Plan) -> tuple[Path, Path]:
    plan_path = rcbd_plan.save(tmp_path / "plan.json")
    blank = tmp_path / "entry.xlsx"
    blank.write_bytes(workbook_bytes(rcbd_plan))
    return plan_path, fill_workbook(rcbd_plan, blank, tmp_path / "filled.xlsx", simulate(rcbd_plan))


class TestExitCodes:
    def test_clean_exits_0_and_writes_reports(self, setup: tuple[Path, Path], tmp_path: Path) -> None:
        """A clean return exits 0 and writes report.json, report.html and tidy.csv."""
        plan, filled = setup
        assert main(["check", str(plan), str(filled), "-o", str(tmp_path / "r")]) == 0
        report = json.loads((tmp_path / "r" / "report.json").read_text())
        assert set(report) >= {"summary", "findings"}
        assert report["summary"]["by_severity"]["error"] == 0
        assert report["summary"]["slots_expected"] == report["summary"]["slots_found"]
        assert (tmp_path / "r" / "report.html").read_text().count("<svg") >= 2
        assert (tmp_path / "r" / "tidy.csv").read_text().startswith("code,unit,serial,treatment")

    def test_terminal_summary(
        self, setup: tuple[Path, Path], tmp_path: Path, capsys: pytest.CaptureFixture[str]
    ) -> None:
        """The terminal shows slot counts, a count per kind and the first findings, errors first."""
        plan, filled = setup
        bad = tmp_path / "bad.csv"
        bad.write_text("code,round,moisture (%),nitrate (mg/kg),sampled_on\nnot-a-code,june,12,3,\n", encoding="utf-8")
        assert main(["check", str(plan), str(filled), str(bad), "-o", str(tmp_path / "r")]) == 1
        shown = capsys.readouterr().out
        assert "128 of 128 slot-rounds found in 2 file(s)" in shown
        assert "bad-code" in shown and "1 error(s)" in shown
        lines = [line for line in shown.splitlines() if line.startswith(("error:", "warning:"))]
        assert lines[0].startswith("error:")
        html = (tmp_path / "r" / "report.html").read_text()
        rows = [
            html.index(f'<tr class="{sev}">') for sev in ("error", "warning", "info") if f'<tr class="{sev}">' in html
        ]
        assert rows == sorted(rows) and len(rows) >= 2  # the findings table lists errors first

    def test_errors_exit_1(self, setup: tuple[Path, Path], tmp_path: Path) -> None:
        """A return with an error exits 1 and the report lists it with all its fields."""
        plan, filled = setup
        bad = tmp_path / "bad.csv"
        bad.write_text("code,round,moisture (%)\nIRR7-001-1Q,june,12\n", encoding="utf-8")
        assert main(["check", str(plan), str(filled), str(bad), "-o", str(tmp_path / "r")]) == 1
        findings = json.loads((tmp_path / "r" / "report.json").read_text())["findings"]
        assert all(
            set(f)
            == {"kind", "severity", "file", "row", "code", "unit", "column", "value", "message", "suggestion", "cause"}
            for f in findings
        )
        assert any(
            f["kind"] in (Kind.BAD_CODE.value, Kind.CONFLICTING_SLOT.value, Kind.DUPLICATE_SLOT.value) for f in findings
        )

    @pytest.mark.parametrize("which", ["plan", "returned"])
    def test_missing_file_exits_2(
        self, setup: tuple[Path, Path], tmp_path: Path, which: str, capsys: pytest.CaptureFixture[str]
    ) -> None:
        """A plan or returned file that does not exist is one line and exit 2."""
        plan, filled = setup
        args = (
            [str(tmp_path / "nope.json"), str(filled)] if which == "plan" else [str(plan), str(tmp_path / "nope.csv")]
        )
        assert main(["check", *args, "-o", str(tmp_path / "r")]) == 2
        err = capsys.readouterr().err.strip()
        assert "nope" in err and "no such file" in err and "\n" not in err

    def test_report_not_overwritten_without_force(self, setup: tuple[Path, Path], tmp_path: Path) -> None:
        """A second check into the same folder needs --force; the first report stays until then."""
        plan, filled = setup
        out = tmp_path / "r"
        assert main(["check", str(plan), str(filled), "-o", str(out)]) == 0
        before = (out / "report.json").read_bytes()
        assert main(["check", str(plan), str(filled), "-o", str(out)]) == 2
        assert (out / "report.json").read_bytes() == before
        assert main(["check", str(plan), str(filled), "-o", str(out), "--force"]) == 0


class TestApi:
    def test_check_returns_gives_findings_and_dataframe(self, setup: tuple[Path, Path], rcbd_plan: Plan) -> None:
        """layout.check_returns(plan, paths) unpacks into the findings and a pandas DataFrame."""
        import pandas as pd

        import layout

        _, filled = setup
        findings, tidy = layout.check_returns(rcbd_plan, [filled])
        assert isinstance(tidy, pd.DataFrame) and len(tidy) == len(rcbd_plan.slots) * 2
        assert all(f.severity.value != "error" for f in findings)
