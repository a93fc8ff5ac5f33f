"""Unit and slot codes with a check letter that belongs to one randomization.

A unit is ``BC26-017K`` (study id, serial, check letter); a slot is ``BC26-017-2R``
(unit serial, subsample number, check letter). The check is a pure system in the manner
of ISO/IEC 7064 with modulus 23 and radix 2, over the code's digits only (serial, then
subsample), plus the plan's salt:

    S = sum of d_i * 2^(n - i + 1) over the n digits d_1..d_n
    v = -(S + salt) mod 23, printed as the v-th letter of CHECK_LETTERS

so that S + salt + v = 0 (mod 23). 23 is prime and above every digit difference (at
most 9), and 2, 2^2 + 1, 2^2 - 1 and 2 + 1 are all invertible mod 23, so every single
wrong digit, every swap of neighbouring or once-removed digits and every twin error
(aa -> bb) changes the sum and fails the check. The letters leave out I, O and Q, which
look like digits; the check is never a spreadsheet wildcard. The study id is not in the
sum: it must equal the plan's id exactly.

The salt is drawn from the plan's own stream, so a return of another randomization of
the same study fails its check letters, all of them under one other salt (see
``implied_salt``).
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Iterator, Mapping
from dataclasses import dataclass
from typing import Final

CHECK_LETTERS: Final = "ABCDEFGHJKLMNPRSTUVWXYZ"
MODULUS: Final = 23
RADIX: Final = 2
SCHEME: Final = "ISO/IEC 7064 style pure system, modulus 23, radix 2, over serial and subsample digits, plus salt"
_LETTER_VALUE: Final = {c: i for i, c in enumerate(CHECK_LETTERS)}
# characters a person might type into a code: every suggestion is built from these
_TYPED: Final = "0123456789ABCDEFGHIJKLMNOPQRSTUVWXYZ"
_SEPARATORS: Final = re.compile(r"[\s\-_.‐‑–—]+")

assert len(CHECK_LETTERS) == MODULUS


def pure_sum(digits: str, modulus: int = MODULUS, radix: int = RADIX) -> int:
    """The running sum of an ISO/IEC 7064 pure system over digits: p = ((p + d) * radix) mod modulus."""
    p = 0
    for d in digits:
        p = ((p + int(d)) * radix) % modulus
    return p


def _digit_sum(digits: str) -> int:
    return pure_sum(digits)


def check_letter(digits: str, salt: int) -> str:
    """The check letter of a string of digits under a salt."""
    if not digits.isdigit() or not digits.isascii():
        raise ValueError(f"only digits carry a check letter, got {digits!r}")
    return CHECK_LETTERS[(-(_digit_sum(digits) + salt)) % MODULUS]


def implied_salt(digits: str, letter: str) -> int | None:
    """The salt under which digits + letter pass the check (None when the letter is no check letter)."""
    v = _LETTER_VALUE.get(letter.upper())
    if v is None or not digits.isdigit():
        return None
    return (-(_digit_sum(digits) + v)) % MODULUS


def compact(text: str) -> str:
    """Text as compared: upper case, without hyphens, spaces or other separators."""
    return _SEPARATORS.sub("", str(text)).upper()


def serial_width(count: int) -> int:
    """Digits for serial numbers: as many as the study needs, at least 3."""
    return max(3, len(str(count)))


def subsample_width(most: int) -> int:
    """Digits for subsample numbers: 1, or as many as the largest needs when over 9."""
    return len(str(most)) if most > 9 else 1


def unit_code(study: str, serial: int, width: int, salt: int) -> str:
    """A unit's code, such as ``BC26-017K``."""
    digits = f"{serial:0{width}d}"
    return f"{study}-{digits}{check_letter(digits, salt)}"


def slot_code(study: str, serial: int, width: int, subsample: int, sub_width: int, salt: int) -> str:
    """A subsample slot's code, such as ``BC26-017-2R``."""
    serial_digits, sub_digits = f"{serial:0{width}d}", f"{subsample:0{sub_width}d}"
    return f"{study}-{serial_digits}-{sub_digits}{check_letter(serial_digits + sub_digits, salt)}"


def split_check(code: str) -> tuple[str, str]:
    """A printed code as (body, check letter), so the letter can be set apart on paper."""
    return code[:-1], code[-1:]


@dataclass(frozen=True)
class CodeParts:
    """A typed code taken apart: study id, digits (serial then subsample) and check letter."""

    study: str
    digits: str
    letter: str

    def passes(self, salt: int) -> bool:
        """Whether the check letter is right for the digits under salt."""
        return implied_salt(self.digits, self.letter) == salt


def parse_code(text: str, study: str, lengths: Iterable[int]) -> CodeParts | None:
    """Take a typed code apart, however it was written (case, hyphens); None when it has no code's shape.

    lengths are the digit counts a code of this plan can have (unit, slot); they say
    where the study id ends when the code was typed without hyphens.
    """
    raw = str(text).strip().upper()
    parts = [p for p in _SEPARATORS.split(raw) if p]
    body = "".join(parts)
    if len(body) < 3 or not body[-1].isalpha() or not body.isalnum() or not body.isascii():
        return None
    letter, rest = body[-1], body[:-1]
    if len(parts) >= 2 and all(p.isdigit() for p in parts[1:-1]) and parts[-1][:-1].isdigit():
        return CodeParts(parts[0], "".join(parts[1:])[:-1], letter)
    if rest.startswith(study) and rest[len(study) :].isdigit():
        return CodeParts(study, rest[len(study) :], letter)
    for n in sorted(set(lengths), reverse=True):
        if len(rest) > n and rest[-n:].isdigit():
            return CodeParts(rest[:-n], rest[-n:], letter)
    return None


def near_misses(text: str) -> Iterator[str]:
    """Every compact string one edit from text, likelier slips first: neighbour swaps, changed, dropped, inserted characters."""
    body = compact(text)
    for i in range(len(body) - 1):
        if body[i] != body[i + 1]:
            yield body[:i] + body[i + 1] + body[i] + body[i + 2 :]
    for i, old in enumerate(body):
        for c in _TYPED:
            if c != old:
                yield body[:i] + c + body[i + 1 :]
    for i in range(len(body)):
        yield body[:i] + body[i + 1 :]
    for i in range(len(body) + 1):
        for c in _TYPED:
            yield body[:i] + c + body[i:]


def index_codes(codes: Iterable[str]) -> dict[str, str]:
    """Compact form → code, for finding codes however they were typed."""
    codes = list(codes)
    if any("\x00" in c for c in codes):
        return {compact(c): c for c in codes}
    # one pass of the pattern over all codes at once (NUL is no separator): a plan has up to millions
    return dict(zip(compact("\x00".join(codes)).split("\x00"), codes, strict=True)) if codes else {}


def suggest(text: str, planned: Mapping[str, str] | Iterable[str]) -> list[str]:
    """The planned codes one edit away from text, the likelier slips first (swaps, then changes, drops, inserts)."""
    index = planned if isinstance(planned, Mapping) else index_codes(planned)
    return list(dict.fromkeys(index[v] for v in near_misses(text) if v in index))
