"""layout sheets: subsets, options, and never losing a filled-in workbook."""

from __future__ import annotations

import hashlib
import time
from contextlib import contextmanager
from pathlib import Path

import openpyxl
import pytest

from layout import Plan
from layout.cli import main
from layout.outputs import SheetOptions, write_sheets
from layout.outputs.write import planned_files


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.fixture()
def plan_file(tmp_path: Path, crd_plan: Plan) -> Path:
    return crd_plan.save(tmp_path / "plan.json")


class TestNeverLoseWork:
    def test_filled_workbook_survives_a_second_run(self, plan_file: Path, capsys: pytest.CaptureFixture[str]) -> None:
        """A filled entry.xlsx is untouched when sheets runs again without --force, and nothing else is written."""
        out = plan_file.parent / "out"
        assert main(["sheets", str(plan_file), "-o", str(out)]) == 0
        wb = openpyxl.load_workbook(out / "entry.xlsx")
        wb["entry"]["I2"] = 123.0
        wb.save(out / "entry.xlsx")
        filled = _digest(out / "entry.xlsx")
        (out / "sheets.html").unlink()
        capsys.readouterr()
        assert main(["sheets", str(plan_file), "-o", str(out)]) == 2
        assert "entry.xlsx: already exists" in capsys.readouterr().err
        assert _digest(out / "entry.xlsx") == filled
        assert not (out / "sheets.html").exists()  # refused before writing anything

    def test_force_replaces(self, plan_file: Path) -> None:
        """With --force the outputs are made again."""
        out = plan_file.parent / "out"
        assert main(["sheets", str(plan_file), "-o", str(out), "--only", "key"]) == 0
        (out / "key.csv").write_text("scribbled")
        assert main(["sheets", str(plan_file), "-o", str(out), "--only", "key", "--force"]) == 0
        assert (out / "key.csv").read_text().startswith("unit,serial,treatment")


class TestSubsetsAndRepeatability:
    @pytest.mark.parametrize(
        ("only", "expected"),
        [
            ("entry", {"entry.xlsx"}),
            ("labels,key", {"labels.html", "unit-labels.html", "key.csv"}),
            ("map", {"map.html", "map-key.html"}),
        ],
    )
    def test_only(self, plan_file: Path, only: str, expected: set[str]) -> None:
        """--only makes exactly the named products."""
        out = plan_file.parent / "o"
        assert main(["sheets", str(plan_file), "-o", str(out), "--only", only]) == 0
        assert {p.name for p in out.iterdir()} == expected

    def test_outputs_repeat_byte_for_byte(self, crd_plan: Plan, tmp_path: Path) -> None:
        """Every non-PDF output is the same, byte for byte, when made again."""
        first = write_sheets(crd_plan, tmp_path / "a")
        time.sleep(1.1)  # anything stamped with the clock (to the second) would now differ
        second = write_sheets(crd_plan, tmp_path / "b")
        assert [p.name for p in first] == planned_files(crd_plan, SheetOptions())
        assert [_digest(p) for p in first] == [_digest(p) for p in second]


class TestBadOptions:
    @pytest.mark.parametrize(
        ("args", "message"),
        [
            (["--only", "entry,maps"], "--only: 'maps' is not one of entry, sheets, labels, map, key"),
            (["--label-size", "fifty"], "--label-size: must be two numbers such as 64x34, got 'fifty'"),
            (["--label-grid", "4x8"], "--label-grid: 4 x 8 labels of 64 x 34 mm need 269 x 284.5 mm"),
            (["--label-size", "8x8", "--label-printer"], "--label-size: labels must be at least 12 x 12 mm"),
            (["--pdf", "--pdf-engine", "/no/such/browser"], "--pdf-engine: '/no/such/browser' is not"),
        ],
    )
    def test_exit_2_with_one_line(
        self, plan_file: Path, args: list[str], message: str, capsys: pytest.CaptureFixture[str]
    ) -> None:
        """A bad option is one line on stderr and exit 2, and nothing is written."""
        out = plan_file.parent / "bad"
        assert main(["sheets", str(plan_file), "-o", str(out), *args]) == 2
        err = capsys.readouterr().err.strip()
        assert err.startswith(f"error: {message}") and "\n" not in err
        assert not out.exists() or not any(out.iterdir())

    def test_edited_plan_refused(self, plan_file: Path, capsys: pytest.CaptureFixture[str]) -> None:
        """An edited plan is refused before anything is made."""
        plan_file.write_text(plan_file.read_text().replace('"treatment": "0"', '"treatment": "8"', 1))
        assert main(["sheets", str(plan_file), "-o", str(plan_file.parent / "x")]) == 2
        assert "the plan was edited" in capsys.readouterr().err


class TestLetterPaper:
    def test_letter_paper_gets_a_label_sheet_that_fits(self, plan_file: Path, tmp_path: Path) -> None:
        """--paper letter without label options uses a label sheet that fits letter paper."""
        from layout.outputs.labels import PAPER_MM, LabelGeometry

        out = tmp_path / "letter"
        assert main(["sheets", str(plan_file), "-o", str(out), "--paper", "letter", "--only", "labels,sheets"]) == 0
        g = LabelGeometry.for_paper("letter").check()
        assert g.top + g.rows * g.height <= PAPER_MM["letter"][1]
        assert "215.9mm 279.4mm" in (out / "labels.html").read_text()


def test_progress_names_every_product_and_completes(
    crd_plan: Plan, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """With progress on, each product that takes seconds at 100,000 slots has a bar, and every bar is
    advanced to its total (a bar that never completes would leave the user guessing)."""
    from layout.outputs import write

    bars: dict[str, list[int]] = {}
    real = write._Bar.task

    def recording(self: object, name: str, total: int):  # type: ignore[no-untyped-def]
        bars[name] = [0, total]
        with real(self, name, total) as tick:  # type: ignore[arg-type]

            def counted() -> None:
                bars[name][0] += 1
                tick()

            yield counted

    monkeypatch.setattr(write._Bar, "task", contextmanager(recording))
    write_sheets(crd_plan, tmp_path / "out", SheetOptions(progress=True))
    assert {"entry workbook", "collection sheets sheets.html", "slot labels", "unit labels"} <= set(bars)
    assert all(done == total for done, total in bars.values()), bars
