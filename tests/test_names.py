"""One vocabulary of reserved names: clashes refused, aliases yield to responses, added columns prefixed.

Returned values come from the published flatworm data (tests/published.py).
"""

from __future__ import annotations

import csv
from pathlib import Path
from typing import Any

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from layout import SpecError, make_plan
from layout.intake.check import check_returns
from layout.intake.findings import Severity
from layout.names import ADDED_PREFIX, RESERVED, clash, name_key
from layout.outputs.workbook import workbook_bytes
from layout.simulate import Filled, fill_workbook
from layout.spec import parse_spec
from tests.published import flatworm_fill


def _spec(**over: Any) -> dict[str, Any]:
    """A flatworm-shaped crd as a spec document: 2 treatments × 3 units × 6 subsamples."""
    data: dict[str, Any] = {
        "study": {"id": "NM1", "title": "Names", "seed": 3},
        "design": {"type": "crd", "replicates": 3, "subsamples": 6},
        "factor": [{"name": "season", "levels": ["warm", "cold"]}],
        "response": [{"name": "density", "kind": "number", "min": 0}],
    }
    for key, value in over.items():
        data[key] = value
    return data


class TestClashesRefused:
    @pytest.mark.parametrize("name", ["block", "Block", "serial", "whole plot", "source_file", "status", "added: x"])
    def test_factor_name(self, name: str) -> None:
        """A factor may not take a name layout uses for its own columns."""
        with pytest.raises(SpecError) as caught:
            parse_spec(_spec(factor=[{"name": name, "levels": ["a", "b"]}]), "s.json")
        assert [p.where for p in caught.value.problems] == ["factor[1].name"]

    @pytest.mark.parametrize("name", ["status", "serial", "Missing Reason", "code", "fix", "raw"])
    def test_response_name(self, name: str) -> None:
        """A response may not take a name layout uses for its own columns."""
        with pytest.raises(SpecError) as caught:
            parse_spec(_spec(response=[{"name": name, "kind": "number"}]), "s.json")
        assert [p.where for p in caught.value.problems] == ["response[1].name"]

    def test_factor_and_response_share_a_name(self) -> None:
        """tidy.csv gives factors and responses columns, so they need different names."""
        with pytest.raises(SpecError) as caught:
            parse_spec(_spec(response=[{"name": "Season", "kind": "number"}]), "s.json")
        assert [p.where for p in caught.value.problems] == ["factor[1].name"]

    def test_every_reserved_name_clashes(self) -> None:
        """The vocabulary refuses each of its own names."""
        assert all(clash(n) for n in RESERVED)


def _fill(plan: Any, folder: Path, response: str) -> Path:
    blank = folder / "entry.xlsx"
    blank.write_bytes(workbook_bytes(plan))
    values = {(code, rnd): Filled({response: v}, None) for code, rnd, v in flatworm_fill(plan)}
    return fill_workbook(plan, blank, folder / "filled.xlsx", values, force=True)


class TestColumns:
    def test_text_response_named_notes_stays_a_response(self, tmp_path: Path) -> None:
        """'notes' is an alias of note, but a response of that name keeps its own column."""
        spec = parse_spec(
            _spec(
                response=[{"name": "density", "kind": "number"}, {"name": "notes", "kind": "text", "required": False}]
            )
        )
        plan = make_plan(spec)
        path = _fill(plan, tmp_path, "density")
        csv_path = tmp_path / "typed.csv"
        with csv_path.open("w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(["code", "density", "notes", "note"])
            for code, _, v in flatworm_fill(plan):
                w.writerow([code, v, "under a ledge", "typed from paper"])
        for source in (path, csv_path):
            result = check_returns(plan, [source])
            assert [f for f in result.findings if f.severity is Severity.ERROR] == []
        tidy = check_returns(plan, [csv_path]).tidy
        assert set(tidy["notes"]) == {"under a ledge"} and set(tidy["note"]) == {"typed from paper"}

    def test_added_column_named_after_a_factor_never_overwrites_it(self, tmp_path: Path) -> None:
        """A column typed as 'season' in a return is kept as 'added: season'; the plan's season column stays."""
        plan = make_plan(parse_spec(_spec()))
        csv_path = tmp_path / "typed.csv"
        with csv_path.open("w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(["code", "density", "season"])
            w.writerows([code, v, "guessed"] for code, _, v in flatworm_fill(plan))
        tidy = check_returns(plan, [csv_path]).tidy
        assert set(tidy["season"]) == {"warm", "cold"}
        assert set(tidy[ADDED_PREFIX + "season"]) == {"guessed"}


_word = (
    st.text(
        alphabet=st.characters(codec="utf-8", categories=("L", "N", "P", "S", "Zs"), exclude_characters="/"),
        min_size=1,
        max_size=12,
    )
    .map(str.strip)
    .filter(lambda s: bool(s) and clash(s) is None)
)


@st.composite
def _names(draw: st.DrawFn) -> dict[str, Any]:
    factor, response, other = draw(st.lists(_word, min_size=3, max_size=3, unique_by=name_key))
    levels = draw(st.lists(_word, min_size=2, max_size=2, unique=True))
    rounds = draw(st.lists(_word, min_size=1, max_size=2, unique_by=str.lower))
    return _spec(
        design={
            "type": "crd",
            "replicates": 3,
            "subsamples": 6,
            "unit_name": draw(_word),
            "subsample_name": draw(_word),
        },
        factor=[{"name": factor, "levels": levels}],
        response=[
            {"name": response, "kind": "number", "unit": draw(_word)},
            {"name": other, "kind": "text", "required": False},
        ],
        collection={"rounds": rounds},
    )


class TestAnyLegalNames:
    @settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
    @given(_names())
    def test_plan_sheets_fill_check(self, tmp_path: Path, doc: dict[str, Any]) -> None:
        """Specs with random legal names go through plan → workbook → fill → check with no error."""
        spec = parse_spec(doc, "random.json")  # the strategy draws only legal names
        plan = make_plan(spec)
        path = _fill(plan, tmp_path, spec.response[0].name)
        result = check_returns(plan, [path])
        assert [f for f in result.findings if f.severity is Severity.ERROR] == []
        assert result.tidy[spec.response[0].name].notna().sum() == len(plan.slots) * len(plan.rounds)
