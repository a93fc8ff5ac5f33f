"""Turn parser and pydantic errors into one plain sentence per problem."""

from __future__ import annotations

import difflib
import json
import re
import tomllib
import types
import typing
from typing import Any

from pydantic import BaseModel, ValidationError

from layout.errors import Problem

_KIND: dict[str, str] = {
    "int_type": "must be a whole number",
    "int_from_float": "must be a whole number",
    "float_type": "must be a number",
    "string_type": "must be text in quotes",
    "bool_type": "must be true or false",
    "tuple_type": 'must be a list such as ["a", "b"]',
    "list_type": 'must be a list such as ["a", "b"]',
    "dict_type": "must be a table of keys",
    "model_type": "must be a table of keys",
    "model_attributes_type": "must be a table of keys",
}


_UNION_TAG = re.compile(
    r"(int|str|float|bool|none|dict|list|tuple|literal|(function|constrained|lax|strict)-[\w-]+)(\[.*\])?"
)


def key_path(loc: tuple[Any, ...]) -> str:
    """A pydantic location as the user sees it: ``factor[2].levels`` (positions from 1)."""
    out = ""
    for part in loc:
        if isinstance(part, int):
            out += f"[{part + 1}]"
        else:
            out += ("." if out else "") + str(part)
    return out


def show(value: Any) -> str:
    """A value as quoted in a message."""
    if isinstance(value, dict):
        return "a table"
    if isinstance(value, str):
        return repr(value)
    try:
        return json.dumps(value, default=str)
    except (TypeError, ValueError):
        return repr(value)


def close_match(word: str, choices: list[str]) -> str:
    """'; did you mean 'x'?' for the nearest choice, or nothing."""
    found = difflib.get_close_matches(word, choices, n=1, cutoff=0.6)
    return f"; did you mean {found[0]!r}?" if found else ""


def _model_at(model: type[BaseModel], loc: tuple[Any, ...]) -> type[BaseModel] | None:
    """The model class that holds the last key of loc, following nested fields."""
    current: Any = model
    for part in loc:
        if isinstance(part, int):
            continue
        if not (isinstance(current, type) and issubclass(current, BaseModel)) or part not in current.model_fields:
            return None
        current = _inner_model(current.model_fields[part].annotation)
    return current if isinstance(current, type) and issubclass(current, BaseModel) else None


def _inner_model(annotation: Any) -> Any:
    if isinstance(annotation, type) and issubclass(annotation, BaseModel):
        return annotation
    if typing.get_origin(annotation) in (tuple, list, typing.Union, types.UnionType):
        for arg in typing.get_args(annotation):
            inner = _inner_model(arg)
            if inner is not None:
                return inner
    return None


def _strip_union_tags(loc: tuple[Any, ...]) -> tuple[Any, ...]:
    # pydantic names the union member tried ("int", "dict[str,int]") inside a location.
    return tuple(p for p in loc if not (isinstance(p, str) and _UNION_TAG.fullmatch(p)))


def _one(err: dict[str, Any], file: str, model: type[BaseModel]) -> Problem | None:
    loc = _strip_union_tags(tuple(err["loc"]))
    where = key_path(loc)
    kind = err["type"]
    value = err.get("input")
    if kind == "too_short" and loc == ("response",) and value:
        return None  # pydantic counts only the valid items; the bad ones are reported already
    if kind in ("missing", "too_short") and loc == ("response",):
        return Problem(file, where, "at least one [[response]] is needed: what will be measured")
    if kind == "missing":
        return Problem(file, where, "is required")
    if kind == "extra_forbidden":
        holder = _model_at(model, loc[:-1])
        allowed = sorted(holder.model_fields) if holder else []
        hint = close_match(str(loc[-1]), allowed) or (f"; allowed here: {', '.join(allowed)}" if allowed else "")
        return Problem(file, where, f"unknown key{hint}")
    if kind == "literal_error":
        allowed = [a.strip("'") for a in re.findall(r"'[^']*'", err["ctx"]["expected"])]
        hint = close_match(str(value), allowed)
        return Problem(file, where, f"must be one of {', '.join(allowed)}, got {show(value)}{hint}")
    if kind in ("tuple_type", "list_type") and isinstance(value, dict) and len(loc) == 1:
        return Problem(file, where, f"must be a list of tables: write [[{loc[0]}]] (double brackets) for each one")
    if kind == "value_error":
        return Problem(file, where, str(err["msg"]).removeprefix("Value error, "))
    if kind in _KIND:
        return Problem(file, where, f"{_KIND[kind]}, got {show(value)}")
    return Problem(file, where, f"{err['msg']}, got {show(value)}")


def problems_from_validation(exc: ValidationError, file: str, model: type[BaseModel]) -> list[Problem]:
    """One Problem per distinct location in a pydantic ValidationError."""
    seen: set[str] = set()
    out: list[Problem] = []
    for err in exc.errors():
        problem = _one(err, file, model)
        if problem is not None and problem.where not in seen:  # a union reports each member it tried; keep the first
            seen.add(problem.where)
            out.append(problem)
    return out


def toml_problem(exc: tomllib.TOMLDecodeError, file: str) -> Problem:
    """A TOML syntax error with its line and column."""
    text = str(exc)
    m = re.search(r"\(at line (\d+), column (\d+)\)", text)
    reason = re.sub(r"\s*\(at .*\)$", "", text)
    where = f"line {m.group(1)}, column {m.group(2)}" if m else "end of file"
    return Problem(file, where, f"not valid TOML: {reason}")
