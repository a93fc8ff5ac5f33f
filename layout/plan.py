"""The plan: every unit and slot of a randomized study, saved as JSON with a fingerprint.

``plan.json`` is the single source of truth. Its fingerprint is the SHA-256 of the plan
object without its ``fingerprint`` and ``tool`` keys, serialised by RFC 8785 (the JSON
Canonicalization Scheme), so any language can recompute it; loading a plan recomputes
it and refuses a plan whose stored value differs. (A file that is byte for byte as layout
wrote it, which its seal in tool.file_sha256 shows, had its fingerprint computed from
this content when written; see _sealed.) Numbers in the file are written as RFC 8785
writes them, so the file's own text parses to the same values everywhere.
"""

from __future__ import annotations

import hashlib
import json
import secrets
from dataclasses import dataclass, fields
from functools import cached_property
from itertools import groupby
from operator import attrgetter
from pathlib import Path
from typing import Any, Final, TypeVar

import rfc8785
from pydantic import ValidationError

from layout.codes import CHECK_LETTERS, MODULUS, SCHEME, serial_width, slot_code, subsample_width, unit_code
from layout.designs import collection_order, randomize
from layout.errors import PlanError
from layout.files import write_new
from layout.jsontext import BIG_LISTS, canonical_bytes, readable_json
from layout.meta import PLAN_FORMAT, __version__
from layout.rng import ALGORITHM, Stream
from layout.spec import Spec

FORMAT: Final = PLAN_FORMAT
_UNFINGERPRINTED: Final = ("fingerprint", "tool")
# tool.file_sha256: the SHA-256 of the file's own text as written, this value in it as 64 zeros (see _sealed)
_SEAL: Final = "file_sha256"
_UNSEALED: Final = "0" * 64


@dataclass(frozen=True)
class Unit:
    """One experimental unit as planned."""

    code: str
    serial: int
    treatment: str
    levels: dict[str, str]
    block: int | None
    replicate: int
    row: int | None
    col: int | None
    whole_plot: int | None
    walk: int


@dataclass(frozen=True)
class Slot:
    """One subsample slot of a unit."""

    code: str
    unit: str
    subsample: int


@dataclass(frozen=True)
class Round:
    """One collection round and the order in which its units are measured."""

    name: str
    order: tuple[str, ...]


@dataclass(frozen=True, eq=False)
class Plan:
    """A randomized study: spec, seed, units, slots and collection rounds."""

    spec: Spec
    seed: int
    rng: dict[str, Any]
    units: tuple[Unit, ...]
    slots: tuple[Slot, ...]
    rounds: tuple[Round, ...]
    salt: int = 0
    replaces: dict[str, Any] | None = None
    # the spec exactly as a loaded plan.json holds it, so a later version with new spec keys
    # recomputes the same fingerprint for it
    spec_json: dict[str, Any] | None = None

    def content(self) -> dict[str, Any]:
        """The fingerprinted content as plain JSON data."""
        return {
            "format": FORMAT,
            "seed": self.seed,
            "rng": self.rng,
            "codes": {"scheme": SCHEME, "letters": CHECK_LETTERS, "salt": self.salt},
            "replaces": self.replaces,
            "spec": self.spec_json if self.spec_json is not None else self.spec.model_dump(mode="json"),
            # built field by field: dataclasses.asdict deep-copies and costs seconds at 100,000 slots
            "units": [
                {
                    "code": u.code,
                    "serial": u.serial,
                    "treatment": u.treatment,
                    "levels": dict(u.levels),
                    "block": u.block,
                    "replicate": u.replicate,
                    "row": u.row,
                    "col": u.col,
                    "whole_plot": u.whole_plot,
                    "walk": u.walk,
                }
                for u in self.units
            ],  # fmt: skip
            "slots": [{"code": s.code, "unit": s.unit, "subsample": s.subsample} for s in self.slots],
            "rounds": [{"name": r.name, "order": list(r.order)} for r in self.rounds],
        }

    @cached_property
    def _content(self) -> dict[str, Any]:
        return self.content()

    @cached_property
    def _simple_parts(self) -> frozenset[str]:
        """The big lists, which this class builds from strings and small whole numbers only, so they need no
        value-by-value look before the fast JSON path; unless a factor name lies outside the Basic
        Multilingual Plane, where RFC 8785 sorts keys differently."""
        names = [f.name for f in self.spec.factor] + ["treatment"]
        return frozenset(BIG_LISTS) if all(max(map(ord, n)) < 0xD800 for n in names) else frozenset()

    @cached_property
    def fingerprint(self) -> str:
        """SHA-256 hex of the canonical content."""
        return hashlib.sha256(canonical(self._content, self._simple_parts)).hexdigest()

    @cached_property
    def unit_by_code(self) -> dict[str, Unit]:
        """Units keyed by code."""
        return {u.code: u for u in self.units}

    @cached_property
    def slots_of(self) -> dict[str, tuple[Slot, ...]]:
        """Each unit's slots in subsample order, keyed by unit code."""
        out: dict[str, tuple[Slot, ...]] = {}
        for unit, run in groupby(self.slots, key=attrgetter("unit")):  # a unit's slots are together in a plan
            out[unit] = out.get(unit, ()) + tuple(run)
        return out

    @property
    def subsamples_vary(self) -> bool:
        """Whether units have different numbers of subsamples."""
        return len({len(v) for v in self.slots_of.values()}) > 1

    def to_json(self) -> str:
        """The plan file's text: readable, stable, ending in a newline, sealed (see _sealed)."""
        tool = {"name": "layout", "version": __version__, _SEAL: _UNSEALED}
        data = {"format": FORMAT, "fingerprint": self.fingerprint, "tool": tool}
        data.update(self._content)
        text = readable_json(data, self._simple_parts)
        blank = f'"{_SEAL}": "{_UNSEALED}"'
        digest = hashlib.sha256(text.encode("utf-8")).hexdigest()
        return text.replace(blank, f'"{_SEAL}": "{digest}"', 1)

    def save(self, path: str | Path, force: bool = False) -> Path:
        """Write plan.json; refuses to replace an existing file unless force."""
        return write_new(path, self.to_json(), force=force)


def canonical(data: dict[str, Any], simple: frozenset[str] = frozenset()) -> bytes:
    """The fingerprinted bytes: RFC 8785 canonical JSON of the plan without fingerprint and tool."""
    return canonical_bytes({k: v for k, v in data.items() if k not in _UNFINGERPRINTED}, simple)


def _fingerprint(data: dict[str, Any]) -> str:
    return hashlib.sha256(canonical(data)).hexdigest()


def draw_seed() -> int:
    """A fresh seed from the operating system, short enough to write down."""
    return secrets.randbelow(10**9)


def make_plan(spec: Spec, seed: int | None = None, replacing: Plan | None = None) -> Plan:
    """Randomize a validated spec; seed overrides the spec's, and is drawn when neither gives one.

    replacing is the plan this one replaces (``plan --force``): when the draw differs
    from it, the codes' salt is made to differ too, so a return of the old draw can never
    pass as this one.
    """
    if seed is None:
        seed = spec.study.seed if spec.study.seed is not None else draw_seed()
    spec = spec.model_copy(update={"study": spec.study.model_copy(update={"seed": seed})})
    stream = Stream(seed)
    placements = randomize(spec, stream)
    rounds_order = [
        collection_order(placements, stream) if spec.collection.order == "random" else list(range(len(placements)))
        for _ in spec.collection.rounds
    ]
    salt = stream.below(MODULUS)  # drawn last, so the randomization itself does not depend on it
    replaces = None
    if replacing is not None and replacing.spec.study.id == spec.study.id:
        same = _build(spec, seed, placements, rounds_order, salt, None)
        if same.fingerprint == replacing.fingerprint:
            return same  # the same draw again: its codes and sheets stay valid
        if salt == replacing.salt:
            salt = (replacing.salt + 1 + stream.below(MODULUS - 1)) % MODULUS
        replaces = {"fingerprint": replacing.fingerprint, "salt": replacing.salt}
    return _build(spec, seed, placements, rounds_order, salt, replaces)


def _build(
    spec: Spec,
    seed: int,
    placements: list[Any],
    rounds_order: list[list[int]],
    salt: int,
    replaces: dict[str, Any] | None,
) -> Plan:
    study = spec.study.id
    width = serial_width(len(placements))
    sub_width = subsample_width(spec.design.most_subsamples)
    seen: dict[str, int] = {}
    units: list[Unit] = []
    slots: list[Slot] = []
    for serial, p in enumerate(placements, start=1):
        seen[p.treatment] = seen.get(p.treatment, 0) + 1
        code = unit_code(study, serial, width, salt)
        units.append(
            Unit(code, serial, p.treatment, p.levels, p.block, seen[p.treatment], p.row, p.col, p.whole_plot, serial)
        )
        count = spec.subsamples_of(p.treatment, p.levels)
        slots += [Slot(slot_code(study, serial, width, s, sub_width, salt), code, s) for s in range(1, count + 1)]
    rounds = [
        Round(name, tuple(units[i].code for i in order))
        for name, order in zip(spec.collection.rounds, rounds_order, strict=True)
    ]
    return Plan(spec, seed, dict(ALGORITHM), tuple(units), tuple(slots), tuple(rounds), salt, replaces)


Record = TypeVar("Record", Unit, Slot)


def _records(kind: type[Record], items: Any) -> tuple[Record, ...]:
    """kind(**item) for each item, without a call to the dataclass's __init__ per item (a frozen one sets each
    field through object.__setattr__: 0.07 s for 100,000 slots, against 0.02 here). TypeError, as kind(**item)
    would raise, unless every item is an object with exactly kind's fields."""
    names = {f.name for f in fields(kind)}
    if not isinstance(items, list) or not set(map(type, items)) <= {dict}:
        raise TypeError(f"the {kind.__name__.lower()}s are not a list of objects")
    if items and (set(map(len, items)) != {len(names)} or set().union(*items) != names):
        raise TypeError(f"each {kind.__name__.lower()} must have exactly the fields {', '.join(sorted(names))}")
    new = object.__new__

    def record(item: dict[str, Any]) -> Record:
        made = new(kind)
        made.__dict__.update(item)
        return made

    return tuple(map(record, items))


_DIGITS_AS_ZERO: Final = str.maketrans("123456789", "0" * 9)


def parse_plan(text: str, file: str = "plan.json") -> Plan:
    """A Plan from plan.json text; PlanError when it is not a plan or was edited."""
    oddities: list[str] = []  # floats and NaN/Infinity: where json and RFC 8785 may differ

    def noted(token: str) -> float:
        oddities.append(token)
        return float(token)

    try:
        data = json.loads(text, parse_float=noted, parse_constant=noted)
    except json.JSONDecodeError as exc:
        raise PlanError.at(file, f"line {exc.lineno}, column {exc.colno}", f"not valid JSON: {exc.msg}") from None
    if not isinstance(data, dict) or data.get("format") != FORMAT:
        found = data.get("format") if isinstance(data, dict) else None
        if isinstance(found, str) and found.startswith("layout-plan/"):
            raise PlanError.at(
                file,
                "format",
                f"made by an earlier version of layout ({found}); this version reads {FORMAT}. "
                "Use the version that made it, or make the plan again with 'layout plan'",
            )
        raise PlanError.at(file, "format", f"not a layout plan: must be {FORMAT!r}, got {found!r}")
    if _sealed(text, data):
        return _plan_of(data, data["fingerprint"], file)
    # Without floats, integers of 16 digits or more, or characters beyond the Basic Multilingual Plane
    # (typed or escaped), the json module writes the big lists as RFC 8785 does: no look value by value.
    wide = not text.isascii() and max(text) > "\uffff"
    # 2^53 has 16 digits; a run of 16 in a text value only costs the slower look
    long_integers = "0" * 16 in text.translate(_DIGITS_AS_ZERO)
    simple = frozenset() if oddities or long_integers or wide or "\\ud" in text.lower() else frozenset(BIG_LISTS)
    try:
        recomputed = hashlib.sha256(canonical(data, simple)).hexdigest()
    except (rfc8785.CanonicalizationError, TypeError, ValueError) as exc:
        raise PlanError.at(file, "", f"cannot be canonicalised to check its fingerprint ({exc})") from None
    if data.get("fingerprint") != recomputed:
        raise PlanError.at(
            file,
            "fingerprint",
            f"the file says {data.get('fingerprint')!r} but its content gives {recomputed!r}; "
            "the plan was edited after it was made. Restore the original file, or make a new plan with 'layout plan'",
        )
    return _plan_of(data, recomputed, file)


def _sealed(text: str, data: dict[str, Any]) -> bool:
    """Whether the text is, byte for byte, what Plan.to_json wrote: its seal (tool.file_sha256) is the SHA-256
    of the text with the seal written as zeros. The fingerprint beside it was then computed from this very
    content when the file was written, and recomputing it (RFC 8785 over every unit and slot: a third of
    loading 100,000 slots) cannot give another value. Any change to the file, even of spacing, breaks the
    seal, and the fingerprint is recomputed as for a plan from elsewhere."""
    tool = data.get("tool")
    seal = tool.get(_SEAL) if isinstance(tool, dict) else None
    fingerprint = data.get("fingerprint")
    if not isinstance(seal, str) or not isinstance(fingerprint, str) or seal == _UNSEALED:
        return False
    written = f'"{_SEAL}": "{seal}"'
    if written not in text[:4096]:  # tool is near the top, as to_json writes it
        return False
    blank = text.replace(written, f'"{_SEAL}": "{_UNSEALED}"', 1)
    return hashlib.sha256(blank.encode("utf-8")).hexdigest() == seal


def _plan_of(data: dict[str, Any], fingerprint: str, file: str) -> Plan:
    """The Plan of a verified plan.json's data."""
    try:
        plan = Plan(
            spec=Spec.model_validate(data["spec"]),
            seed=int(data["seed"]),
            rng=dict(data["rng"]),
            units=_records(Unit, data["units"]),
            slots=_records(Slot, data["slots"]),
            rounds=tuple(Round(r["name"], tuple(r["order"])) for r in data["rounds"]),
            salt=int(data["codes"]["salt"]),
            replaces=data.get("replaces"),
            spec_json=data["spec"],
        )
    except (KeyError, TypeError, ValueError, ValidationError) as exc:
        raise PlanError.at(file, "", f"not a complete layout plan ({type(exc).__name__}: {exc})") from None
    if plan.rng.get("version") != ALGORITHM["version"] or plan.rng.get("name") != ALGORITHM["name"]:
        raise PlanError.at(
            file,
            "rng",
            f"made with random stream {plan.rng.get('name')!r} version {plan.rng.get('version')!r}, "
            "which this version of layout does not know",
        )
    plan.__dict__["fingerprint"] = fingerprint  # verified by the caller; no need to serialise it again
    return plan


def load_plan(path: str | Path) -> Plan:
    """Read and verify a plan.json file."""
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise PlanError.at(str(p), "", "no such file") from None
    except IsADirectoryError:
        raise PlanError.at(str(p), "", "is a folder; name the plan.json file that 'layout plan' wrote") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise PlanError.at(str(p), "", f"cannot be read: {exc}") from None
    return parse_plan(text, str(p))
