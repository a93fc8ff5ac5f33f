"""Look at a returned file before any parser does: its real format, its size, and what its archive unpacks to.

A workbook is a zip of XML parts. Before calamine or openpyxl open one, the zip's directory
is checked against size and ratio limits (zip bombs), and every XML part is scanned for a
document type declaration, which a workbook never needs and which is how entity-expansion
("billion laughs") and external-entity attacks start. A file that fails is refused with a
message that says what it is and what to do.
"""

from __future__ import annotations

import lzma
import re
import struct
import zipfile
import zlib
from collections.abc import Iterator
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from pathlib import Path
from typing import Final

from layout.errors import UnreadableFile

MB: Final = 1024 * 1024
_ZIP: Final = b"PK\x03\x04"
_EMPTY_ZIP: Final = b"PK\x05\x06"
_OLE: Final = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"  # the compound-file container of .xls and of encrypted workbooks
# '<!DOCTYPE' and '<!ENTITY' as UTF-8 and as UTF-16 in both byte orders, any case a parser would accept
_MARKS: Final = tuple(
    word.encode(enc) for word in ("<!DOCTYPE", "<!doctype", "<!ENTITY") for enc in ("utf-8", "utf-16-le", "utf-16-be")
)
_OVERLAP: Final = 32
_FORMULA: Final = re.compile(rb"<f[ >]")  # a formula element; one regex pass is faster than two substring scans


@dataclass(frozen=True)
class Limits:
    """How large a returned file may be; every limit is far above a real study's returns."""

    unpacked_total: int = 512 * MB  # all parts of one workbook, unpacked
    unpacked_part: int = 256 * MB  # one part, unpacked
    ratio: float = 1000.0  # unpacked ÷ packed of one part larger than 1 MB (bombs reach 10⁶)
    parts: int = 10_000
    csv_line: int = 1_000_000  # characters in one line of a CSV file
    csv_field: int = 100_000  # characters in one cell of a CSV file


DEFAULT_LIMITS: Final = Limits()


def _refuse(path: Path, message: str) -> UnreadableFile:
    return UnreadableFile.at(str(path), "", message)


def sniff(path: Path) -> str:
    """What the file really is from its first bytes: 'zip', 'ole', 'empty', 'utf16', 'text' or 'binary'."""
    with path.open("rb") as fh:
        head = fh.read(4096)
    if not head:
        return "empty"
    if head.startswith((_ZIP, _EMPTY_ZIP)):
        return "zip"
    if head.startswith(_OLE):
        return "ole"
    if head.startswith((b"\xff\xfe", b"\xfe\xff")):
        return "utf16"
    if b"\x00" in head:
        return "binary"
    try:
        head.decode("utf-8")
    except UnicodeDecodeError as exc:
        if exc.start < len(head) - 4:  # not just a character cut at the end of the sample
            return "binary"
    return "text"


def refuse_non_workbook(path: Path, kind: str) -> UnreadableFile:
    """The message for a file named like a workbook whose content is something else."""
    if kind == "empty":
        return _refuse(path, "is empty (0 bytes); the file was not saved or not copied completely")
    if kind == "ole":
        if _is_encrypted(path):
            return _refuse(
                path, "is password-protected (encrypted) and cannot be read; remove the password and save it again"
            )
        return _refuse(path, "is an old binary Excel workbook (.xls); open it and save it as .xlsx")
    if kind in ("text", "utf16"):
        return _refuse(path, "is a text file, not a workbook (a CSV renamed?); give it a .csv name, or save as .xlsx")
    return _refuse(path, "is not a workbook: its content is of no spreadsheet format (damaged, or another file)")


def _is_encrypted(path: Path) -> bool:
    """An encrypted Office file is a compound file holding a stream named EncryptedPackage."""
    with path.open("rb") as fh:
        data = fh.read(4 * MB)
    return "EncryptedPackage".encode("utf-16-le") in data


def inspect_zip(path: Path, limits: Limits = DEFAULT_LIMITS) -> bool:
    """Refuse a workbook whose zip is damaged, too large, too compressed, or holds a DTD in any XML part.

    Returns whether any worksheet holds a formula (an <f> element), found in the same pass.
    """
    kind = sniff(path)
    if kind != "zip":
        raise refuse_non_workbook(path, kind)
    try:
        with zipfile.ZipFile(path) as z:
            infos = z.infolist()
            if len(infos) > limits.parts:
                raise _refuse(path, f"holds {len(infos)} parts, more than {limits.parts}; refused as unsafe")
            total = sum(i.file_size for i in infos)
            if total > limits.unpacked_total:
                raise _refuse(
                    path, f"unpacks to {total // MB} MB, more than {limits.unpacked_total // MB} MB; refused as unsafe"
                )
            return _check_parts(path, z, infos, limits)
    except zipfile.BadZipFile:
        raise _refuse(
            path, "is a damaged workbook (cut short while copying or saving?); save or copy it again"
        ) from None
    except (zlib.error, EOFError, lzma.LZMAError, OSError):  # bz2 and lzma say a bad stream with these
        raise _refuse(path, "is a damaged workbook: a part cannot be unpacked; save or copy it again") from None
    except NotImplementedError as exc:
        raise _refuse(path, f"uses a zip feature no reader here supports ({exc}); save it again as .xlsx") from None


_FAILURES: Final = (
    UnreadableFile,
    zipfile.BadZipFile,
    zlib.error,
    EOFError,
    NotImplementedError,
    lzma.LZMAError,
    OSError,
)
Failure = tuple[int, Exception]  # a part's place in the zip, and why it was refused


def _check_parts(path: Path, z: zipfile.ZipFile, infos: list[zipfile.ZipInfo], limits: Limits) -> bool:
    """_check_part over every part: the largest (the data sheet) in a second thread while this one takes the
    rest, as unpacking runs without the GIL. When parts fail, the first in the zip's order is the one raised."""
    places = list(enumerate(infos))
    largest = max(places, key=lambda p: p[1].file_size, default=None)
    if largest is None or largest[1].file_size < _BLOCK:  # too small to gain from a thread
        formulas, failure = _scan(path, z, places, limits)
    else:
        with ThreadPoolExecutor(1, thread_name_prefix="scan") as pool:
            ahead = pool.submit(_scan, path, z, [largest], limits)
            formulas, failure = _scan(path, z, [p for p in places if p is not largest], limits)
            found, failed = ahead.result()
        formulas |= found
        failure = min((f for f in (failure, failed) if f), key=lambda f: f[0], default=None)
    if failure is not None:
        raise failure[1]
    return formulas


def _scan(
    path: Path, z: zipfile.ZipFile, places: list[tuple[int, zipfile.ZipInfo]], limits: Limits
) -> tuple[bool, Failure | None]:
    """Whether these parts hold a formula, and the first of them that failed, if one did (the rest not read)."""
    formulas = False
    for place, info in places:
        try:
            formulas |= _check_part(path, z, info, limits)
        except _FAILURES as exc:
            return formulas, (place, exc)
    return formulas, None


def _check_part(path: Path, z: zipfile.ZipFile, info: zipfile.ZipInfo, limits: Limits) -> bool:
    if info.file_size > limits.unpacked_part:
        raise _refuse(
            path,
            f"part {info.filename} unpacks to {info.file_size // MB} MB, more than "
            f"{limits.unpacked_part // MB} MB; refused as unsafe",
        )
    if info.file_size > MB and info.file_size > limits.ratio * max(info.compress_size, 1):
        raise _refuse(
            path,
            f"part {info.filename} is compressed {info.file_size // max(info.compress_size, 1)} to 1, "
            f"more than {limits.ratio:g} to 1 (a zip bomb?); refused as unsafe",
        )
    if not info.filename.lower().endswith((".xml", ".rels", ".vml")):
        return False
    sheet = info.filename.startswith("xl/worksheets/")
    formula = False
    seen = 0
    tail = b""
    for block in _unpacked(path, z, info):
        seen += len(block)
        if seen > info.file_size:
            raise _refuse(path, f"part {info.filename} unpacks larger than its zip entry says; refused as unsafe")
        # the block, and the seam with the block before (a mark cut in two), searched apart: no copy of the block
        for window in (tail + block[:_OVERLAP], block):
            if _declares_dtd(window):
                raise _refuse(
                    path,
                    f"part {info.filename} declares a document type (DTD); workbooks never need one and it can "
                    "hide entity attacks, so the file is refused; save it again from Excel or LibreOffice",
                )
            formula = formula or (sheet and _FORMULA.search(window) is not None)
        tail = block[-_OVERLAP:]
    return formula


def _declares_dtd(window: bytes) -> bool:
    # "!" first (one memchr pass; most blocks of a sheet have none), then "<!" in UTF-8 or either UTF-16
    # (two scans, not nine; a two-byte needle starting with "<" is slow in XML); comments and CDATA also
    # start with "<!", so only then the nine marks
    return b"!" in window and (b"<!" in window or b"<\x00!" in window) and any(mark in window for mark in _MARKS)


_BLOCK: Final = MB  # unpacked a megabyte at a time: few zlib calls, and the block stays in cache


def _unpacked(path: Path, z: zipfile.ZipFile, info: zipfile.ZipInfo) -> Iterator[bytes]:
    """A part's bytes, block by block, its CRC-32 checked. A deflated part is inflated here a block at a time,
    each in one zlib call; zipfile's reader feeds zlib 4 KB of packed data per call, which makes many more
    calls (each taking the GIL back, slow beside another thread): 0.105 against 0.093 s for 60 MB of sheets."""
    if info.compress_type != zipfile.ZIP_DEFLATED or info.flag_bits & 1:  # stored, other methods, encrypted
        with z.open(info) as fh:
            while block := fh.read(_BLOCK):
                yield block
        return
    with path.open("rb") as fh:
        fh.seek(info.header_offset)
        head = fh.read(30)
        if len(head) < 30 or not head.startswith(_ZIP):
            raise zipfile.BadZipFile(f"no local header for {info.filename}")
        name, extra = struct.unpack("<HH", head[26:30])
        fh.seek(name + extra, 1)
        inflate = zlib.decompressobj(-zlib.MAX_WBITS)
        left, packed, crc = info.compress_size, b"", 0
        while not inflate.eof:
            if not packed and left:  # packed data read a block at a time too, whatever size the entry claims
                packed = fh.read(min(left, _BLOCK))
                left -= len(packed)
                if not packed:
                    raise EOFError(info.filename)  # the file ends before the entry's packed data does
            block = inflate.decompress(packed, _BLOCK)  # never more than a block: the caller counts them
            packed = inflate.unconsumed_tail
            if not block and not packed and not left:
                raise EOFError(info.filename)  # the packed data ended before the deflate stream did
            crc = zlib.crc32(block, crc)
            yield block
    if crc != info.CRC:
        raise zipfile.BadZipFile(f"bad CRC-32 for {info.filename}")
