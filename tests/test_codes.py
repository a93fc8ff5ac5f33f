"""Codes and their ISO/IEC 7064 MOD 37-2 check character."""

from __future__ import annotations

import csv
from pathlib import Path

import pytest
from hypothesis import given
from hypothesis import strategies as st
from stdnum.iso7064 import mod_37_2

from layout.codes import ALPHABET, check_character, compact, is_valid, one_edit_away, slot_code, suggest, unit_code

EXAMPLES = Path(__file__).parent / "reference" / "check_characters" / "check_digit_examples.csv"


def _mod_37_2_rows() -> list[dict[str, str]]:
    with EXAMPLES.open(newline="", encoding="utf-8") as fh:
        return [row for row in csv.DictReader(fh) if row["algorithm"] == "ISO7064_MOD_37_2"]


class TestCheckCharacter:
    def test_reference_rows_exist(self) -> None:
        """The published MOD 37-2 examples are there to test against."""
        assert len(_mod_37_2_rows()) >= 3

    @pytest.mark.parametrize("row", _mod_37_2_rows(), ids=lambda r: r["input"])
    def test_published_examples(self, row: dict[str, str]) -> None:
        """Published MOD 37-2 examples (python-stdnum doctests, konfirm/node-iso7064 tests; source_key per row)."""
        assert check_character(row["input"]) == row["expected_check"]
        assert is_valid(row["protected_string"])

    @given(st.text(alphabet=ALPHABET[:36], min_size=1, max_size=20))
    def test_agrees_with_python_stdnum(self, body: str) -> None:
        """Our check character equals python-stdnum's iso7064.mod_37_2 for any body."""
        assert check_character(body) == mod_37_2.calc_check_digit(body)

    def test_star_is_a_possible_check(self) -> None:
        """Some bodies take '*' as check character, and codes carrying it validate."""
        bodies = [f"AB{n:03d}" for n in range(1000)]
        starred = [b for b in bodies if check_character(b) == "*"]
        assert starred and all(is_valid(b + "*") for b in starred)


_study = st.text(alphabet=ALPHABET[:36], min_size=2, max_size=8)


@st.composite
def _codes(draw: st.DrawFn) -> str:
    study = draw(_study)
    serial = draw(st.integers(1, 99_999))
    if draw(st.booleans()):
        return unit_code(study, serial, max(3, len(str(serial))))
    subs = draw(st.integers(1, 40))
    return slot_code(study, serial, max(3, len(str(serial))), draw(st.integers(1, subs)), subs)


class TestErrorsCaught:
    @given(_codes(), st.data())
    def test_every_single_substitution_fails(self, code: str, data: st.DataObject) -> None:
        """Changing any one character of a code to any other makes the check fail."""
        body = compact(code)
        i = data.draw(st.integers(0, len(body) - 1))
        c = data.draw(st.sampled_from([a for a in ALPHABET if a != body[i]]))
        assert not is_valid(body[:i] + c + body[i + 1 :])

    @given(_codes())
    def test_every_neighbour_swap_fails(self, code: str) -> None:
        """Swapping any two different neighbouring characters makes the check fail."""
        body = compact(code)
        for i in range(len(body) - 1):
            if body[i] != body[i + 1]:
                assert not is_valid(body[:i] + body[i + 1] + body[i] + body[i + 2 :])

    @given(_codes())
    def test_exhaustive_one_edit_neighbours_fail(self, code: str) -> None:
        """No string one edit away from a valid code is itself valid."""
        assert is_valid(code)
        assert not any(is_valid(v) for v in one_edit_away(code))


class TestCodes:
    @pytest.mark.parametrize(
        ("args", "expected_body"),
        [
            (("BC26", 17, 3), "BC26-017"),
            (("BC26", 1234, 4), "BC26-1234"),
        ],
    )
    def test_unit_code_shape(self, args: tuple[str, int, int], expected_body: str) -> None:
        """Unit codes are study, padded serial and one check character."""
        code = unit_code(*args)
        assert code[:-1] == expected_body and is_valid(code)

    @pytest.mark.parametrize(
        ("subsample", "subsamples", "expected_body"),
        [(2, 3, "BC26-017-2"), (2, 12, "BC26-017-02"), (12, 12, "BC26-017-12")],
    )
    def test_slot_code_pads_subsample_over_nine(self, subsample: int, subsamples: int, expected_body: str) -> None:
        """Slot subsample numbers are padded when a unit has more than nine."""
        code = slot_code("BC26", 17, 3, subsample, subsamples)
        assert code[:-1] == expected_body and is_valid(code)

    def test_typed_forms_are_recognised(self) -> None:
        """Lower case, missing hyphens and spaces compare equal."""
        code = unit_code("BC26", 17, 3)
        assert is_valid(code.lower()) and is_valid(code.replace("-", "")) and is_valid(" " + code + " ")


class TestSuggest:
    def test_one_wrong_character(self) -> None:
        """A typo in one character suggests the planned code it came from."""
        planned = [unit_code("BC26", n, 3) for n in range(1, 61)]
        typo = planned[16][:-2] + ("9" if planned[16][-2] != "9" else "8") + planned[16][-1]
        assert planned[16] in suggest(typo, planned)

    def test_swapped_neighbours(self) -> None:
        """Two swapped neighbours suggest the planned code."""
        planned = [unit_code("BC26", n, 3) for n in range(1, 61)]
        target = unit_code("BC26", 17, 3)  # BC26-017x
        swapped = target.replace("017", "071")
        found = suggest(swapped, planned)
        assert target in found
        assert all(compact(swapped) in set(one_edit_away(c)) for c in found)

    def test_nothing_near(self) -> None:
        """A code far from every planned one gets no suggestion."""
        assert suggest("ZZ99-999Q", [unit_code("BC26", n, 3) for n in range(1, 10)]) == []
