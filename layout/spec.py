"""Load and validate a design spec (TOML or JSON) into frozen objects.

Parse, then convert, then validate: tomllib/json give dicts, pydantic checks shapes and
types, and ``design_rules`` checks what depends on several keys at once. Every problem
is collected and reported together, each naming the file and the key path.
"""

from __future__ import annotations

import json
import re
import tomllib
from datetime import date
from pathlib import Path
from typing import Annotated, Any, Final, Literal

from pydantic import (
    BaseModel,
    ConfigDict,
    Field,
    Strict,
    StrictBool,
    StrictFloat,
    StrictInt,
    StrictStr,
    ValidationError,
    field_validator,
)

from layout.errors import Problem, SpecError
from layout.names import clash
from layout.spec_messages import problems_from_validation, toml_problem
from layout.spec_rules import design_rules

DESIGN_TYPES: Final = ("crd", "rcbd", "latin-square", "split-plot")
RESPONSE_KINDS: Final = ("number", "integer", "category", "text", "date")
DEFAULT_MISSING_REASONS: Final = ("not measured", "lost", "damaged", "other")
MAX_SEED: Final = 2**53 - 1  # the largest whole number every JSON reader keeps exactly (RFC 8785, I-JSON)


# Scalars are strict (a quoted "5" is not a number); lists are accepted for tuples.
Int = StrictInt
Str = StrictStr
Bool = StrictBool
Num = StrictFloat | StrictInt
StrictDate = Annotated[date, Strict()]


class _Frozen(BaseModel):
    model_config = ConfigDict(frozen=True, extra="forbid")


def _label(text: str) -> str:
    if not text.strip():
        raise ValueError("must not be empty")
    if text != text.strip():
        raise ValueError(f"must not start or end with a space, got {text!r}")
    return text


class Study(_Frozen):
    id: Str
    title: Str
    seed: Int | None = None
    blind: Bool = False

    @field_validator("id")
    @classmethod
    def _id(cls, v: str) -> str:
        if not re.fullmatch(r"[A-Z0-9]{2,8}", v):
            raise ValueError(f"must be 2 to 8 of A-Z and 0-9 (upper case, no spaces or hyphens), got {v!r}")
        return v

    @field_validator("title")
    @classmethod
    def _title(cls, v: str) -> str:
        return _label(v)

    @field_validator("seed")
    @classmethod
    def _seed(cls, v: int | None) -> int | None:
        if v is not None and not 0 <= v <= MAX_SEED:
            raise ValueError(f"must be a whole number from 0 to 2^53-1, got {v}")
        return v


class Factor(_Frozen):
    name: Str
    levels: tuple[Str, ...]
    whole_plot: Bool = False

    @field_validator("name")
    @classmethod
    def _name(cls, v: str) -> str:
        _label(v)
        if why := clash(v):
            raise ValueError(f"{why}; choose another name")
        return v

    @field_validator("levels")
    @classmethod
    def _levels(cls, v: tuple[str, ...]) -> tuple[str, ...]:
        if len(v) < 2:
            raise ValueError(f"a factor needs at least 2 levels, got {len(v)}")
        for level in v:
            _label(level)
            if "/" in level:
                raise ValueError(f"levels must not contain '/', which joins levels in treatment labels, got {level!r}")
        _no_duplicates(v)
        return v


class Design(_Frozen):
    type: Literal["crd", "rcbd", "latin-square", "split-plot"]
    replicates: Int | dict[Str, Int] | None = None
    blocks: Int | None = None
    subsamples: Int | dict[Str, Int] = 1
    unit_name: Str = "unit"
    subsample_name: Str = "subsample"
    unit_plural: Str | None = None
    subsample_plural: Str | None = None
    treatments: tuple[Str, ...] | None = None

    @property
    def units_word(self) -> str:
        """The plural of unit_name: unit_plural, or the usual English plural."""
        return self.unit_plural or plural(self.unit_name)

    @property
    def subsamples_word(self) -> str:
        """The plural of subsample_name: subsample_plural, or the usual English plural."""
        return self.subsample_plural or plural(self.subsample_name)

    @field_validator("replicates", mode="before")
    @classmethod
    def _replicates_shape(cls, v: Any) -> Any:
        table = isinstance(v, dict) and all(isinstance(k, str) and type(n) is int for k, n in v.items())
        if v is None or type(v) is int or table:
            return v
        raise ValueError(f"must be a whole number, or a table of treatment = whole number, got {_show(v)}")

    @field_validator("subsamples", mode="before")
    @classmethod
    def _subsamples_shape(cls, v: Any) -> Any:
        table = isinstance(v, dict) and all(isinstance(k, str) and type(n) is int for k, n in v.items())
        if type(v) is int or table:
            return v
        raise ValueError(f"must be a whole number, or a table of treatment = whole number, got {_show(v)}")

    @field_validator("subsamples")
    @classmethod
    def _subsamples(cls, v: int | dict[str, int]) -> int | dict[str, int]:
        for n in v.values() if isinstance(v, dict) else (v,):
            if not 1 <= n <= 999:
                raise ValueError(f"must be a whole number from 1 to 999 (1 = no subsampling), got {n}")
        return v

    @property
    def most_subsamples(self) -> int:
        """The largest number of subsamples any unit has."""
        return max(self.subsamples.values()) if isinstance(self.subsamples, dict) else self.subsamples

    @field_validator("unit_name", "subsample_name", "unit_plural", "subsample_plural")
    @classmethod
    def _names(cls, v: str | None) -> str | None:
        return v if v is None else _label(v)

    @field_validator("treatments")
    @classmethod
    def _treatments(cls, v: tuple[str, ...] | None) -> tuple[str, ...] | None:
        if v is None:
            return v
        if len(v) < 2:
            raise ValueError(f"a comparison needs at least 2 treatments, got {len(v)}")
        for t in v:
            _label(t)
        _no_duplicates(v)
        return v


class Grid(_Frozen):
    rows: Int
    cols: Int
    walk: Literal["serpentine", "rows"] = "serpentine"
    rows_are: Str | None = None
    cols_are: Str | None = None
    landmark: Str | None = None

    @field_validator("rows_are", "cols_are", "landmark")
    @classmethod
    def _words(cls, v: str | None) -> str | None:
        return v if v is None else _label(v)

    @field_validator("rows", "cols")
    @classmethod
    def _size(cls, v: int) -> int:
        if not 1 <= v <= 1000:
            raise ValueError(f"must be a whole number from 1 to 1000, got {v}")
        return v


class Response(_Frozen):
    name: Str
    kind: Literal["number", "integer", "category", "text", "date"]
    unit: Str | None = None
    min: Num | StrictDate | None = None
    max: Num | StrictDate | None = None
    decimals: Int | None = None
    levels: tuple[Str, ...] | None = None
    required: Bool = True

    @field_validator("name")
    @classmethod
    def _name(cls, v: str) -> str:
        _label(v)
        if why := clash(v):
            raise ValueError(f"{why}; choose another name")
        return v

    @field_validator("min", "max", mode="before")
    @classmethod
    def _iso_date(cls, v: Any) -> Any:
        # TOML has dates of its own; JSON writes them as ISO text
        if isinstance(v, str) and re.fullmatch(r"\d{4}-\d{2}-\d{2}", v):
            try:
                return date.fromisoformat(v)
            except ValueError:
                return v
        return v

    @field_validator("decimals")
    @classmethod
    def _decimals(cls, v: int | None) -> int | None:
        if v is not None and not 0 <= v <= 10:
            raise ValueError(f"must be a whole number from 0 to 10, got {v}")
        return v

    @field_validator("levels")
    @classmethod
    def _levels(cls, v: tuple[str, ...] | None) -> tuple[str, ...] | None:
        if v is None:
            return v
        if len(v) < 2:
            raise ValueError(f"a category needs at least 2 levels, got {len(v)}")
        for level in v:
            _label(level)
        _no_duplicates(v)
        return v

    @property
    def header(self) -> str:
        """The column header on sheets: the name, with the unit in brackets when it has one."""
        return f"{self.name} ({self.unit})" if self.unit else self.name

    @property
    def allowed_text(self) -> str:
        """What the response accepts, in words, for input messages and sheet headers."""
        if self.kind in ("number", "integer"):
            unit = f" {self.unit}" if self.unit else ""
            if self.min is not None and self.max is not None:
                rng = f"{self.min:g} to {self.max:g}{unit}"
            elif self.min is not None:
                rng = f"at least {self.min:g}{unit}"
            elif self.max is not None:
                rng = f"at most {self.max:g}{unit}"
            else:
                rng = f"any value{unit}"
            if self.kind == "integer":
                return f"whole number, {rng}"
            if self.decimals is None:
                return f"number, {rng}"
            places = (
                "no decimals" if self.decimals == 0 else f"{self.decimals} decimal{'s' if self.decimals > 1 else ''}"
            )
            return f"number, {rng}, {places}"
        if self.kind == "category":
            return "one of: " + ", ".join(self.levels or ())
        if self.kind == "date":
            if self.min is not None and self.max is not None:
                return f"date, YYYY-MM-DD, from {self.min} to {self.max}"
            if self.min is not None or self.max is not None:
                return f"date, YYYY-MM-DD, {'from' if self.min is not None else 'up to'} {self.min or self.max}"
            return "date, YYYY-MM-DD"
        return "free text"


class Collection(_Frozen):
    rounds: tuple[Str, ...] = ("1",)
    order: Literal["walk", "random"] = "walk"
    missing_reasons: tuple[Str, ...] = DEFAULT_MISSING_REASONS
    labels_per_round: Bool = False

    @field_validator("rounds", "missing_reasons")
    @classmethod
    def _names(cls, v: tuple[str, ...]) -> tuple[str, ...]:
        if not v:
            raise ValueError("must list at least one name")
        for name in v:
            _label(name)
        _no_duplicates(v)
        return v


class Spec(_Frozen):
    study: Study
    design: Design
    factor: tuple[Factor, ...] = ()
    layout: Grid | None = None
    response: tuple[Response, ...] = Field(min_length=1)
    collection: Collection = Collection()

    @property
    def treatments(self) -> tuple[str, ...]:
        """Treatment labels in spec order; factorial labels join levels with '/'."""
        return tuple(label for label, _ in self.treatment_levels())

    def treatment_levels(self) -> list[tuple[str, dict[str, str]]]:
        """(label, factor → level) for every treatment, in spec order."""
        if self.design.treatments is not None:
            return [(t, {"treatment": t}) for t in self.design.treatments]
        combos: list[dict[str, str]] = [{}]
        for f in self.factor:
            combos = [{**c, f.name: level} for c in combos for level in f.levels]
        return [("/".join(c.values()), c) for c in combos]

    def subsamples_of(self, treatment: str, levels: dict[str, str]) -> int:
        """Subsamples per unit of a treatment: the design's number, or its entry in the table."""
        table = self.design.subsamples
        if not isinstance(table, dict):
            return table
        if treatment in table:
            return table[treatment]
        whole = next((f.name for f in self.factor if f.whole_plot), None)
        return table[levels[whole]] if whole is not None else 1


def plural(word: str) -> str:
    """The usual English plural: batch → batches, tray → trays, assay → assays, colony → colonies."""
    if re.search(r"(s|x|z|ch|sh)$", word):
        return word + "es"
    if re.search(r"[^aeiou]y$", word):
        return word[:-1] + "ies"
    return word + "s"


def _show(value: Any) -> str:
    return repr(value) if isinstance(value, str) else json.dumps(value, default=str)


def _no_duplicates(values: tuple[str, ...]) -> None:
    seen: set[str] = set()
    for v in values:
        if v in seen:
            raise ValueError(f"{v!r} is listed twice; every name must be different")
        seen.add(v)


def parse_spec(data: dict[str, Any], file: str = "spec") -> Spec:
    """A validated Spec from parsed TOML/JSON data; SpecError lists every problem in one pass."""
    try:
        spec: Spec | None = Spec.model_validate(data)
        problems: list[Problem] = []
        removed: list[str] = []
    except ValidationError as exc:
        problems = problems_from_validation(exc, file, Spec)
        spec, removed = _without_bad_keys(data, exc)
    if spec is not None:
        # cross-key rules on what is valid; a rule about a key already reported would only repeat it
        for where, msg in design_rules(spec):
            if not any(
                where == r or where.startswith((r + ".", r + "[")) or r.startswith(where + ".") for r in removed
            ):
                problems.append(Problem(file, where, msg))
    if problems:
        raise SpecError(problems)
    assert spec is not None
    return spec


def _without_bad_keys(data: dict[str, Any], exc: ValidationError) -> tuple[Spec | None, list[str]]:
    """The spec with every key that failed its own check left out, if what remains is a spec."""
    import copy

    from layout.spec_messages import key_path

    trimmed = copy.deepcopy(data)
    removed: list[str] = []
    for err in exc.errors():
        loc = tuple(p for p in err["loc"] if isinstance(p, int) or p in _field_names())
        if not loc:
            return None, removed
        holder: Any = trimmed
        for part in loc[:-1]:
            try:
                holder = holder[part]
            except (KeyError, IndexError, TypeError):
                holder = None
                break
        if isinstance(holder, dict) and loc[-1] in holder:
            del holder[loc[-1]]
        removed.append(key_path(loc))
    try:
        return Spec.model_validate(trimmed), removed
    except ValidationError:
        return None, removed


def _field_names() -> set[str]:
    names: set[str] = set()
    for model in (Spec, Study, Design, Factor, Grid, Response, Collection):
        names |= set(model.model_fields)
    return names


def loads_spec(text: str, file: str = "spec.toml") -> Spec:
    """A validated Spec from TOML text, or JSON text when file ends in .json."""
    if file.lower().endswith(".json"):
        try:
            data = json.loads(text)
        except json.JSONDecodeError as exc:
            raise SpecError(
                [Problem(file, f"line {exc.lineno}, column {exc.colno}", f"not valid JSON: {exc.msg}")]
            ) from None
        if not isinstance(data, dict):
            raise SpecError([Problem(file, "", "must hold one JSON object with the keys study, design, response")])
    else:
        try:
            data = tomllib.loads(text)
        except tomllib.TOMLDecodeError as exc:
            raise SpecError([toml_problem(exc, file)]) from None
    return parse_spec(data, file)


def load_spec(path: str | Path) -> Spec:
    """Read and validate a spec file (TOML, or JSON by its .json ending)."""
    p = Path(path)
    try:
        raw = p.read_bytes()
    except FileNotFoundError:
        raise SpecError([Problem(str(p), "", "no such file")]) from None
    except OSError as exc:
        raise SpecError([Problem(str(p), "", f"cannot be read: {exc.strerror}")]) from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise SpecError([Problem(str(p), f"byte {exc.start}", "is not UTF-8 text; save the spec as UTF-8")]) from None
    return loads_spec(text, str(p))
