"""Unit and slot codes with an ISO/IEC 7064 MOD 37-2 check character.

MOD 37-2 is a pure system over 0-9, A-Z and ``*``: it detects every single wrong
character and every swap of two neighbours. Hyphens are only for the eye and are left
out of the check. Every character is in the QR alphanumeric set, so symbols stay small.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Mapping
from typing import Final

ALPHABET: Final = "0123456789ABCDEFGHIJKLMNOPQRSTUVWXYZ*"
_VALUE: Final = {c: i for i, c in enumerate(ALPHABET)}
_MODULUS: Final = 37
_RADIX: Final = 2


def check_character(text: str) -> str:
    """The MOD 37-2 check character of text (hyphens ignored)."""
    p = 0
    for c in compact(text):
        if c not in _VALUE or c == "*":
            raise ValueError(f"{text!r}: only 0-9 and A-Z can carry a check character, got {c!r}")
        p = ((p + _VALUE[c]) * _RADIX) % _MODULUS
    return ALPHABET[(_MODULUS + 1 - p) % _MODULUS]


def is_valid(code: str) -> bool:
    """True when code's last character is the right check character for the rest."""
    body = compact(code)
    if len(body) < 2 or any(c not in _VALUE for c in body[:-1]) or "*" in body[:-1]:
        return False
    return body[-1] == check_character(body[:-1])


def compact(text: str) -> str:
    """Text as compared: upper case, without hyphens, spaces or other separators."""
    return re.sub(r"[\s\-_.]", "", text).upper()


def serial_width(count: int) -> int:
    """Digits for serial numbers: as many as the study needs, at least 3."""
    return max(3, len(str(count)))


def unit_code(study: str, serial: int, width: int) -> str:
    """A unit's code, such as ``BC26-017K``."""
    body = f"{study}-{serial:0{width}d}"
    return body + check_character(body)


def slot_code(study: str, serial: int, width: int, subsample: int, subsamples: int) -> str:
    """A subsample slot's code, such as ``BC26-017-2R``."""
    sub_width = len(str(subsamples)) if subsamples > 9 else 1
    body = f"{study}-{serial:0{width}d}-{subsample:0{sub_width}d}"
    return body + check_character(body)


def one_edit_away(text: str) -> Iterable[str]:
    """Every compact string one changed character or one swap of neighbours from text."""
    body = compact(text)
    for i, old in enumerate(body):
        for c in ALPHABET:
            if c != old:
                yield body[:i] + c + body[i + 1 :]
    for i in range(len(body) - 1):
        if body[i] != body[i + 1]:
            yield body[:i] + body[i + 1] + body[i] + body[i + 2 :]


def index_codes(codes: Iterable[str]) -> dict[str, str]:
    """Compact form → code, for finding codes however they were typed."""
    return {compact(c): c for c in codes}


def suggest(text: str, planned: Mapping[str, str] | Iterable[str]) -> list[str]:
    """The planned codes one edit away from text, in code order."""
    index = planned if isinstance(planned, Mapping) else index_codes(planned)
    found = {index[v] for v in one_edit_away(text) if v in index}
    return sorted(found)
