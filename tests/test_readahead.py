"""Returned files read one ahead in a thread: the same tables and the same refusals as reading each in turn,
nothing parsed before its safety checks, and a plan that fails to load still ends the command at once."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest

from layout import Plan, loads_spec, make_plan
from layout.cli import main
from layout.errors import UnreadableFile
from layout.intake import readers
from layout.intake.readahead import ReadAhead
from layout.intake.readers import read_returned
from layout.outputs.workbook import workbook_bytes
from layout.simulate import Filled, fill_workbook
from tests.published import nist_values
from tests.test_hostile import LAUGHS, SPEC, _ole, _rezip

RETURNS = Path(__file__).parent / "returns"


@pytest.fixture(scope="module")
def plan() -> Plan:
    return make_plan(loads_spec(SPEC, "ra.toml"))


@pytest.fixture(scope="module")
def files(plan: Plan, tmp_path_factory: pytest.TempPathFactory) -> list[Path]:
    """A filled workbook (NIST StRD SmLs01 values), a binary .xls, the workbook again, a CSV, a workbook with a DTD,
    a blank workbook and a file that is not there."""
    folder = tmp_path_factory.mktemp("ra")
    blank = folder / "entry.xlsx"
    blank.write_bytes(workbook_bytes(plan))
    values = iter(nist_values("SmLs01"))
    filled = {(s.code, plan.rounds[0].name): Filled({"y": next(values)}, None) for s in plan.slots}
    good = fill_workbook(plan, blank, folder / "filled.xlsx", filled)
    (folder / "old.xls").write_bytes(_ole(False))
    shutil.copy(good, folder / "copy.xlsx")
    laughs = _rezip(good, folder / "laughs.xlsx", lambda n, d: LAUGHS.encode() if "sheet1" in n else d, {})
    return [good, folder / "old.xls", folder / "copy.xlsx", RETURNS / "clean.csv", laughs, blank, folder / "gone.xlsx"]


def _outcome(read: object) -> object:
    """A table's content, or the refusal's type and message."""
    try:
        table = read() if callable(read) else read
    except (UnreadableFile, OSError) as exc:
        return type(exc).__name__, str(exc)
    return vars(table)


def test_same_tables_and_refusals_as_reading_each_in_turn(files: list[Path]) -> None:
    ahead = ReadAhead(files)
    for place, path in enumerate(files):
        assert _outcome(lambda p=place: ahead.take(p)) == _outcome(lambda p=path: read_returned(p)), path.name


def test_passed_over_files_are_not_kept_and_places_only_rise(files: list[Path]) -> None:
    ahead = ReadAhead(files)
    assert _outcome(lambda: ahead.take(2)) == _outcome(lambda: read_returned(files[2]))  # 0 and 1 passed over
    assert _outcome(lambda: ahead.take(5)) == _outcome(lambda: read_returned(files[5]))
    with pytest.raises(ValueError, match="taken already"):
        ahead.take(2)


def test_nothing_is_parsed_before_its_safety_checks(files: list[Path], monkeypatch: pytest.MonkeyPatch) -> None:
    """The workbook with a DTD is refused by the zip scan in the caller's thread; calamine never opens it."""
    parsed: list[str] = []
    real = readers._read_book
    monkeypatch.setattr(readers, "_read_book", lambda p, formulas: parsed.append(p.name) or real(p, formulas))
    ahead = ReadAhead([files[4], files[5]])
    with pytest.raises(UnreadableFile, match="document type"):
        ahead.take(0)
    ahead.take(1)
    assert parsed == [files[5].name]


def test_check_reads_each_file_once_and_in_order(plan: Plan, files: list[Path], tmp_path: Path) -> None:
    """Through the command: the copy is named as a copy, the refusals are at their files, in the order given."""
    plan.save(tmp_path / "plan.json")
    given = [str(p) for p in files[:6]]
    assert main(["check", str(tmp_path / "plan.json"), *given, "-o", str(tmp_path / "checked")]) == 1
    report = json.loads((tmp_path / "checked" / "report.json").read_text(encoding="utf-8"))
    statuses = [f["status"] for f in report["summary"]["files"]]
    assert statuses[:3] == ["read", "unreadable", f"same as {given[0]}"]
    assert statuses[4] == "unreadable"


def test_a_plan_that_will_not_load_still_ends_the_check(
    files: list[Path], tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """The first workbook's read has started when the plan fails: one line, exit code 2, no waiting on it."""
    bad = tmp_path / "plan.json"
    bad.write_text("{not json", encoding="utf-8")
    assert main(["check", str(bad), str(files[0])]) == 2
    err = capsys.readouterr().err
    assert "plan.json" in err and "not valid JSON" in err and "Traceback" not in err
