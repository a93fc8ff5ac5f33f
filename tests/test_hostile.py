"""Broken, huge and malicious returns: each refused with a clear unreadable-file message, quickly, with no traceback.

The attack files follow the published descriptions: "billion laughs" entity expansion and
XML external entities (OWASP, "XML External Entity Prevention Cheat Sheet"), a zip bomb
(a part that unpacks far beyond its packed size), and an encrypted Office file, which is a
compound file holding a stream named EncryptedPackage ([MS-OFFCRYPTO] 2.3.4; the container
here is a minimal stand-in with that stream name, not a real encryption).
"""

from __future__ import annotations

import hashlib
import json
import os
import subprocess
import sys
import time
import zipfile
from collections.abc import Callable
from pathlib import Path

import pytest

from layout import Plan, loads_spec, make_plan
from layout.intake.check import check_returns
from layout.intake.findings import Kind
from layout.outputs.workbook import workbook_bytes
from layout.simulate import Filled, fill_workbook
from tests.published import nist_values

SPEC = """
[study]
id = "HX1"
title = "Hostile files"
seed = 7
[design]
type = "crd"
replicates = 2
subsamples = 2
treatments = ["a", "b"]
[[response]]
name = "y"
kind = "number"
"""

LAUGHS = (
    '<?xml version="1.0"?>\n<!DOCTYPE lolz [<!ENTITY lol "lol">'
    + "".join(f'<!ENTITY lol{i} "{("&lol" + str(i - 1) + ";") * 10 if i > 1 else "&lol;" * 10}">' for i in range(1, 10))
    + ']>\n<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main"><sheetData>'
    '<row r="1"><c r="A1" t="inlineStr"><is><t>&lol9;</t></is></c></row></sheetData></worksheet>'
)
XXE = (
    '<?xml version="1.0"?>\n<!DOCTYPE x [<!ENTITY xxe SYSTEM "file:///etc/passwd">]>\n'
    '<sst xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main"><si><t>&xxe;</t></si></sst>'
)


@pytest.fixture(scope="module")
def plan() -> Plan:
    return make_plan(loads_spec(SPEC, "hx.toml"))


@pytest.fixture(scope="module")
def good(plan: Plan, tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A filled workbook with published values (NIST StRD SmLs01)."""
    folder = tmp_path_factory.mktemp("good")
    blank = folder / "entry.xlsx"
    blank.write_bytes(workbook_bytes(plan))
    values = iter(nist_values("SmLs01"))
    filled = {(s.code, plan.rounds[0].name): Filled({"y": next(values)}, None) for s in plan.slots}
    return fill_workbook(plan, blank, folder / "filled.xlsx", filled)


def _rezip(good: Path, target: Path, change: Callable[[str, bytes], bytes | None], extra: dict[str, bytes]) -> Path:
    """A copy of the workbook with its parts changed (None drops a part) and extra parts added."""
    with zipfile.ZipFile(good) as src, zipfile.ZipFile(target, "w", zipfile.ZIP_DEFLATED) as dst:
        for info in src.infolist():
            data = change(info.filename, src.read(info))
            if data is not None:
                dst.writestr(info.filename, data)
        for name, data in extra.items():
            dst.writestr(name, data)
    return target


def _ole(encrypted: bool) -> bytes:
    """A compound-file header and a directory entry name, as in an .xls or an encrypted Office file."""
    name = ("EncryptedPackage" if encrypted else "Workbook").encode("utf-16-le")
    return b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + bytes(504) + name + bytes(4096)


def _date_out_of_range(good: Path, target: Path) -> Path:
    """A value cell formatted as a date whose serial number lies beyond any calendar (found by the fuzzer:
    python-calamine panics on it, and a panic is no Exception)."""
    import datetime as dt

    import openpyxl

    wb = openpyxl.load_workbook(good)
    ws = wb["entry"]
    ws.protection.sheet = False
    ws.cell(2, ws.max_column).value = dt.datetime(2020, 1, 1)
    ws.cell(2, ws.max_column).value = -1.1e11
    wb.save(target)
    return target


def _patched(good: Path, target: Path, part: str, where: str) -> Path:
    """The workbook with one part's zip record made inconsistent, as a bad copy or a forged file would be
    (layout of the records: PKWARE APPNOTE.TXT, sections 4.3.7 and 4.3.12):
    'method' names another compression method, 'crc' changes the CRC-32 the directory gives, 'data'
    overwrites packed bytes in the middle of the part, 'size' makes the directory's unpacked size a tenth
    of the real one."""
    data = bytearray(good.read_bytes())
    with zipfile.ZipFile(good) as z:
        info = z.getinfo(part)
    name = part.encode()
    central = next(
        k for k in range(len(data)) if data.startswith(b"PK\x01\x02", k) and data[k + 46 : k + 46 + len(name)] == name
    )
    if where == "method":  # deflated data said to be bzip2 (method 12), whose reader raises OSError on it
        data[central + 10 : central + 12] = (12).to_bytes(2, "little")
    elif where == "crc":
        data[central + 16 : central + 20] = ((info.CRC + 1) % 2**32).to_bytes(4, "little")
    elif where == "size":
        data[central + 24 : central + 28] = (info.file_size // 10).to_bytes(4, "little")
    else:
        head = info.header_offset
        lengths = int.from_bytes(data[head + 26 : head + 28], "little") + int.from_bytes(
            data[head + 28 : head + 30], "little"
        )
        start = head + 30 + lengths
        middle = start + info.compress_size // 2
        data[middle : middle + 64] = bytes(range(64))
    target.write_bytes(bytes(data))
    return target


# name → (file name, how to make it from the good workbook, words the message must hold)
CASES: dict[str, tuple[str, Callable[[Path, Path], Path | bytes], str]] = {
    "empty-xlsx": ("e.xlsx", lambda g, t: b"", "is empty"),
    "empty-csv": ("e.csv", lambda g, t: b"", "is empty"),
    "blank-lines-csv": ("b.csv", lambda g, t: b"\n\n \n", "no text"),
    "random-bytes-xlsx": ("r.xlsx", lambda g, t: bytes((i * 131 + 7) % 256 for i in range(5000)), "not a workbook"),
    "random-bytes-csv": ("r.csv", lambda g, t: bytes((i * 131 + 7) % 256 for i in range(5000)), "not a workbook"),
    "truncated-xlsx": ("t.xlsx", lambda g, t: g.read_bytes()[: g.stat().st_size // 2], "damaged"),
    "text-named-xlsx": ("x.xlsx", lambda g, t: b"code,y\nHX1-001-1A,1\n", "text file, not a workbook"),
    "encrypted-xlsx": ("p.xlsx", lambda g, t: _ole(True), "password-protected"),
    "xls-named-xlsx": ("o.xlsx", lambda g, t: _ole(False), "save it as .xlsx"),
    "xls": ("o.xls", lambda g, t: _ole(False), "save as .xlsx"),
    "nul-csv": ("n.csv", lambda g, t: b"code,y\nHX1\x00-001,1\n", "not a workbook"),
    "utf16-csv": ("u.csv", lambda g, t: "code\ty\nHX1-001-1A\t1\n".encode("utf-16"), "CSV UTF-8"),
    "one-30mb-line-csv": ("l.csv", lambda g, t: b"code," + b"9" * (30 * 1024 * 1024), "longer than"),
    "huge-cell-csv": ("c.csv", lambda g, t: b"code,y\nA," + b"x" * 200_000 + b"\n", "longer than"),
    "workbook-named-csv": ("w.csv", lambda g, t: g.read_bytes(), "not a CSV file"),
    "billion-laughs": (
        "bl.xlsx",
        lambda g, t: _rezip(g, t, lambda n, d: LAUGHS.encode() if n == "xl/worksheets/sheet1.xml" else d, {}),
        "document type",
    ),
    "external-entity": (
        "xxe.xlsx",
        lambda g, t: _rezip(g, t, lambda n, d: d, {"xl/sharedStrings.xml": XXE.encode()}),
        "document type",
    ),
    "utf16-dtd": (
        "u16.xlsx",
        lambda g, t: _rezip(
            g, t, lambda n, d: d, {"xl/extra.xml": XXE.replace('"1.0"?', '"1.0" encoding="UTF-16"?').encode("utf-16")}
        ),
        "document type",
    ),  # fmt: skip
    "date-out-of-range": ("d.xlsx", _date_out_of_range, "out of any range"),
    "bad-crc": ("crc.xlsx", lambda g, t: _patched(g, t, "xl/worksheets/sheet1.xml", "crc"), "damaged"),
    "wrong-method": ("m.xlsx", lambda g, t: _patched(g, t, "xl/worksheets/sheet1.xml", "method"), "cannot be unpacked"),
    "bad-packed-data": ("pk.xlsx", lambda g, t: _patched(g, t, "xl/worksheets/sheet1.xml", "data"), "damaged"),
    "larger-than-declared": (
        "big.xlsx",
        lambda g, t: _patched(g, t, "xl/worksheets/sheet1.xml", "size"),
        "larger than its zip entry says",
    ),
    "zip-bomb": (
        "bomb.xlsx",
        lambda g, t: _rezip(g, t, lambda n, d: d, {"xl/media/bomb.bin": bytes(300 * 1024 * 1024)}),
        "refused as unsafe",
    ),
}


@pytest.mark.parametrize("case", sorted(CASES), ids=str)
def test_refused_with_a_clear_message(case: str, plan: Plan, good: Path, tmp_path: Path) -> None:
    """One unreadable-file finding whose message says what the file is, within seconds."""
    name, make, words = CASES[case]
    target = tmp_path / name
    made = make(good, target)
    if isinstance(made, bytes):
        target.write_bytes(made)
    before = hashlib.sha256(target.read_bytes()).hexdigest()
    started = time.monotonic()
    result = check_returns(plan, [target])
    took = time.monotonic() - started
    refused = [f for f in result.findings if f.kind is Kind.UNREADABLE_FILE]
    assert len(refused) == 1, [f.message for f in result.findings][:3]
    assert words in refused[0].message, refused[0].message
    assert "\n" not in refused[0].message and "Traceback" not in refused[0].message
    assert took < 10, f"{case} took {took:.1f} s"
    assert hashlib.sha256(target.read_bytes()).hexdigest() == before  # read only


def test_xlsm_values_are_read_and_nothing_run(plan: Plan, good: Path, tmp_path: Path) -> None:
    """A macro workbook (.xlsm, with a VBA part) is read for its values; its macros are never run."""
    target = _rezip(good, tmp_path / "m.xlsm", lambda n, d: d, {"xl/vbaProject.bin": b"\xd0\xcf\x11\xe0" + bytes(600)})
    result = check_returns(plan, [target])
    assert [f for f in result.findings if f.severity.value == "error"] == []
    assert result.summary["slots_found"] == len(plan.slots)


def test_a_stored_workbook_is_read(plan: Plan, good: Path, tmp_path: Path) -> None:
    """A workbook zipped without compression (some tools store small parts) passes the scan and is read."""
    stored = tmp_path / "stored.xlsx"
    with zipfile.ZipFile(good) as src, zipfile.ZipFile(stored, "w", zipfile.ZIP_STORED) as dst:
        for info in src.infolist():
            dst.writestr(info.filename, src.read(info))
    result = check_returns(plan, [stored])
    assert result.errors == 0 and result.summary["slots_found"] == len(plan.slots)


def test_cli_exit_and_report_for_unreadable_files(plan: Plan, good: Path, tmp_path: Path) -> None:
    """The command line: exit 2 when nothing could be read, 1 when one of two could not, a report either way."""
    plan.save(tmp_path / "plan.json")
    bad = tmp_path / "bad.xlsx"
    bad.write_bytes(b"")
    env = {**os.environ, "COLUMNS": "200"}
    for files, code in (([bad], 2), ([good, bad], 1)):
        out = tmp_path / f"out{code}"
        r = subprocess.run(
            [sys.executable, "-m", "layout", "check", str(tmp_path / "plan.json"), *map(str, files), "-o", str(out)],
            capture_output=True,
            text=True,
            env=env,
        )
        assert r.returncode == code, r.stderr
        assert "Traceback" not in r.stderr + r.stdout
        report = json.loads((out / "report.json").read_text(encoding="utf-8"))
        assert any(f["kind"] == "unreadable-file" for f in report["findings"])


def test_zip_limits_are_configurable(plan: Plan, good: Path) -> None:
    """A limit set lower refuses an ordinary workbook by size; the default reads it."""
    from layout.intake.safety import Limits

    assert check_returns(plan, [good]).errors == 0
    small = check_returns(plan, [good], limits=Limits(unpacked_total=1024))
    assert [f.kind for f in small.findings][:1] == [Kind.UNREADABLE_FILE]
    assert "more than 0 MB" in small.findings[0].message or "unpacks to" in small.findings[0].message


def test_openpyxl_parses_through_defusedxml() -> None:
    """openpyxl uses defusedxml when it is installed (openpyxl.xml.DEFUSEDXML), for the formula scan."""
    from openpyxl.xml import DEFUSEDXML

    assert DEFUSEDXML is True


@pytest.mark.parametrize("large_first", [True, False])
def test_of_two_bad_parts_the_first_in_the_zip_is_named(tmp_path: Path, large_first: bool) -> None:
    """The largest part is scanned in a second thread; the refusal still names the first bad part in the zip."""
    from layout.errors import UnreadableFile
    from layout.intake.safety import inspect_zip

    large = ("xl/worksheets/sheet1.xml", XXE + "<!-- -->" * 300_000)  # over a megabyte: the threaded path
    small = ("xl/sharedStrings.xml", XXE)
    target = tmp_path / "two.xlsx"
    with zipfile.ZipFile(target, "w", zipfile.ZIP_DEFLATED) as z:
        for name, text in (large, small) if large_first else (small, large):
            z.writestr(name, text)
    with pytest.raises(UnreadableFile, match="document type") as caught:
        inspect_zip(target)
    assert (large if large_first else small)[0] in str(caught.value)
