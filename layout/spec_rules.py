"""Rules that tie several spec keys together, checked after the shapes are valid."""

from __future__ import annotations

from collections.abc import Iterator
from datetime import date
from typing import TYPE_CHECKING, Final

from layout.fieldmap import tiling, workable_grids
from layout.names import name_key
from layout.spec_messages import close_match

if TYPE_CHECKING:
    from layout.spec import Spec

MAX_UNITS: Final = 100_000
MAX_SLOTS: Final = 1_000_000

Rule = Iterator[tuple[str, str]]


def unit_count(spec: Spec) -> int:
    """How many experimental units the design makes."""
    t = len(spec.treatments)
    d = spec.design
    if d.type == "crd":
        reps = d.replicates
        return sum(reps.values()) if isinstance(reps, dict) else t * (reps or 0)
    if d.type == "latin-square":
        return t * t
    return t * (d.blocks or 0)


def slot_count(spec: Spec) -> int:
    """How many subsample slots the design makes (per round)."""
    d = spec.design
    if not isinstance(d.subsamples, dict):
        return unit_count(spec) * d.subsamples
    per_treatment = unit_count(spec) // max(1, len(spec.treatments))
    total = 0
    for label, levels in spec.treatment_levels():
        units = d.replicates[label] if isinstance(d.replicates, dict) else per_treatment
        total += units * spec.subsamples_of(label, levels)
    return total


def group_sizes(spec: Spec) -> tuple[int, list[int]]:
    """How many blocks, and the units per block and per whole plot, that must stay together on a grid."""
    d = spec.design
    if d.type == "rcbd":
        return d.blocks or 0, [len(spec.treatments)]
    if d.type == "split-plot":
        whole = next(f for f in spec.factor if f.whole_plot)
        per_plot = len(spec.treatments) // len(whole.levels)
        return d.blocks or 0, [len(spec.treatments), per_plot]
    return 0, []


def design_rules(spec: Spec) -> list[tuple[str, str]]:
    """(key path, message) for every cross-key problem in a shape-valid spec."""
    problems = list(_treatments(spec))
    if not problems:
        problems += list(_design(spec))
        problems += list(_subsamples(spec))
    problems += list(_responses(spec))
    problems += list(_names(spec))
    if not problems:
        problems += list(_size(spec))
    return problems


def _subsamples(spec: Spec) -> Rule:
    table = spec.design.subsamples
    if not isinstance(table, dict):
        return
    whole = next((f for f in spec.factor if f.whole_plot), None)
    keys = list(spec.treatments) + (list(whole.levels) if whole and spec.design.type == "split-plot" else [])
    for name in table:
        if name not in keys:
            what = "a treatment or whole-plot level" if whole else "a treatment"
            yield f"design.subsamples.{name}", f"is not {what} of this design{close_match(name, keys)}"
    for label, levels in spec.treatment_levels():
        if label not in table and not (whole and levels.get(whole.name) in table):
            yield "design.subsamples", f"gives no number for treatment {label!r}; list every treatment"
            return


def _names(spec: Spec) -> Rule:
    """Factor and response names must differ from each other, as tidy.csv gives each a column."""
    responses = {name_key(r.name) for r in spec.response}
    for i, f in enumerate(spec.factor):
        if name_key(f.name) in responses:
            yield (
                f"factor[{i + 1}].name",
                f"{f.name!r} is also a response name; factors and responses need different names",
            )


def _treatments(spec: Spec) -> Rule:
    d = spec.design
    if d.treatments is not None and spec.factor:
        yield "design.treatments", "give either treatments = [...] or [[factor]] tables, not both"
    elif d.treatments is None and not spec.factor:
        yield "design", 'name the treatments: treatments = ["a", "b", ...], or add [[factor]] tables with levels'
    names = [f.name for f in spec.factor]
    for i, name in enumerate(names):
        if name in names[:i]:
            yield f"factor[{i + 1}].name", f"{name!r} is used by another factor; every factor needs its own name"
    for i, f in enumerate(spec.factor):
        if f.whole_plot and d.type != "split-plot":
            yield f"factor[{i + 1}].whole_plot", f"only a split-plot design has a whole-plot factor, this is {d.type}"


def _design(spec: Spec) -> Rule:
    d = spec.design
    t = len(spec.treatments)
    if d.type != "crd" and isinstance(d.replicates, dict):
        yield "design.replicates", f"a table of replicates per treatment is only for crd, this is {d.type}"
    if d.type == "crd":
        yield from _crd(spec)
        if d.blocks is not None:
            yield "design.blocks", 'a crd has no blocks; use type = "rcbd" for a blocked design, or leave blocks out'
    elif d.type in ("rcbd", "split-plot"):
        if d.blocks is None:
            yield "design.blocks", f"is required for {d.type}: a whole number of at least 2"
        elif d.blocks < 2:
            yield "design.blocks", f"must be an integer of at least 2 for {d.type}, got {d.blocks}"
        if d.replicates is not None:
            yield (
                "design.replicates",
                f"{d.type} has one unit of each treatment per block; leave replicates out and set blocks",
            )
    elif d.type == "latin-square":
        if d.replicates is not None:
            yield (
                "design.replicates",
                "a latin square has each treatment once in every row and column; leave replicates out",
            )
        if d.blocks is not None:
            yield "design.blocks", "a latin square has rows and columns instead of blocks; leave blocks out"
        if not 3 <= t <= 26:
            yield (
                "design",
                f"a latin square needs 3 to 26 treatments (with 2 there is no error to test against), got {t}",
            )
    if d.type == "split-plot":
        yield from _split_plot(spec)


def _crd(spec: Spec) -> Rule:
    reps = spec.design.replicates
    if reps is None:
        yield "design.replicates", "is required for crd: units per treatment, a whole number of at least 2"
    elif isinstance(reps, int):
        if reps < 2:
            yield (
                "design.replicates",
                f"must be a whole number of at least 2 (experimental error needs replication), got {reps}",
            )
    else:
        treatments = list(spec.treatments)
        for name, n in reps.items():
            if name not in treatments:
                yield f"design.replicates.{name}", f"is not a treatment of this design{close_match(name, treatments)}"
            elif n < 1:
                yield f"design.replicates.{name}", f"must be a whole number of at least 1, got {n}"
        for name in treatments:
            if name not in reps:
                yield "design.replicates", f"gives no number for treatment {name!r}; list every treatment"
        if reps and all(n == 1 for n in reps.values()):
            yield "design.replicates", "at least one treatment needs 2 or more units, or there is no experimental error"


def _split_plot(spec: Spec) -> Rule:
    if spec.design.treatments is not None:
        yield "design.treatments", "a split-plot needs [[factor]] tables, one of them with whole_plot = true"
        return
    whole = [f for f in spec.factor if f.whole_plot]
    if len(whole) != 1:
        yield "factor", f"a split-plot needs exactly one factor with whole_plot = true, got {len(whole)}"
    elif len(spec.factor) < 2:
        yield "factor", "a split-plot needs a sub-plot factor besides the whole-plot factor"


def _responses(spec: Spec) -> Rule:
    seen: list[str] = []
    for i, r in enumerate(spec.response):
        at = f"response[{i + 1}]"
        if r.name.lower() in seen:
            yield f"{at}.name", f"{r.name!r} is used by another response; every response needs its own name"
        seen.append(r.name.lower())
        numeric = r.kind in ("number", "integer")
        for key in ("min", "max"):
            value = getattr(r, key)
            if value is None:
                continue
            is_date = isinstance(value, date)
            if r.kind == "date" and not is_date:
                yield f"{at}.{key}", f"must be a date such as 2026-06-01 for a date response, got {value}"
            elif r.kind != "date" and not numeric:
                yield f"{at}.{key}", f"only number, integer and date responses have a {key}, this one is {r.kind}"
            elif numeric and is_date:
                yield f"{at}.{key}", f"must be a number for a {r.kind} response, got the date {value}"
            elif r.kind == "integer" and value != int(value):
                yield f"{at}.{key}", f"must be a whole number for an integer response, got {value}"
        same_kind = isinstance(r.min, date) == isinstance(r.max, date)
        if r.min is not None and r.max is not None and same_kind and r.min > r.max:
            shown = (lambda v: f"{v:g}") if numeric and not isinstance(r.min, date) else str
            yield f"{at}.min", f"must not be above max ({shown(r.max)}), got {shown(r.min)}"
        if r.decimals is not None and r.kind != "number":
            yield f"{at}.decimals", f"only number responses have decimals, this one is {r.kind}"
        if r.kind == "category" and r.levels is None:
            yield f"{at}.levels", "is required for a category response: the allowed values"
        if r.kind != "category" and r.levels is not None:
            yield f"{at}.levels", f"only category responses have levels, this one is {r.kind}"


def _size(spec: Spec) -> Rule:
    n = unit_count(spec)
    t = len(spec.treatments)
    if n > MAX_UNITS:
        yield "design", f"makes {n} units; at most {MAX_UNITS} are supported"
    elif slot_count(spec) > MAX_SLOTS:
        yield (
            "design.subsamples",
            f"makes {slot_count(spec)} subsample slots; at most {MAX_SLOTS} are supported",
        )
    grid = spec.layout
    if grid is None:
        return
    if spec.design.type == "latin-square" and (grid.rows, grid.cols) != (t, t):
        yield (
            "layout",
            f"a latin square of {t} treatments is a {t} × {t} grid, got rows = {grid.rows}, cols = {grid.cols}",
        )
    elif grid.rows * grid.cols < n:
        yield (
            "layout",
            (
                f"a {grid.rows} × {grid.cols} grid holds {grid.rows * grid.cols} units, the design has {n}; "
                f"make rows × cols at least {n}"
            ),
        )
    else:
        groups, sizes = group_sizes(spec)
        if sizes and tiling(grid.rows, grid.cols, groups, sizes) is None:
            what = f"{groups} blocks of {sizes[0]} units"
            if len(sizes) > 1:
                what += f", each in whole plots of {sizes[1]}"
            shapes = workable_grids(n, groups, sizes, (grid.rows, grid.cols))
            hint = "; ".join(f"rows = {r} and cols = {c}" for r, c in shapes)
            yield (
                "layout",
                f"a {grid.rows} × {grid.cols} grid cannot hold {what} as rectangles, so a block would wrap "
                f"across grid rows; grids that work: {hint}",
            )
