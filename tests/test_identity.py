"""A return of another draw never checks clean; blind studies leak nothing to collectors.

Returned values come from the published flatworm data (tests/published.py).
"""

from __future__ import annotations

import csv
import io
import zipfile
from pathlib import Path

import openpyxl
import pytest
from pypdf import PdfReader

from layout import Plan, SheetOptions, load_plan, loads_spec, write_sheets
from layout.cli import main
from layout.intake.check import check_returns
from layout.intake.findings import Kind, Severity
from layout.outputs.workbook import workbook_bytes
from layout.simulate import Filled, fill_workbook
from tests.published import FLATWORM_DESIGN, flatworm_fill

SPEC = f"""
[study]
id = "FW1"
title = "Flatworm density by season"
seed = 1
[design]
{FLATWORM_DESIGN}
unit_name = "site"
subsample_name = "stone"
[[response]]
name = "density"
kind = "number"
min = 0
"""


def _returns(plan: Plan, folder: Path) -> dict[str, Path]:
    """The three ways a return reaches the lead: the workbook, its CSV export, and a CSV re-typed with codes only."""
    folder.mkdir(parents=True, exist_ok=True)
    blank = folder / "entry.xlsx"
    blank.write_bytes(workbook_bytes(plan))
    values = {(code, rnd): Filled({"density": v}, None) for code, rnd, v in flatworm_fill(plan)}
    xlsx = fill_workbook(plan, blank, folder / "filled.xlsx", values)
    exported = folder / "exported.csv"
    ws = openpyxl.load_workbook(xlsx, read_only=True)["entry"]
    with exported.open("w", newline="", encoding="utf-8") as fh:
        csv.writer(fh).writerows([["" if c is None else c for c in row] for row in ws.iter_rows(values_only=True)])
    retyped = folder / "retyped.csv"
    with retyped.open("w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["code", "density"])
        w.writerows([code.lower().replace("-", ""), f"{v:g}"] for code, _, v in flatworm_fill(plan))
    return {"workbook": xlsx, "exported csv": exported, "re-typed csv": retyped}


@pytest.fixture(scope="module")
def old(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, dict[str, Path]]:
    """plan.json made by the command line, and returns filled for it."""
    folder = tmp_path_factory.mktemp("old")
    (folder / "spec.toml").write_text(SPEC, encoding="utf-8")
    assert main(["plan", str(folder / "spec.toml"), "-o", str(folder / "plan.json")]) == 0
    return folder, _returns(load_plan(folder / "plan.json"), folder / "returns")


class TestOwnReturnsAreClean:
    @pytest.mark.parametrize("form", ["workbook", "exported csv", "re-typed csv"])
    def test_clean(self, old: tuple[Path, dict[str, Path]], form: str) -> None:
        """Each form of return checks with no error against the plan it was made for."""
        folder, returns = old
        result = check_returns(load_plan(folder / "plan.json"), [returns[form]])
        assert [f for f in result.findings if f.severity is Severity.ERROR] == []
        assert result.summary["slots_found"] == 36


class TestAnotherDraw:
    @pytest.mark.parametrize("how", [["--force"], ["--force", "--seed", "2"], ["--force", "--seed", "77"]])
    @pytest.mark.parametrize("form", ["workbook", "exported csv", "re-typed csv"])
    def test_remade_plan_refuses_old_returns_once(
        self, old: tuple[Path, dict[str, Path]], tmp_path: Path, how: list[str], form: str
    ) -> None:
        """After 'layout plan --force' (same spec, another seed) a return of the old draw is one wrong-plan finding."""
        folder, returns = old
        plan_path = tmp_path / "plan.json"
        plan_path.write_bytes((folder / "plan.json").read_bytes())
        assert main(["plan", str(folder / "spec.toml"), "-o", str(plan_path), *how]) == 0
        new = load_plan(plan_path)
        old_plan = load_plan(folder / "plan.json")
        result = check_returns(new, [returns[form]])
        if new.fingerprint == old_plan.fingerprint:  # --force with the same seed: the very same draw
            assert [f for f in result.findings if f.severity is Severity.ERROR] == []
            return
        assert new.salt != old_plan.salt
        wrong = [f for f in result.findings if f.kind is Kind.WRONG_PLAN]
        assert len(wrong) == 1 and "another randomization of FW1" in wrong[0].message
        assert not [f for f in result.findings if f.kind in (Kind.BAD_CODE, Kind.UNKNOWN_CODE)]

    def test_another_study_is_one_finding(self, old: tuple[Path, dict[str, Path]]) -> None:
        """A re-typed CSV of another study's plan is one wrong-plan finding naming that study."""
        folder, returns = old
        other = loads_spec(SPEC.replace('id = "FW1"', 'id = "XQ7"'), "other.toml")
        from layout import make_plan

        result = check_returns(make_plan(other), [returns["re-typed csv"]])
        wrong = [f for f in result.findings if f.kind is Kind.WRONG_PLAN]
        assert len(wrong) == 1 and "study FW1" in wrong[0].message
        assert not [f for f in result.findings if f.kind in (Kind.BAD_CODE, Kind.UNKNOWN_CODE)]


BLIND = """
[study]
id = "BZ4"
title = "Coating trial"
seed = 8675309123
blind = true
[design]
type = "split-plot"
blocks = 2
subsamples = 2
unit_name = "panel"
subsample_name = "reading"
[[factor]]
name = "primerkind"
levels = ["zincwhorl", "epoxquint"]
whole_plot = true
[[factor]]
name = "topcoatkind"
levels = ["glossvarn", "mattplex"]
[layout]
rows = 2
cols = 4
[[response]]
name = "gloss"
kind = "number"
[collection]
rounds = ["first"]
"""


def _texts(path: Path) -> str:
    """Every text a collector could see in a file: all parts of a workbook, the page text of a PDF, HTML as is."""
    if path.suffix == ".xlsx":
        with zipfile.ZipFile(path) as z:
            return "\n".join(z.read(n).decode("utf-8", "replace") for n in z.namelist())
    if path.suffix == ".pdf":
        return "\n".join(p.extract_text() for p in PdfReader(io.BytesIO(path.read_bytes())).pages)
    return path.read_text(encoding="utf-8")


class TestBlinding:
    def test_collector_files_hold_no_seed_or_treatment(self, tmp_path: Path, chromium: str) -> None:
        """No collector file (every workbook part with the very hidden sheet, HTML, PDF text) names the seed,
        a factor, a level or a treatment; the lead's files do."""
        spec = loads_spec(BLIND, "blind.toml")
        from layout import make_plan

        plan = make_plan(spec)
        written = write_sheets(plan, tmp_path, SheetOptions(pdf=True, pdf_engine="chromium"))
        secrets = [str(plan.seed), *spec.treatments, "primerkind", "topcoatkind"]
        secrets += [level for f in spec.factor for level in f.levels]
        lead = {"key.csv", "map-key.html", "map-key.pdf"}
        collector = [p for p in written if p.name not in lead]
        assert {p.suffix for p in collector} >= {".xlsx", ".html", ".pdf"}
        for path in collector:
            text = _texts(path)
            leaks = [s for s in secrets if s in text]
            assert leaks == [], (path.name, leaks)
        key = (tmp_path / "key.csv").read_text(encoding="utf-8")
        assert all(t in key for t in spec.treatments)

    def test_check_says_tidy_holds_treatments(self, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
        """For a blind study check says on screen that tidy.csv names the treatments."""
        (tmp_path / "spec.toml").write_text(BLIND, encoding="utf-8")
        main(["plan", str(tmp_path / "spec.toml"), "-o", str(tmp_path / "plan.json")])
        main(["sheets", str(tmp_path / "plan.json"), "--only", "entry"])
        capsys.readouterr()
        main(["check", str(tmp_path / "plan.json"), str(tmp_path / "entry.xlsx")])
        out = capsys.readouterr().out
        assert "blind" in out and "tidy.csv" in out


class TestMistypedStudyId:
    def test_plan_id_suggested(self, old: tuple[Path, dict[str, Path]], tmp_path: Path) -> None:
        """A code typed with a wrong study id is a bad code whose suggestion carries the plan's id."""
        folder, _ = old
        plan = load_plan(folder / "plan.json")
        code, _, value = next(flatworm_fill(plan))
        path = tmp_path / "one.csv"
        path.write_text(f"code,density\n{code.replace('FW1', 'FV1')},{value}\n", encoding="utf-8")
        bad = [f for f in check_returns(plan, [path]).findings if f.kind is Kind.BAD_CODE]
        assert len(bad) == 1 and bad[0].suggestion == code
