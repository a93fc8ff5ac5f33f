"""plan.json: keys, canonical fingerprint, a pinned golden plan, refusal of edited plans."""

from __future__ import annotations

import dataclasses
import hashlib
import json
import re
from pathlib import Path
from typing import Any

import pytest
import rfc8785
from hypothesis import given, settings
from hypothesis import strategies as st

from layout import Plan, PlanError, load_plan, load_spec, loads_spec, make_plan
from layout.codes import parse_code
from layout.errors import OutputExists

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
        assert data["format"] == "layout-plan/2"
        assert data["rng"]["name"] and data["rng"]["version"] == 2
        assert 0 <= data["codes"]["salt"] < 23
        assert all(set(u) == UNIT_KEYS for u in data["units"])
        assert all(set(s) == {"code", "unit", "subsample"} for s in data["slots"])

    def test_fingerprint_is_sha256_of_canonical_content(self) -> None:
        """fingerprint = SHA-256 of the RFC 8785 form of all but fingerprint and tool, recomputed here without
        the project's code: for ASCII keys, whole numbers and the short decimals of this plan, RFC 8785 (JCS,
        sections 3.2.2-3.2.3) is sorted keys, no spaces, UTF-8, and numbers as ECMAScript prints them."""
        data = json.loads(make_plan(load_spec(EXAMPLE)).to_json())
        body = {k: v for k, v in data.items() if k not in ("fingerprint", "tool")}
        canonical = json.dumps(body, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
        canonical = re.sub(r"(?<=[:\[,])(-?\d+)\.0(?=[,\]}])", r"\1", canonical)  # ECMAScript prints 5.0 as 5
        assert data["fingerprint"] == hashlib.sha256(canonical.encode()).hexdigest()

    def test_floats_are_written_as_rfc8785_writes_them(self, tmp_path: Path) -> None:
        """Numbers in plan.json are in their canonical form (0.1 stays 0.1, 400.0 is written 400)."""
        spec = load_spec(EXAMPLE)
        text = spec.model_dump_json().replace('"max":400', '"max":400.0')
        data = json.loads(text)
        data["response"][0]["min"] = 0.1
        plan = make_plan(loads_spec(json.dumps(data), "spec.json"))
        written = plan.to_json()
        assert '"min": 0.1' in written and "400.0" not in written
        assert load_plan(plan.save(tmp_path / "p.json")).fingerprint == plan.fingerprint

    def test_codes_are_valid_and_unique(self) -> None:
        """Every unit and slot code passes its check and none repeats."""
        plan = make_plan(load_spec(EXAMPLE))
        codes = [u.code for u in plan.units] + [s.code for s in plan.slots]
        assert len(set(codes)) == len(codes) == 16 + 64
        parts = [parse_code(c, plan.spec.study.id, (4, 3)) for c in codes]
        assert all(p is not None and p.passes(plan.salt) for p in parts)

    def test_blocks_are_rows_of_the_grid(self) -> None:
        """Each block of 4 fills one row of the 4 × 4 grid, walked before the next."""
        plan = make_plan(load_spec(EXAMPLE))
        for b in range(1, 5):
            assert {u.row for u in plan.units if u.block == b} == {b}
        assert [u.block for u in plan.units] == sorted(u.block for u in plan.units)

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
        with pytest.raises(PlanError, match="fingerprint") as caught:
            load_plan(path)
        problem = caught.value.problems[0]
        assert problem.where == "fingerprint" and data["fingerprint"] in problem.message

    def test_old_format_gets_a_plain_message(self, tmp_path: Path) -> None:
        """A plan of the first format is refused with the versions named."""
        path = tmp_path / "plan.json"
        path.write_text('{"format": "layout-plan/1"}')
        with pytest.raises(PlanError, match="earlier version"):
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


class TestReplacing:
    def test_a_new_draw_gets_a_new_salt(self) -> None:
        """Re-made with another seed over an old plan, the codes' salt differs from the old one's."""
        spec = load_spec(EXAMPLE)
        old = make_plan(spec)
        for seed in range(40):
            new = make_plan(spec, seed=seed, replacing=old)
            if new.fingerprint != old.fingerprint:
                assert new.salt != old.salt and new.replaces == {"fingerprint": old.fingerprint, "salt": old.salt}

    def test_the_same_draw_stays_the_same(self) -> None:
        """Re-made with the same spec and seed, the plan is the same, so printed sheets stay valid."""
        spec = load_spec(EXAMPLE)
        old = make_plan(spec)
        assert make_plan(spec, replacing=old).fingerprint == old.fingerprint

    def test_salt_does_not_change_the_randomization(self) -> None:
        """Avoiding a salt changes codes only: treatments, blocks and places stay as drawn."""
        spec = load_spec(EXAMPLE)
        plain = make_plan(spec, seed=7)
        old = dataclasses.replace(plain, seed=8)  # another draw whose codes share plain's salt
        twin = make_plan(spec, seed=7, replacing=old)
        assert twin.salt != plain.salt
        assert [(u.treatment, u.block, u.row, u.col) for u in twin.units] == [
            (u.treatment, u.block, u.row, u.col) for u in plain.units
        ]


class TestLaterVersions:
    def test_a_plan_whose_spec_lacks_newer_keys_keeps_its_fingerprint(self, tmp_path: Path) -> None:
        """A plan.json written before a spec key existed loads with the fingerprint it was written with."""
        data = json.loads(make_plan(load_spec(EXAMPLE)).to_json())
        del data["spec"]["design"]["unit_plural"]  # as if written by a version without this key
        body = {k: v for k, v in data.items() if k not in ("fingerprint", "tool")}
        import rfc8785

        data["fingerprint"] = hashlib.sha256(rfc8785.dumps(body)).hexdigest()
        path = tmp_path / "old.json"
        path.write_text(json.dumps(data), encoding="utf-8")
        assert load_plan(path).fingerprint == data["fingerprint"]


class TestFastJson:
    """layout.jsontext writes the big lists with the json module; rfc8785 (the reference library
    for RFC 8785) must give the same bytes for every input."""

    @settings(max_examples=300, deadline=None)
    @given(
        st.dictionaries(
            st.sampled_from(["units", "slots", "rounds", "spec", "seed"]),
            st.lists(
                st.dictionaries(
                    st.text(max_size=6),
                    st.one_of(
                        st.none(),
                        st.booleans(),
                        st.text(),
                        st.integers(-(2**60), 2**60),
                        st.floats(allow_nan=False, allow_infinity=False),
                        st.lists(st.text(), max_size=3),
                    ),
                    max_size=5,
                ),
                max_size=4,
            ),
        )  # fmt: skip
    )
    def test_canonical_bytes_equal_rfc8785(self, data: dict) -> None:
        from layout.jsontext import canonical_bytes

        try:
            expected = rfc8785.dumps(data)
        except rfc8785.CanonicalizationError:
            return  # integers beyond 2^53: the reference refuses them, and a plan never holds them
        assert canonical_bytes(data) == expected

    def test_unit_fields_are_all_in_the_content(self, rcbd_plan: Plan) -> None:
        """The hand-built unit and slot dicts keep every dataclass field, in order."""
        from dataclasses import asdict

        content = rcbd_plan.content()
        assert content["units"] == [asdict(u) for u in rcbd_plan.units]
        assert content["slots"] == [asdict(s) for s in rcbd_plan.slots]
        assert list(content["units"][0]) == list(asdict(rcbd_plan.units[0]))

    @settings(max_examples=200, deadline=None)
    @given(
        st.lists(
            st.dictionaries(
                st.sampled_from(["code", "unit", "x"]),
                st.one_of(st.text(), st.integers(0, 99), st.sampled_from(['}, {"', '"}, {"a": ', "\\\\", '\\\\"'])),
                min_size=1,
            ),
            max_size=6,
        )
    )
    def test_item_lines_equal_one_dump_per_item(self, items: list) -> None:
        """The plan file's lines from one json call for a whole list equal one call per item."""
        import json

        from layout.jsontext import _item_lines

        assert _item_lines(items) == [json.dumps(i, ensure_ascii=False, separators=(", ", ": ")) for i in items]


@pytest.mark.parametrize(
    ("old", "new"),
    [
        ('"serial": 1,', '"serial": 1.0,'),  # a float where a whole number was
        ('"serial": 1,', '"serial": 9007199254740993,'),  # beyond 2^53
        ('"replicate": 1,', '"replicate": 1, "x\\ud83c\\udf31": 1,'),  # a key beyond the BMP, escaped
        ('"replicate": 1,', '"replicate": 1, "x🌱": 1,'),  # the same key typed
    ],
)
def test_edited_plan_fingerprint_is_the_rfc8785_one(old: str, new: str) -> None:
    """Whatever an edited plan holds, the fingerprint it is checked against is the one rfc8785 (the
    reference library) gives: the fast path of layout.jsontext is only taken where it writes the same."""
    from layout.plan import _UNFINGERPRINTED, parse_plan

    text = (Path(__file__).parent / "golden" / "field-irrigation-rcbd.plan.json").read_text(encoding="utf-8")
    edited = text.replace(old, new, 1)
    assert edited != text
    data = json.loads(edited)
    try:
        expected = hashlib.sha256(
            rfc8785.dumps({k: v for k, v in data.items() if k not in _UNFINGERPRINTED})
        ).hexdigest()
    except rfc8785.CanonicalizationError:
        expected = None
    if expected == data["fingerprint"]:  # RFC 8785 writes 1.0 as 1: the same plan, still accepted
        assert parse_plan(edited, "edited.json").fingerprint == expected
        return
    with pytest.raises(PlanError) as caught:
        parse_plan(edited, "edited.json")
    message = str(caught.value)
    assert (expected in message) if expected else "cannot be canonicalised" in message


@pytest.mark.parametrize(
    ("part", "edit"),
    [
        ("slots", lambda items: items[0].pop("unit")),
        ("slots", lambda items: items[-1].update(extra=1)),
        ("units", lambda items: items[3].pop("walk")),
        ("units", lambda items: items.append("a unit")),
    ],
)
def test_a_plan_whose_records_lack_or_add_fields_is_refused(part: str, edit: Any) -> None:
    """A unit or slot with a field missing or added is refused in one line, even with a fingerprint made
    anew for the edited content (rfc8785, the reference library)."""
    from layout.plan import _UNFINGERPRINTED, parse_plan

    data = json.loads(
        (Path(__file__).parent / "golden" / "field-irrigation-rcbd.plan.json").read_text(encoding="utf-8")
    )
    edit(data[part])
    data["fingerprint"] = hashlib.sha256(
        rfc8785.dumps({k: v for k, v in data.items() if k not in _UNFINGERPRINTED})
    ).hexdigest()
    with pytest.raises(PlanError, match="not a complete layout plan") as caught:
        parse_plan(json.dumps(data), "edited.json")
    assert "\n" not in str(caught.value)


class TestSeal:
    """A plan file as layout wrote it carries a seal (tool.file_sha256): the SHA-256 of its own text with the
    seal as zeros, recomputed here with hashlib alone. Sealed, it loads without re-serialising; any change to
    the bytes breaks the seal, and the fingerprint is recomputed as for any other file."""

    @pytest.fixture()
    def saved(self, tmp_path: Path) -> Path:
        return make_plan(load_spec(EXAMPLE)).save(tmp_path / "plan.json")

    def test_the_seal_is_the_digest_of_the_file_with_zeros_in_its_place(self, saved: Path) -> None:
        text = saved.read_text(encoding="utf-8")
        seal = json.loads(text)["tool"]["file_sha256"]
        blank = text.replace(seal, "0" * 64, 1)
        assert hashlib.sha256(blank.encode("utf-8")).hexdigest() == seal

    def test_a_sealed_plan_loads_without_recomputing(self, saved: Path, monkeypatch: pytest.MonkeyPatch) -> None:
        import layout.plan

        expected = json.loads(saved.read_text(encoding="utf-8"))["fingerprint"]
        monkeypatch.setattr(layout.plan, "canonical", lambda *a: pytest.fail("re-serialised a sealed plan"))
        assert load_plan(saved).fingerprint == expected

    def test_an_edit_breaks_the_seal_and_is_refused(self, saved: Path, monkeypatch: pytest.MonkeyPatch) -> None:
        import layout.plan

        text = saved.read_text(encoding="utf-8")
        saved.write_text(text.replace('"subsample": 1}', '"subsample": 2}', 1), encoding="utf-8")
        calls = []
        real = layout.plan.canonical
        monkeypatch.setattr(layout.plan, "canonical", lambda *a: calls.append(1) or real(*a))
        with pytest.raises(PlanError, match="edited after it was made"):
            load_plan(saved)
        assert calls  # the fingerprint was recomputed

    def test_respaced_or_resealed_with_another_version_still_loads(self, saved: Path) -> None:
        """Spacing changed (an editor re-indenting it) or the tool part edited: the seal no longer holds, the
        recomputed fingerprint does (neither is part of the content)."""
        data = json.loads(saved.read_text(encoding="utf-8"))
        expected = data["fingerprint"]
        saved.write_text(json.dumps(data, indent=4), encoding="utf-8")
        assert load_plan(saved).fingerprint == expected
        data["tool"]["version"] = "0.0.1"
        saved.write_text(json.dumps(data), encoding="utf-8")
        assert load_plan(saved).fingerprint == expected
