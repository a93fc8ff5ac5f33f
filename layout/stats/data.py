"""The checked data an analysis may use: tidy.csv with the check's report.json beside it.

An analysis refuses data the check found errors in, or a tidy table of another plan,
unless the user accepts that on purpose (--accept-errors), which every output then says.
"""

from __future__ import annotations

import json
from collections import defaultdict
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from layout.errors import LayoutError, Problem
from layout.plan import Plan


class Unchecked(LayoutError):
    """Data the check did not pass; exit 1, like a check with errors."""

    exit_code = 1  # type: ignore[misc]


@dataclass
class Checked:
    """The tidy table and what the check said about it."""

    tidy: pd.DataFrame
    folder: Path
    errors: int = 0
    accepted: list[str] = field(default_factory=list)  # why the data were taken anyway


def load_checked(plan: Plan, where: str | Path, accept_errors: bool = False) -> Checked:
    """tidy.csv and report.json from check's folder (or beside the tidy.csv given)."""
    path = Path(where)
    tidy_path = path / "tidy.csv" if path.is_dir() else path
    report_path = tidy_path.parent / "report.json"
    if not tidy_path.is_file():
        raise LayoutError(Problem(str(tidy_path), "", "no such file; give check's output folder or its tidy.csv"))
    if tidy_path.suffix.lower() != ".csv":
        raise LayoutError(
            Problem(str(tidy_path), "", "is not a tidy table; give check's output folder or its tidy.csv")
        )
    if not report_path.is_file():
        raise LayoutError(
            Problem(str(report_path), "", "no check report beside tidy.csv; run 'layout check' and analyse its folder")
        )
    try:
        report = json.loads(report_path.read_text(encoding="utf-8"))
        summary = report["summary"]
        errors = int(summary["by_severity"]["error"])
        fingerprint = summary["plan"]
    except (OSError, ValueError, KeyError, TypeError) as exc:
        raise LayoutError(Problem(str(report_path), "", f"not a check report ({exc})")) from None
    accepted: list[str] = []
    if fingerprint != plan.fingerprint:
        why = f"the check was of plan {str(fingerprint)[:12]}, not this plan {plan.fingerprint[:12]}"
        if not accept_errors:
            raise Unchecked(Problem(str(report_path), "summary.plan", why + "; analyse with the plan the check used"))
        accepted.append(why)
    if errors:
        why = f"the check found {errors} error(s)"
        if not accept_errors:
            raise Unchecked(
                Problem(
                    str(report_path),
                    "",
                    why
                    + "; fix them (or approve fixes) and check again, or pass --accept-errors to analyse what is there",
                )
            )
        accepted.append(why + "; analysed anyway (--accept-errors)")
    try:
        tidy = _read_tidy(plan, tidy_path)
    except (OSError, ValueError) as exc:
        raise LayoutError(Problem(str(tidy_path), "", f"cannot be read as a tidy table ({exc})")) from None
    lacking = [c for c in ("unit", "round", "status", *(r.name for r in plan.spec.response)) if c not in tidy.columns]
    if lacking:
        raise LayoutError(
            Problem(
                str(tidy_path),
                "header",
                f"lacks the column(s) {', '.join(map(repr, lacking))} that check writes for this plan; "
                "run 'layout check' again, or restore the columns",
            )
        )
    return Checked(tidy, tidy_path.parent, errors, accepted)


def _read_tidy(plan: Plan, path: Path) -> pd.DataFrame:
    """Every column as text, but the number responses as numbers when they all parse (as check writes
    them): the CSV parser reads numbers far quicker than a conversion after it."""
    numbers = {r.name: "float64" for r in plan.spec.response if r.kind in ("number", "integer")}
    try:
        return pd.read_csv(path, dtype=defaultdict(lambda: str, numbers), keep_default_na=False, na_values=[""])
    except ValueError:  # a hand-edited table: text everywhere, and analyze coerces what it can
        return pd.read_csv(path, dtype=str, keep_default_na=False, na_values=[""])
