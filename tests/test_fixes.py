"""Approved fixes: proposed by check, approved by the lead, applied with --fixes; the returned files never change.

The scenario: one person returns the filled workbook; another re-types a paper sheet into
a CSV with codes only and makes four mistakes a lead must settle — a mistyped code, a slot
that disagrees with the workbook, a row of another study, and a value out of range. The
values are NIST StRD SmLs01's (published data, see tests/reference/README.md).
"""

from __future__ import annotations

import csv
import hashlib
import json
import os
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest

from layout import Plan, loads_spec, make_plan
from layout.intake.check import check_returns
from layout.intake.fixes import FIX_COLUMNS, read_fixes
from layout.outputs.workbook import workbook_bytes
from layout.simulate import Filled, fill_workbook
from tests.conftest import libreoffice_convert
from tests.published import nist_values

SPEC = """
[study]
id = "FX1"
title = "Fixes round trip"
seed = 23
[design]
type = "crd"
replicates = 3
subsamples = 3
unit_name = "pot"
subsample_name = "leaf"
treatments = ["a", "b", "c"]
[[response]]
name = "mass"
kind = "number"
unit = "g"
min = 0
max = 2
decimals = 1
"""


@pytest.fixture(scope="module")
def plan() -> Plan:
    return make_plan(loads_spec(SPEC, "fx.toml"))


def sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def run(*args: str | Path) -> subprocess.CompletedProcess[str]:
    env = {**os.environ, "COLUMNS": "200"}
    return subprocess.run([sys.executable, "-m", "layout", *map(str, args)], capture_output=True, text=True, env=env)


def swap_digits(code: str) -> str:
    """The code with the last two digits of its unit serial swapped (a typist's slip): FX1-007-1A → FX1-070-1A."""
    study, serial, rest = code.split("-")
    return f"{study}-{serial[:-2]}{serial[-1]}{serial[-2]}-{rest}"


@pytest.fixture
def study(plan: Plan, tmp_path: Path) -> dict[str, Path | str]:
    return make_study(plan, tmp_path)


def make_study(plan: Plan, tmp_path: Path) -> dict[str, Path | str]:
    """plan.json, the filled workbook (the first 18 slots) and the re-typed CSV (the other 9, plus mistakes)."""
    values = dict(zip([s.code for s in plan.slots], nist_values("SmLs01"), strict=False))
    plan.save(tmp_path / "plan.json", force=True)
    blank = tmp_path / "entry.xlsx"
    blank.write_bytes(workbook_bytes(plan))
    first, rest = plan.slots[:18], plan.slots[18:]
    book = fill_workbook(
        plan,
        blank,
        tmp_path / "returned-ana.xlsx",
        {(s.code, plan.rounds[0].name): Filled({"mass": values[s.code]}, None) for s in first},
    )
    # a slot of ana's also typed here with another value: a conflict the lead must settle
    clash = first[0]
    typo = rest[0]
    high = rest[1]
    lines = [["code", "mass"]]
    for s in rest:
        code = swap_digits(s.code) if s is typo else s.code
        value = "14.4" if s is high else f"{values[s.code]:.1f}"  # 14.4 for 1.4: a decimal point lost
        lines.append([code, value])
    lines.append([clash.code, f"{values[clash.code] + 0.1:.1f}"])
    # a row from another study's sheet, with a check letter that makes no code of this study either
    letter = next(c for c in "ABCDEFGHJK" if f"FX1-004-2{c}" not in {s.code for s in plan.slots})
    lines.append([f"ZZ7-004-2{letter}", "1.3"])
    typed = tmp_path / "retyped-ben.csv"
    with typed.open("w", newline="", encoding="utf-8") as fh:
        csv.writer(fh).writerows(lines)
    return {"plan": tmp_path / "plan.json", "book": book, "csv": typed, "typo": typo.code, "high": high.code,
            "clash": clash.code, "true_high": f"{values[high.code]:.1f}"}  # fmt: skip


def proposals(folder: Path) -> list[dict[str, str]]:
    text = (folder / "fixes-proposed.csv").read_bytes().decode("utf-8")
    assert text.startswith("\ufeff")  # a BOM, so Excel opens it as UTF-8
    return list(csv.DictReader(text[1:].splitlines()))


def approve(rows: list[dict[str, str]], target: Path, **values: str) -> Path:
    """The rows signed by the lead and written as a fixes file (values: fix id → value to fill in)."""
    with target.open("w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=[*FIX_COLUMNS, "finding"])
        w.writeheader()
        for r in rows:
            w.writerow({**r, "value": values.get(r["fix"], r["value"]), "approved_by": "R. Lead",
                        "approved_on": "2026-11-30", "reason": "checked against the paper sheet"})  # fmt: skip
    return target


def test_round_trip_check_propose_approve_check(study: dict, plan: Plan, tmp_path: Path) -> None:
    """check → fixes-proposed.csv → approve some → check --fixes: the approved errors are gone, the rest stay,
    the exit code follows, and the returned files are byte for byte as they were."""
    before = {p: sha(p) for p in (study["book"], study["csv"])}
    first = run("check", study["plan"], study["book"], study["csv"], "-o", tmp_path / "c1")
    assert first.returncode == 1, first.stdout + first.stderr
    report = json.loads((tmp_path / "c1" / "report.json").read_text(encoding="utf-8"))
    kinds = sorted(f["kind"] for f in report["findings"] if f["severity"] == "error")
    # the mistyped slot is then blank in the workbook, so it also lacks its value
    assert kinds == ["bad-code", "conflicting-slot", "missing-value", "out-of-range", "unknown-code"]
    rows = proposals(tmp_path / "c1")
    by_action = {}
    for r in rows:
        by_action.setdefault(r["action"], []).append(r)
    assert sorted(by_action) == ["ignore-row", "keep-this", "recode", "set-value"]
    assert [r["value"] for r in by_action["recode"]] == [study["typo"]]
    assert len(by_action["keep-this"]) == 2 and all(r["value"] == "" for r in by_action["keep-this"])
    assert by_action["set-value"][0]["value"] == "" and by_action["set-value"][0]["code"] == study["high"]
    assert all(r["approved_by"] == r["approved_on"] == r["reason"] == "" for r in rows)
    assert {r["file_sha256"] for r in rows} <= set(before.values())

    # the lead approves the recode, ana's side of the conflict and the true value; not yet the foreign row
    keep = next(r for r in by_action["keep-this"] if r["file"].endswith(".xlsx"))
    setv = by_action["set-value"][0]
    fixes = approve([by_action["recode"][0], keep, setv], tmp_path / "fixes.csv", **{setv["fix"]: study["true_high"]})
    second = run("check", study["plan"], study["book"], study["csv"], "-o", tmp_path / "c2", "--fixes", fixes)
    assert second.returncode == 1, second.stdout + second.stderr
    report = json.loads((tmp_path / "c2" / "report.json").read_text(encoding="utf-8"))
    assert [f["kind"] for f in report["findings"] if f["severity"] == "error"] == ["unknown-code"]
    applied = {a["fix"]: a for a in report["fixes"]}
    assert set(applied) == {by_action["recode"][0]["fix"], keep["fix"], setv["fix"]}
    assert applied[setv["fix"]]["was"] == "14.4" and applied[setv["fix"]]["now"] == study["true_high"]
    assert all(a["approved_by"] == "R. Lead" and a["reason"] for a in applied.values())
    html = (tmp_path / "c2" / "report.html").read_text(encoding="utf-8")
    assert "R. Lead" in html and setv["fix"] in html

    # every value of the corrected table traced to its file, row and fix
    tidy = pd.read_csv(tmp_path / "c2" / "tidy.csv", dtype=str, keep_default_na=False)
    placed = tidy[tidy["status"] != "unmatched"]
    assert (placed["status"] == "ok").all()
    truth = dict(zip([s.code for s in plan.slots], nist_values("SmLs01"), strict=False))
    for _, t in placed.iterrows():
        assert float(t["mass"]) == pytest.approx(truth[t["code"]], abs=0.051)  # the published value, to 1 decimal
        assert t["source_file"] in (str(study["book"]), str(study["csv"]))
        if t["fix"]:
            fix = applied[t["fix"]]
            assert int(t["source_row"]) == fix["row"] and t["source_file"] == fix["file"]
    traced = dict(zip(placed["code"], placed["fix"], strict=True))
    assert traced[study["typo"]] == by_action["recode"][0]["fix"]
    assert traced[study["high"]] == setv["fix"]
    assert traced[study["clash"]] == keep["fix"]

    # with the foreign row approved as ignored too, the check is clean
    approve([by_action["recode"][0], keep, setv, by_action["ignore-row"][0]], fixes,
            **{setv["fix"]: study["true_high"]})  # fmt: skip
    third = run("check", study["plan"], study["book"], study["csv"], "-o", tmp_path / "c3", "--fixes", fixes)
    assert third.returncode == 0, third.stdout + third.stderr
    assert {p: sha(p) for p in before} == before  # the returned files were only read


def test_bad_fixes_are_errors_and_not_applied(study: dict, tmp_path: Path) -> None:
    """Incomplete, stale and targetless fixes are bad-fix errors; the good ones still apply."""
    run("check", study["plan"], study["book"], study["csv"], "-o", tmp_path / "c1")
    rows = proposals(tmp_path / "c1")
    recode = next(r for r in rows if r["action"] == "recode")
    keep = next(r for r in rows if r["action"] == "keep-this")
    fixes = approve([recode, keep], tmp_path / "fixes.csv")
    with fixes.open("a", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(
            ["u1", study["csv"], recode["file_sha256"], "999", "", "", "ignore-row", "", "R. Lead", "2026-11-30", "x"]
        )
        w.writerow(
            ["u2", "nowhere.csv", recode["file_sha256"], "2", "", "", "ignore-row", "", "R. Lead", "2026-11-30", "x"]
        )
        w.writerow(["u3", study["csv"], recode["file_sha256"], "2", "", "", "ignore-row", "", "", "2026-11-30", "x"])
        w.writerow(
            ["u4", study["csv"], recode["file_sha256"], "2", "", "", "ignore-row", "", "R. Lead", "30/11/2026", "x"]
        )
        w.writerow(["u5", study["csv"], recode["file_sha256"], "3", "NOT-THIS-1A", "", "ignore-row", "", "R. Lead", "2026-11-30", "x"])  # fmt: skip
    result = check_returns(
        __import__("layout").load_plan(study["plan"]), [study["book"], study["csv"]], fixes=read_fixes(fixes)
    )
    bad = {f.value: f.message for f in result.findings if f.kind.value == "bad-fix"}
    assert set(bad) == {"u1", "u2", "u3", "u4", "u5"}
    assert "holds no entry" in bad["u1"] and "not among the returned files" in bad["u2"]
    assert "approved_by is blank" in bad["u3"] and "YYYY-MM-DD" in bad["u4"] and "not 'NOT-THIS-1A'" in bad["u5"]
    assert {a.fix.fix for a in result.fixes} == {recode["fix"], keep["fix"]}

    # the CSV changed after the proposal (someone edited it): its fixes are stale
    study["csv"].write_text(study["csv"].read_text(encoding="utf-8") + "\n", encoding="utf-8")
    again = check_returns(
        __import__("layout").load_plan(study["plan"]), [study["book"], study["csv"]], fixes=read_fixes(fixes)
    )
    stale = [f for f in again.findings if f.kind.value == "bad-fix" and "has changed since" in f.message]
    assert {f.value for f in stale} >= {recode["fix"]}
    assert recode["fix"] not in {a.fix.fix for a in again.fixes}


@pytest.mark.parametrize("encoding", ["utf-8", "utf-8-sig"])
def test_fixes_file_with_or_without_bom(study: dict, tmp_path: Path, encoding: str) -> None:
    """Excel writes 'CSV UTF-8' with a BOM, other programs without; both read the same."""
    run("check", study["plan"], study["book"], study["csv"], "-o", tmp_path / "c1")
    rows = [r for r in proposals(tmp_path / "c1") if r["action"] == "recode"]
    target = approve(rows, tmp_path / "f.csv")
    target.write_text(target.read_text(encoding="utf-8"), encoding=encoding)
    book = read_fixes(target)
    assert [f.fix for f in book.fixes] == [rows[0]["fix"]] and book.bad == []


def test_fixes_file_resaved_by_libreoffice(study: dict, tmp_path: Path, soffice: str) -> None:
    """The lead signs the fixes in LibreOffice Calc and saves as .xlsx or CSV: the same fixes are read."""
    run("check", study["plan"], study["book"], study["csv"], "-o", tmp_path / "c1")
    rows = [r for r in proposals(tmp_path / "c1") if r["action"] in ("recode", "keep-this")][:2]
    source = approve(rows, tmp_path / "signed.csv")
    expected = [(f.fix, f.row, f.action, f.value, f.approved_on) for f in read_fixes(source).fixes]
    for fmt in ("xlsx", "csv"):
        out = libreoffice_convert(soffice, source, fmt, tmp_path / f"lo-{fmt}")
        book = read_fixes(out)
        assert [(f.fix, f.row, f.action, f.value, f.approved_on) for f in book.fixes] == expected, fmt
        assert book.bad == []


def test_fixes_file_problems_one_message_each(study: dict, tmp_path: Path) -> None:
    """Not a CSV, or unknown actions and row numbers: exit 2, one line per problem, no traceback."""
    junk = tmp_path / "fixes.csv"
    junk.write_bytes(bytes(range(256)) * 4)
    r = run("check", study["plan"], study["book"], "--fixes", junk, "-o", tmp_path / "c0")
    assert r.returncode == 2 and "Traceback" not in r.stderr and "fixes" in r.stderr
    wrong = tmp_path / "wrong.csv"
    wrong.write_text(
        ",".join(FIX_COLUMNS) + "\n"
        + "a1,x.csv,,2,,,delete,,me,2026-01-01,r\n"
        + "a2,x.csv,,two,,,recode,X,me,2026-01-01,r\n"
        + "a3,x.csv,,4,,,Recode!,X,me,2026-01-01,r\n",
        encoding="utf-8",
    )  # fmt: skip
    r = run("check", study["plan"], study["book"], "--fixes", wrong, "-o", tmp_path / "c0")
    assert r.returncode == 2 and "Traceback" not in r.stderr
    lines = [line for line in r.stderr.splitlines() if "wrong.csv" in line]
    assert len(lines) == 3, r.stderr
    assert "line 2" in lines[0] and "'delete' is not one of recode, keep-this" in lines[0]
    assert "'two' is not a row number" in lines[1]
    notes = tmp_path / "notes.csv"
    notes.write_text("fix,who\n1,me\n", encoding="utf-8")
    r = run("check", study["plan"], study["book"], "--fixes", notes, "-o", tmp_path / "c0")
    assert r.returncode == 2 and "not a fixes file" in r.stderr and "Traceback" not in r.stderr


def test_a_bare_file_name_takes_the_file_it_was_proposed_for(study: dict, tmp_path: Path) -> None:
    """Two people's files of the same name in two folders: a fix naming only 'retyped-ben.csv' goes to the
    one whose SHA-256 it carries, and the other file's same row is left as it was."""
    first = tmp_path / "a" / "retyped-ben.csv"
    other = tmp_path / "b" / "retyped-ben.csv"
    first.parent.mkdir()
    other.parent.mkdir()
    first.write_bytes(study["csv"].read_bytes())
    other.write_bytes(study["csv"].read_bytes().replace(b"14.4", b"14.5"))
    run("check", study["plan"], first, "-o", tmp_path / "c1")
    recode = next(r for r in proposals(tmp_path / "c1") if r["action"] == "recode")
    fixes = approve([{**recode, "file": "retyped-ben.csv"}], tmp_path / "fixes.csv")
    from layout import load_plan

    result = check_returns(load_plan(study["plan"]), [other, first], fixes=read_fixes(fixes))
    assert [f for f in result.findings if f.kind.value == "bad-fix"] == []
    assert [(a.fix.fix, a.was) for a in result.fixes] == [(recode["fix"], recode["code"])]
    tidy = result.tidy
    fixed = tidy[tidy["fix"].notna()]
    assert list(fixed["source_file"]) == [str(first)]
