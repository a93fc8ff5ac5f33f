"""The plan: every unit and slot of a randomized study, saved as canonical JSON.

``plan.json`` is the single source of truth; its fingerprint is the SHA-256 of the
canonical JSON (sorted keys, no spaces, UTF-8) of everything but the fingerprint itself
and the tool's version, so an edited plan is caught when it is loaded.
"""

from __future__ import annotations

import hashlib
import json
import secrets
from dataclasses import asdict, dataclass
from functools import cached_property
from pathlib import Path
from typing import Any, Final

from pydantic import ValidationError

from layout import __version__
from layout.codes import serial_width, slot_code, unit_code
from layout.designs import collection_order, randomize
from layout.errors import PlanError
from layout.files import write_new
from layout.rng import ALGORITHM, Stream
from layout.spec import Spec

FORMAT: Final = "layout-plan/1"
_UNFINGERPRINTED: Final = ("fingerprint", "tool")


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

    def content(self) -> dict[str, Any]:
        """The fingerprinted content as plain JSON data."""
        return {
            "format": FORMAT,
            "seed": self.seed,
            "rng": self.rng,
            "spec": self.spec.model_dump(mode="json"),
            "units": [asdict(u) for u in self.units],
            "slots": [asdict(s) for s in self.slots],
            "rounds": [{"name": r.name, "order": list(r.order)} for r in self.rounds],
        }

    @cached_property
    def fingerprint(self) -> str:
        """SHA-256 hex of the canonical content."""
        return _fingerprint(self.content())

    @cached_property
    def unit_by_code(self) -> dict[str, Unit]:
        """Units keyed by code."""
        return {u.code: u for u in self.units}

    def to_json(self) -> str:
        """The plan file's text: readable, stable, ending in a newline."""
        data = {"format": FORMAT, "fingerprint": self.fingerprint, "tool": {"name": "layout", "version": __version__}}
        data.update(self.content())
        return _readable_json(data)

    def save(self, path: str | Path, force: bool = False) -> Path:
        """Write plan.json; refuses to replace an existing file unless force."""
        return write_new(path, self.to_json(), force=force)


def _readable_json(data: dict[str, Any]) -> str:
    """Indented JSON, but with one line per unit, slot and round so diffs stay readable."""
    parts = []
    for key, value in data.items():
        if key in ("units", "slots", "rounds"):
            items = ",\n".join("  " + json.dumps(item, ensure_ascii=False) for item in value)
            text = f"[\n{items}\n ]"
        else:
            text = json.dumps(value, indent=1, ensure_ascii=False).replace("\n", "\n ")
        parts.append(f" {json.dumps(key)}: {text}")
    return "{\n" + ",\n".join(parts) + "\n}\n"


def _canonical(data: dict[str, Any]) -> bytes:
    return json.dumps(data, sort_keys=True, separators=(",", ":"), ensure_ascii=False).encode("utf-8")


def _fingerprint(data: dict[str, Any]) -> str:
    return hashlib.sha256(_canonical({k: v for k, v in data.items() if k not in _UNFINGERPRINTED})).hexdigest()


def draw_seed() -> int:
    """A fresh seed from the operating system, short enough to write down."""
    return secrets.randbelow(10**9)


def make_plan(spec: Spec, seed: int | None = None) -> Plan:
    """Randomize a validated spec; seed overrides the spec's, and is drawn when neither gives one."""
    if seed is None:
        seed = spec.study.seed if spec.study.seed is not None else draw_seed()
    spec = spec.model_copy(update={"study": spec.study.model_copy(update={"seed": seed})})
    stream = Stream(seed)
    placements = randomize(spec, stream)
    study, subsamples = spec.study.id, spec.design.subsamples
    width = serial_width(len(placements))
    seen: dict[str, int] = {}
    units: list[Unit] = []
    slots: list[Slot] = []
    for serial, p in enumerate(placements, start=1):
        seen[p.treatment] = seen.get(p.treatment, 0) + 1
        code = unit_code(study, serial, width)
        units.append(
            Unit(code, serial, p.treatment, p.levels, p.block, seen[p.treatment], p.row, p.col, p.whole_plot, serial)
        )
        slots += [Slot(slot_code(study, serial, width, s, subsamples), code, s) for s in range(1, subsamples + 1)]
    rounds = []
    for name in spec.collection.rounds:
        order = collection_order(placements, stream) if spec.collection.order == "random" else range(len(units))
        rounds.append(Round(name, tuple(units[i].code for i in order)))
    return Plan(spec, seed, dict(ALGORITHM), tuple(units), tuple(slots), tuple(rounds))


def parse_plan(text: str, file: str = "plan.json") -> Plan:
    """A Plan from plan.json text; PlanError when it is not a plan or was edited."""
    try:
        data = json.loads(text)
    except json.JSONDecodeError as exc:
        raise PlanError(f"{file}: line {exc.lineno}, column {exc.colno}: not valid JSON: {exc.msg}") from None
    if not isinstance(data, dict) or data.get("format") != FORMAT:
        found = data.get("format") if isinstance(data, dict) else None
        raise PlanError(f"{file}: not a layout plan: format must be {FORMAT!r}, got {found!r}")
    if data.get("fingerprint") != _fingerprint(data):
        raise PlanError(
            f"{file}: fingerprint does not match the content; the plan was edited after it was made. "
            "Restore the original file, or make a new plan with 'layout plan'"
        )
    try:
        plan = Plan(
            spec=Spec.model_validate(data["spec"]),
            seed=int(data["seed"]),
            rng=dict(data["rng"]),
            units=tuple(Unit(**u) for u in data["units"]),
            slots=tuple(Slot(**s) for s in data["slots"]),
            rounds=tuple(Round(r["name"], tuple(r["order"])) for r in data["rounds"]),
        )
    except (KeyError, TypeError, ValueError, ValidationError) as exc:
        raise PlanError(f"{file}: not a complete layout plan ({type(exc).__name__}: {exc})") from None
    if plan.rng.get("version") != ALGORITHM["version"] or plan.rng.get("name") != ALGORITHM["name"]:
        raise PlanError(
            f"{file}: made with random stream {plan.rng.get('name')!r} version {plan.rng.get('version')!r}, which this version of layout does not know"
        )
    return plan


def load_plan(path: str | Path) -> Plan:
    """Read and verify a plan.json file."""
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise PlanError(f"{p}: no such file") from None
    except IsADirectoryError:
        raise PlanError(f"{p}: is a folder; name the plan.json file that 'layout plan' wrote") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise PlanError(f"{p}: cannot be read: {exc}") from None
    return parse_plan(text, str(p))
