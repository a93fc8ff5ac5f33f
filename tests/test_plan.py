"""plan.json: keys, canonical fingerprint, a pinned golden plan, refusal of edited plans."""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

import pytest

from layout import PlanError, load_plan, load_spec, make_plan
from layout.codes import is_valid
from layout.errors import OutputExists
from layout.fieldmap import walk_cells

HERE = Path(__file__).parent
EXAMPLE = HERE / "specs" / "valid" / "field-irrigation-rcbd.toml"
GOLDEN = HERE / "golden" / "field-irrigation-rcbd.plan.json"
UNIT_KEYS = {"code", "serial", "treatment", "levels", "block", "replicate", "row", "col", "whole_plot", "walk"}


class TestGolden:
    def test_same_spec_and_seed_give_the_pinned_plan(self) -> None:
        """The example spec with its seed gives exactly the pinned plan (guards the stream and every design step)."""
        made = json.loads(make_plan(load_spec(EXAMPLE)).to_json())
        pinned = json.loads(GOLDEN.read_text(encoding="utf-8"))
        made.pop("tool"), pinned.pop("tool")
        assert made == pinned

    def test_pinned_plan_loads(self) -> None:
        """The pinned file is a valid plan whose fingerprint checks out."""
        assert load_plan(GOLDEN).fingerprint == json.loads(GOLDEN.read_text())["fingerprint"]


class TestContent:
    def test_keys(self, tmp_path: Path) -> None:
        """plan.json holds the keys of the design contract."""
        path = make_plan(load_spec(EXAMPLE)).save(tmp_path / "plan.json")
        data = json.loads(path.read_text())
        assert {"format", "fingerprint", "seed", "rng", "spec", "units", "slots"} <= set(data)
        assert data["format"] == "layout-plan/1"
        assert data["rng"]["name"] and data["rng"]["version"] == 1
        assert all(set(u) == UNIT_KEYS for u in data["units"])
        assert all(set(s) == {"code", "unit", "subsample"} for s in data["slots"])

    def test_fingerprint_is_sha256_of_canonical_content(self) -> None:
        """fingerprint = SHA-256 of the sorted-key, compact UTF-8 JSON of all but fingerprint and tool."""
        data = json.loads(make_plan(load_spec(EXAMPLE)).to_json())
        body = {k: v for k, v in data.items() if k not in ("fingerprint", "tool")}
        canonical = json.dumps(body, sort_keys=True, separators=(",", ":"), ensure_ascii=False).encode()
        assert data["fingerprint"] == hashlib.sha256(canonical).hexdigest()

    def test_codes_are_valid_and_unique(self) -> None:
        """Every unit and slot code passes its check and none repeats."""
        plan = make_plan(load_spec(EXAMPLE))
        codes = [u.code for u in plan.units] + [s.code for s in plan.slots]
        assert len(set(codes)) == len(codes) == 16 + 64
        assert all(is_valid(c) for c in codes)

    def test_grid_positions(self) -> None:
        """Units sit on the grid in walk order."""
        plan = make_plan(load_spec(EXAMPLE))
        assert [(u.row, u.col) for u in plan.units] == walk_cells(4, 4, "serpentine")

    def test_seed_override_and_recorded(self) -> None:
        """A seed argument overrides the spec's and is recorded in the plan's spec."""
        plan = make_plan(load_spec(EXAMPLE), seed=99)
        assert plan.seed == 99 and plan.spec.study.seed == 99
        assert plan.fingerprint != make_plan(load_spec(EXAMPLE)).fingerprint

    def test_seed_drawn_when_absent(self) -> None:
        """Without any seed one is drawn and recorded, so the plan can be made again."""
        spec = load_spec(EXAMPLE)
        spec = spec.model_copy(update={"study": spec.study.model_copy(update={"seed": None})})
        plan = make_plan(spec)
        assert isinstance(plan.seed, int)
        assert make_plan(plan.spec).fingerprint == plan.fingerprint


class TestLoad:
    def test_round_trip(self, tmp_path: Path) -> None:
        """A saved plan loads back equal, byte for byte when saved again."""
        plan = make_plan(load_spec(EXAMPLE))
        path = plan.save(tmp_path / "plan.json")
        again = load_plan(path)
        assert again.to_json() == plan.to_json()

    def test_edited_plan_refused(self, tmp_path: Path) -> None:
        """Changing one treatment in plan.json makes load_plan refuse it."""
        path = make_plan(load_spec(EXAMPLE)).save(tmp_path / "plan.json")
        data = json.loads(path.read_text())
        a, b = data["units"][0]["treatment"], data["units"][1]["treatment"]
        data["units"][0]["treatment"], data["units"][1]["treatment"] = b, a
        path.write_text(json.dumps(data))
        with pytest.raises(PlanError, match="fingerprint does not match"):
            load_plan(path)

    @pytest.mark.parametrize("text", ["not json", "[]", '{"format": "other/1"}'])
    def test_not_a_plan(self, tmp_path: Path, text: str) -> None:
        """Files that are not plans are refused with a PlanError."""
        path = tmp_path / "plan.json"
        path.write_text(text)
        with pytest.raises(PlanError):
            load_plan(path)

    def test_never_overwrites_without_force(self, tmp_path: Path) -> None:
        """Saving over an existing plan needs force; the old file stays as it was."""
        path = tmp_path / "plan.json"
        path.write_text("precious")
        with pytest.raises(OutputExists):
            make_plan(load_spec(EXAMPLE)).save(path)
        assert path.read_text() == "precious"
        make_plan(load_spec(EXAMPLE)).save(path, force=True)
        assert load_plan(path)
