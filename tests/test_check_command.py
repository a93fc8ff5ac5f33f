"""layout check on the command line: exit codes, report files, and never overwriting a report."""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest

from layout import Plan
from layout.cli import main
from layout.intake.findings import Kind
from layout.outputs.workbook import workbook_bytes
from layout.simulate import Filled, fill_workbook
from tests.published import nist_values


@pytest.fixture()
def setup(tmp_path: Path, rcbd_plan: Plan) -> tuple[Path, Path]:
    plan_path = rcbd_plan.save(tmp_path / "plan.json")
    blank = tmp_path / "entry.xlsx"
    blank.write_bytes(workbook_bytes(rcbd_plan))
    # published values, not invented ones: NIST StRD SmLs02 (moisture) and SmLs01 (nitrate), in file order
    moisture, nitrate = iter(nist_values("SmLs02")), iter(nist_values("SmLs01"))
    values = {
        (s.code, r.name): Filled({"moisture": next(moisture), "nitrate": next(nitrate)}, None)
        for r in rcbd_plan.rounds
        for s in rcbd_plan.slots
    }
    return plan_path, fill_workbook(rcbd_plan, blank, tmp_path / "filled.xlsx", values)


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

    def test_existing_report_refused_before_the_check_runs(
        self, setup: tuple[Path, Path], tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture
    ) -> None:
        """Without --force, a report already in the folder is refused at once, not after a check of a large
        return (which may take a minute): the check is never started."""
        import layout.intake.check

        plan, filled = setup
        out = tmp_path / "r"
        out.mkdir()
        (out / "tidy.csv").write_text("kept\n", encoding="utf-8")

        def no_check(*args: object, **kwargs: object) -> None:
            raise AssertionError("the check ran")

        monkeypatch.setattr(layout.intake.check, "check_returns", no_check)
        assert main(["check", str(plan), str(filled), "-o", str(out)]) == 2
        assert "tidy.csv: already exists" in capsys.readouterr().err
        assert (out / "tidy.csv").read_text(encoding="utf-8") == "kept\n" and not (out / "report.json").exists()


class TestApi:
    def test_check_returns_gives_findings_and_dataframe(self, setup: tuple[Path, Path], rcbd_plan: Plan) -> None:
        """layout.check_returns(plan, paths) unpacks into the findings and a pandas DataFrame."""
        import pandas as pd

        import layout

        _, filled = setup
        findings, tidy = layout.check_returns(rcbd_plan, [filled])
        assert isinstance(tidy, pd.DataFrame) and len(tidy) == len(rcbd_plan.slots) * 2
        assert all(f.severity.value != "error" for f in findings)


class TestSummaryAndPipes:
    def test_counts_per_kind_and_severity(self, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
        """missing-column has a warning row (one file lacks a column) and an error row (no file has another)."""
        from layout import loads_spec, make_plan
        from tests.published import flatworm_fill
        from tests.test_identity import SPEC

        spec = SPEC.replace("min = 0\n", 'min = 0\n[[response]]\nname = "crust"\nkind = "number"\n')
        plan = make_plan(loads_spec(spec, "s.toml"))
        plan_path = plan.save(tmp_path / "plan.json")
        typed = tmp_path / "typed.csv"
        typed.write_text("code,density\n" + "".join(f"{c},{v}\n" for c, _, v in flatworm_fill(plan)), encoding="utf-8")
        capsys.readouterr()
        assert main(["check", str(plan_path), str(typed), "-o", str(tmp_path / "r")]) == 1
        lines = [ln for ln in capsys.readouterr().out.splitlines() if "missing-column" in ln and "│" in ln]
        assert any("error" in ln for ln in lines) and any("warning" in ln for ln in lines)

    def test_exit_code_same_in_a_pipe(self, setup: tuple[Path, Path], tmp_path: Path) -> None:
        """`layout check ... | head -1` exits as the command does alone (1 here), with no traceback."""
        import subprocess
        import sys

        plan, filled = setup
        bad = tmp_path / "bad.csv"
        bad.write_text("code,round,moisture (%)\nIRR7-001-1Q,june,12\n", encoding="utf-8")
        cmd = [sys.executable, "-m", "layout", "check", str(plan), str(filled), str(bad), "--force", "-o"]
        alone = subprocess.run([*cmd, str(tmp_path / "a")], capture_output=True, text=True)
        piped = subprocess.run(
            f"{' '.join(cmd)} {tmp_path / 'b'} | head -1; exit ${{PIPESTATUS[0]}}",
            shell=True,
            executable="/bin/bash",
            capture_output=True,
            text=True,
        )
        assert alone.returncode == piped.returncode == 1
        assert "Traceback" not in piped.stderr

    def test_nothing_readable_exits_2_with_a_report(self, setup: tuple[Path, Path], tmp_path: Path) -> None:
        """When not one return can be read the exit code is 2, and report.json still says why."""
        plan, _ = setup
        junk = tmp_path / "junk.xlsx"
        junk.write_bytes(b"this is not a workbook")
        assert main(["check", str(plan), str(junk), "-o", str(tmp_path / "r")]) == 2
        report = json.loads((tmp_path / "r" / "report.json").read_text())
        kinds = [f["kind"] for f in report["findings"]]
        assert kinds.count("unreadable-file") == 1
        followers = [f for f in report["findings"] if f["cause"]]
        assert followers and all(f["kind"] in ("missing-unit", "missing-slot") for f in followers)
        assert str(len(followers)) in next(f["message"] for f in report["findings"] if f["kind"] == "unreadable-file")

    def test_same_file_twice_is_read_once(self, setup: tuple[Path, Path], tmp_path: Path) -> None:
        """The same workbook given twice gives one finding about the file, not a duplicate per row."""
        import shutil

        plan, filled = setup
        copy = tmp_path / "copy.xlsx"
        shutil.copy(filled, copy)
        main(["check", str(plan), str(filled), str(copy), "-o", str(tmp_path / "r")])
        report = json.loads((tmp_path / "r" / "report.json").read_text())
        dups = [f for f in report["findings"] if f["kind"] == "duplicate-slot"]
        assert len(dups) == 1 and dups[0]["file"] == str(copy) and dups[0]["code"] is None


class TestReportIsPrintSafe:
    def test_status_colours_differ_in_greyscale_and_carry_marks(self) -> None:
        """Each status of the completeness map has its own mark, and its colour differs from every other's
        lightness by a contrast ratio of at least 1.25 (WCAG 2.x relative luminance), so greyscale prints keep them apart."""
        from layout.intake.report import STATUS_COLOURS, STATUS_MARKS, luminance

        assert set(STATUS_MARKS) == set(STATUS_COLOURS) and len(set(STATUS_MARKS.values())) == len(STATUS_MARKS)
        levels = sorted(luminance(c) for c in STATUS_COLOURS.values())
        ratios = [(b + 0.05) / (a + 0.05) for a, b in zip(levels, levels[1:], strict=False)]
        assert min(ratios) >= 1.25, ratios

    def test_findings_name_files_not_paths(self, setup: tuple[Path, Path], tmp_path: Path) -> None:
        """The findings table shows a file's name (its full path is in the files table and the cell's title)."""
        plan, filled = setup
        bad = tmp_path / "deep" / "folder" / "bad.csv"
        bad.parent.mkdir(parents=True)
        bad.write_text("code,round,moisture (%)\nIRR7-001-1Q,june,12\n", encoding="utf-8")
        main(["check", str(plan), str(filled), str(bad), "-o", str(tmp_path / "r")])
        html = (tmp_path / "r" / "report.html").read_text(encoding="utf-8")
        assert f">{bad.name}</td>" in html and f"<td>{bad}</td>" in html


class TestLargeStudies:
    def test_report_html_summarises_beyond_its_limits(
        self, tmp_path: Path, rcbd_plan: Plan, monkeypatch: pytest.MonkeyPatch, setup: tuple[Path, Path]
    ) -> None:
        """Past the limits (lowered here) report.html lists the first findings and says how many more,
        counts units by status instead of drawing them, and leaves the plots out; report.json keeps all."""
        from layout.intake import report

        monkeypatch.setattr(report, "MAX_FINDINGS_SHOWN", 2)
        monkeypatch.setattr(report, "MAX_MAP_UNITS", 3)
        monkeypatch.setattr(report, "MAX_PLOT_UNITS", 3)
        plan_path, _ = setup
        empty = tmp_path / "half.csv"
        empty.write_text("code,moisture\n" + "".join(f"{s.code},\n" for s in rcbd_plan.slots[:5]), encoding="utf-8")
        assert main(["check", str(plan_path), str(empty), "-o", str(tmp_path / "c")]) == 1
        data = json.loads((tmp_path / "c" / "report.json").read_text(encoding="utf-8"))
        html = (tmp_path / "c" / "report.html").read_text(encoding="utf-8")
        assert len(data["findings"]) > 2
        shown_and_left = re.search(r"<b>(\d+) more findings?</b> \(the first (\d+) are shown", html)
        assert shown_and_left and int(shown_and_left.group(2)) == 2 and int(shown_and_left.group(1)) > 0
        assert "too many to draw" in html and "per-unit plots are left out" in html
        assert '<svg class="strip"' not in html


def test_progress_names_each_step(setup: tuple[Path, Path], rcbd_plan: Plan) -> None:
    """The spinner's text names each step that takes seconds in a large check: every file as it is read (a copy
    included, which is then passed over), the merge, the screening."""
    from layout.intake.check import check_returns

    _, filled = setup
    steps: list[str] = []
    check_returns(rcbd_plan, [filled, filled], progress=steps.append)
    assert steps == [
        f"reading {filled}",
        f"reading {filled}",
        "merging and looking for missing slots",
        "looking for outlying subsamples and swapped units",
    ]
