"""Codes and their check letter: modulus 23, radix 2, over the digits, plus the plan's salt."""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from stdnum.iso7064 import mod_11_2

from layout.codes import (
    CHECK_LETTERS,
    check_letter,
    compact,
    implied_salt,
    near_misses,
    parse_code,
    pure_sum,
    slot_code,
    suggest,
    unit_code,
)

EXAMPLES = Path(__file__).parent / "reference" / "check_characters" / "check_digit_examples.csv"


def _mod_11_2_rows() -> list[dict[str, str]]:
    with EXAMPLES.open(newline="", encoding="utf-8") as fh:
        return [row for row in csv.DictReader(fh) if row["algorithm"] == "ISO7064_MOD_11_2"]


class TestPureSystem:
    """The running sum is ISO/IEC 7064's pure-system sum; checked with the standard's own MOD 11-2."""

    def test_reference_rows_exist(self) -> None:
        """The published MOD 11-2 examples are there to test against."""
        assert len(_mod_11_2_rows()) >= 3

    @pytest.mark.parametrize("row", _mod_11_2_rows(), ids=lambda r: r["input"])
    def test_published_mod_11_2_examples(self, row: dict[str, str]) -> None:
        """ISO/IEC 7064 MOD 11-2 examples (python-stdnum doctests, konfirm/node-iso7064; source_key per row)."""
        value = (12 - pure_sum(row["input"], 11, 2)) % 11
        assert "0123456789X"[value] == row["expected_check"]

    @given(st.text(alphabet="0123456789", min_size=1, max_size=20))
    def test_agrees_with_python_stdnum(self, digits: str) -> None:
        """The same sum gives python-stdnum's iso7064.mod_11_2 check for any digits."""
        assert "0123456789X"[(12 - pure_sum(digits, 11, 2)) % 11] == mod_11_2.calc_check_digit(digits)


class TestCheckLetter:
    def test_letters(self) -> None:
        """23 letters, none of I, O, Q, no wildcard, no digit."""
        assert len(CHECK_LETTERS) == 23 and len(set(CHECK_LETTERS)) == 23
        assert not set(CHECK_LETTERS) & set("IOQ*?0123456789")

    @given(st.text(alphabet="0123456789", min_size=1, max_size=12), st.integers(0, 22))
    def test_weighted_sum_is_zero(self, digits: str, salt: int) -> None:
        """DESIGN.md: sum of d_i·2^(n-i+1) + salt + v ≡ 0 (mod 23), computed here independently."""
        n = len(digits)
        total = sum(int(d) * pow(2, n - i, 23) for i, d in enumerate(digits)) + salt
        v = CHECK_LETTERS.index(check_letter(digits, salt))
        assert (total + v) % 23 == 0
        assert implied_salt(digits, check_letter(digits, salt)) == salt

    def test_salt_changes_every_letter(self) -> None:
        """Two salts never give the same letter to the same digits: another draw's codes all fail."""
        for digits in ("0011", "1234", "99999"):
            assert len({check_letter(digits, salt) for salt in range(23)}) == 23


def _vector_valid(digits: np.ndarray, letters: np.ndarray, salt: int) -> np.ndarray:
    """An independent, vectorised form of the check: weights 2^(n-i) mod 23 (i from 0), letter value, salt."""
    n = digits.shape[1]
    weights = np.array([pow(2, n - i, 23) for i in range(n)], dtype=np.int64)
    return ((digits @ weights) + salt + letters) % 23 == 0


class TestExhaustiveDetection:
    def test_every_code_of_a_large_study(self) -> None:
        """For every code of a 10,000-unit study with 12 subsamples: every single wrong digit, neighbour and
        once-removed swap, twin error and wrong letter fails the check (DESIGN.md's claim, proved by trying all)."""
        salt = 17
        serials = range(1, 10_001)
        codes = [unit_code("BC26", s, 5, salt) for s in serials]
        codes += [slot_code("BC26", s, 5, k, 2, salt) for s in serials for k in range(1, 13)]
        parts = [parse_code(c, "BC26", (7, 5)) for c in codes]
        assert all(p is not None and p.passes(salt) for p in parts)
        for length in (5, 7):
            group = [p for p in parts if p is not None and len(p.digits) == length]
            digits = np.array([[int(d) for d in p.digits] for p in group], dtype=np.int64)
            letters = np.array([CHECK_LETTERS.index(p.letter) for p in group], dtype=np.int64)
            assert _vector_valid(digits, letters, salt).all()
            tried = 0
            for i in range(length):
                for delta in range(1, 10):
                    changed = digits.copy()
                    changed[:, i] = (changed[:, i] + delta) % 10
                    assert not _vector_valid(changed, letters, salt).any(), f"single digit at {i}"
                    tried += 1
                for gap in (1, 2):  # neighbours, once removed
                    if i + gap < length:
                        swapped = digits.copy()
                        swapped[:, [i, i + gap]] = swapped[:, [i + gap, i]]
                        differs = digits[:, i] != digits[:, i + gap]
                        assert not _vector_valid(swapped, letters, salt)[differs].any(), f"swap {i}, {i + gap}"
                        tried += 1
                if i + 1 < length:
                    twins = digits[:, i] == digits[:, i + 1]
                    for b in range(10):
                        twin = digits.copy()
                        twin[:, i] = twin[:, i + 1] = b
                        hit = twins & (digits[:, i] != b)
                        assert not _vector_valid(twin, letters, salt)[hit].any(), f"twin at {i}"
                        tried += 1
            for delta in range(1, 23):
                assert not _vector_valid(digits, (letters + delta) % 23, salt).any()
            assert tried > 9 * length

    @given(st.text(alphabet="0123456789", min_size=1, max_size=9), st.integers(0, 22))
    def test_vector_form_agrees_with_the_module(self, digits: str, salt: int) -> None:
        """The test's own vectorised check agrees with layout.codes for any digits and salt."""
        letter = check_letter(digits, salt)
        arr = np.array([[int(d) for d in digits]], dtype=np.int64)
        for other in CHECK_LETTERS:
            ok = bool(_vector_valid(arr, np.array([CHECK_LETTERS.index(other)]), salt)[0])
            assert ok == (other == letter)


class TestCodes:
    def test_unit_code_shape(self) -> None:
        """Unit codes are study, padded serial and one check letter."""
        code = unit_code("BC26", 17, 3, 5)
        assert code[:-1] == "BC26-017" and code[-1] in CHECK_LETTERS

    @pytest.mark.parametrize(
        ("subsample", "width", "expected_body"),
        [(2, 1, "BC26-017-2"), (2, 2, "BC26-017-02"), (12, 2, "BC26-017-12")],
    )
    def test_slot_code_pads_subsample_over_nine(self, subsample: int, width: int, expected_body: str) -> None:
        """Slot subsample numbers are padded when a unit has more than nine."""
        assert slot_code("BC26", 17, 3, subsample, width, 0)[:-1] == expected_body

    @pytest.mark.parametrize("typed", ["bc26-017-2{}", "BC260172{}", " BC26 017 2{} ", "BC26_017-2{}"])
    def test_typed_forms_are_parsed(self, typed: str) -> None:
        """Lower case, missing hyphens, spaces and underscores take the same code apart."""
        code = slot_code("BC26", 17, 3, 2, 1, 9)
        parts = parse_code(typed.format(code[-1].lower()), "BC26", (4, 3))
        assert parts is not None and (parts.study, parts.digits) == ("BC26", "0172") and parts.passes(9)

    def test_mistyped_study_is_parsed(self) -> None:
        """A code typed with another study id keeps its digits, so the plan's id can be suggested."""
        parts = parse_code("BC62-017-2X", "BC26", (4, 3))
        assert parts is not None and (parts.study, parts.digits) == ("BC62", "0172")
        parts = parse_code("BC620172X", "BC26", (4, 3))
        assert parts is not None and (parts.study, parts.digits) == ("BC62", "0172")


class TestSuggest:
    planned = [slot_code("BC26", n, 3, k, 1, 4) for n in range(1, 61) for k in (1, 2, 3)]

    def _typos(self, code: str) -> dict[str, str]:
        body = compact(code)
        i = body.index("017") + 1  # the middle digit of the serial
        return {
            "changed": body[:i] + "9" + body[i + 1 :],
            "dropped": body[:i] + body[i + 1 :],
            "inserted": body[:i] + "5" + body[i:],
            "swapped": body[:i] + body[i + 1] + body[i] + body[i + 2 :],
        }

    @pytest.mark.parametrize("kind", ["changed", "dropped", "inserted", "swapped"])
    def test_one_edit(self, kind: str) -> None:
        """One changed, inserted or dropped character, or two swapped neighbours, suggest the planned code."""
        target = slot_code("BC26", 17, 3, 2, 1, 4)
        typo = self._typos(target)[kind]
        assert target in suggest(typo, self.planned)
        assert all(compact(typo) in set(near_misses(c)) for c in suggest(typo, self.planned))

    def test_nothing_near(self) -> None:
        """A code far from every planned one gets no suggestion."""
        assert suggest("ZZ99-999Q", self.planned) == []
