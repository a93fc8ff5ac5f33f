"""Spec loading: every valid example loads; every invalid spec gives exactly its expected messages."""

from __future__ import annotations

from pathlib import Path

import pytest
from pydantic import ValidationError

from layout import SpecError, load_spec, loads_spec
from layout.spec import DEFAULT_MISSING_REASONS

SPECS = Path(__file__).parent / "specs"
INVALID = sorted(p for p in (SPECS / "invalid").iterdir() if p.suffix in (".toml", ".json"))
VALID = sorted(p for p in (SPECS / "valid").iterdir() if p.suffix in (".toml", ".json"))


def test_folders_are_not_empty() -> None:
    """The data-driven tests below have something to run on."""
    assert len(INVALID) >= 20
    assert len(VALID) >= 5


@pytest.mark.parametrize("path", INVALID, ids=lambda p: p.name)
def test_invalid_spec_gives_expected_messages(path: Path) -> None:
    """One message per problem, naming file, key path and what is allowed."""
    expected = (path.parent / f"{path.name}.expected").read_text(encoding="utf-8").strip().splitlines()
    with pytest.raises(SpecError) as info:
        loads_spec(path.read_text(encoding="utf-8"), file=path.name)
    assert info.value.lines() == expected
    assert info.value.exit_code == 2


@pytest.mark.parametrize("path", VALID, ids=lambda p: p.name)
def test_valid_spec_loads(path: Path) -> None:
    """Every example spec loads into a frozen Spec."""
    spec = load_spec(path)
    assert spec.study.id
    with pytest.raises(ValidationError):
        spec.study.id = "CHANGED"  # type: ignore[misc]


class TestDefaults:
    def test_defaults_fill_in(self) -> None:
        """Unset keys take the documented defaults."""
        spec = loads_spec(
            '[study]\nid="AB"\ntitle="t"\n[design]\ntype="crd"\nreplicates=2\ntreatments=["a","b"]\n'
            '[[response]]\nname="y"\nkind="number"\n'
        )
        assert spec.design.subsamples == 1
        assert spec.design.unit_name == "unit"
        assert spec.collection.rounds == ("1",)
        assert spec.collection.missing_reasons == DEFAULT_MISSING_REASONS
        assert spec.study.blind is False
        assert spec.study.seed is None

    def test_factorial_treatments_join_levels(self) -> None:
        """Factorial treatment labels join the levels with '/' in factor order."""
        spec = load_spec(SPECS / "valid" / "field-irrigation-rcbd.toml")
        assert spec.treatments == ("drip/60", "drip/120", "furrow/60", "furrow/120")

    def test_json_and_toml_agree(self, tmp_path: Path) -> None:
        """A JSON spec with the same keys gives the same Spec as its TOML."""
        import json
        import tomllib

        toml_path = SPECS / "valid" / "greenhouse-biochar-crd.toml"
        json_path = tmp_path / "same.json"
        json_path.write_text(json.dumps(tomllib.loads(toml_path.read_text())), encoding="utf-8")
        assert load_spec(json_path) == load_spec(toml_path)

    def test_missing_file(self, tmp_path: Path) -> None:
        """A spec that does not exist is a SpecError naming the path."""
        with pytest.raises(SpecError) as info:
            load_spec(tmp_path / "nope.toml")
        assert info.value.lines() == [f"{tmp_path / 'nope.toml'}: no such file"]


def test_reference_names_every_key() -> None:
    """docs/spec.md lists every key the spec models accept."""
    from layout.spec import Collection, Design, Factor, Grid, Response, Study

    text = (Path(__file__).parent.parent / "docs" / "spec.md").read_text(encoding="utf-8")
    for model in (Study, Design, Factor, Grid, Response, Collection):
        for key in model.model_fields:
            assert f"`{key}`" in text, (model.__name__, key)
