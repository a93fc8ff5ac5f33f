"""report.json, report.html and tidy.csv from a CheckResult."""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Final

import numpy as np
import pandas as pd

from layout.files import write_all
from layout.intake.check import CheckResult
from layout.intake.proposals import proposals_csv
from layout.intake.tidy import plan_row_codes, tidy_csv
from layout.meta import __version__
from layout.plan import Plan
from layout.render import BLOCK_COLOURS, map_cells, page_context, template_env

# each status its own colour and its own mark, so the map reads in greyscale and without colour vision;
# lightness steps apart (tests/test_check_command.py measures the greyscale contrast)
STATUS_COLOURS: Final = {
    "ok": "#ffffff",
    "declared-missing": "#a6c4e4",
    "partial": "#f6e3a1",
    "conflict": "#e89a54",
    "error": "#c8524f",
    "missing": "#5a5a5a",
}
STATUS_MARKS: Final = {
    "ok": "✓",
    "declared-missing": "–",
    "partial": "½",
    "conflict": "≠",
    "error": "!",
    "missing": "✗",
}
REPORT_FILES: Final = ("report.json", "report.html", "tidy.csv", "fixes-proposed.csv")
# report.html stays readable for the largest programmes: beyond these it summarises (report.json has everything)
MAX_FINDINGS_SHOWN: Final = 1000
MAX_MAP_UNITS: Final = 2500
MAX_PLOT_UNITS: Final = 400


def luminance(colour: str) -> float:
    """Relative luminance of a #rrggbb colour (WCAG 2.x definition), 0 black to 1 white."""
    rgb = [int(colour[i : i + 2], 16) / 255 for i in (1, 3, 5)]
    lin = [c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4 for c in rgb]
    return 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2]


def _severity_rank(f: Any) -> int:
    return ["error", "warning", "info"].index(f.severity.value)


def report_json(result: CheckResult) -> str:
    """The machine-readable report."""
    data = {
        "format": "layout-report/1",
        "tool": {"name": "layout", "version": __version__},
        "summary": result.summary,
        "findings": [f.to_dict() for f in result.findings],
        "fixes": [a.to_dict() for a in result.fixes],
    }
    return json.dumps(data, indent=1, ensure_ascii=False, default=str) + "\n"


_ORDER: Final = tuple(STATUS_COLOURS)  # listed better to worse


@dataclass
class _Worst:
    """Per (unit, round) with a row in the tidy table, the worst status of its slots (a place in _ORDER)."""

    unit_names: np.ndarray
    round_names: np.ndarray
    unit: np.ndarray  # each pair's unit, a place in unit_names
    round: np.ndarray  # each pair's round, a place in round_names
    worst: np.ndarray


def _worst_status(result: CheckResult, plan: Plan | None = None) -> _Worst:
    """The worst status of each (unit, round)'s slots; some slots missing (not all) is 'partial'. Pairs in the
    order first seen. plan: the plan of the check, whose rows' units and rounds were coded while it was read."""
    tidy = result.tidy
    coded = plan_row_codes(tidy, plan) if plan is not None else None
    if coded is None:
        tidy = tidy[tidy["status"] != "unmatched"]
        units, unit_names = pd.factorize(tidy["unit"])
        rounds, round_names = pd.factorize(tidy["round"])
        coded = units, np.asarray(unit_names, dtype=object), rounds, np.asarray(round_names, dtype=object)
    units, unit_names, rounds, round_names = coded
    if tidy.empty:
        empty = np.zeros(0, dtype=np.int64)
        return _Worst(unit_names, round_names, empty, empty, empty)
    status, statuses = pd.factorize(tidy["status"])  # integer codes: a pandas map over text costs 20 ms here
    rank = np.array([_ORDER.index(s) for s in statuses], dtype=np.int64)[status]
    group, firsts = pd.factorize(units * len(round_names) + rounds)  # (unit, round) pairs, first seen first
    missing, partial = _ORDER.index("missing"), _ORDER.index("partial")
    worst = np.full(len(firsts), -1, dtype=np.int64)
    least = np.full(len(firsts), len(_ORDER), dtype=np.int64)
    kept = np.full(len(firsts), -1, dtype=np.int64)  # the worst status of the slots that are there
    np.maximum.at(worst, group, rank)
    np.minimum.at(least, group, rank)
    np.maximum.at(kept, group, np.where(rank != missing, rank, -1))
    # slots missing beside present ones count as 'partial', and the worst of those and the rest is the unit's
    mixed = (worst == missing) & (least < missing)
    worst = np.where(mixed, np.maximum(kept, partial), worst)
    return _Worst(unit_names, round_names, firsts // len(round_names), firsts % len(round_names), worst)


def _unit_status(result: CheckResult, plan: Plan | None = None) -> dict[tuple[str, str], str]:
    """(unit, round) → the worst status of its slots; some slots missing (not all) is 'partial'."""
    w = _worst_status(result, plan)
    unit_of = w.unit_names[w.unit].tolist()
    round_of = w.round_names[w.round].tolist()
    return {(u, r): _ORDER[k] for u, r, k in zip(unit_of, round_of, w.worst.tolist(), strict=True)}


def _strip_plots(plan: Plan, result: CheckResult, unblind: bool) -> list[dict[str, Any]]:
    """Per numeric response and round: dot positions for a small SVG of subsample values per unit."""
    if len(plan.units) > MAX_PLOT_UNITS:
        return []
    tidy = result.tidy[result.tidy["status"] != "unmatched"]
    blind = plan.spec.study.blind and not unblind
    if blind:
        order = [u.code for u in plan.units]
    else:
        rank = {t: i for i, t in enumerate(plan.spec.treatments)}
        order = [u.code for u in sorted(plan.units, key=lambda u: (rank[u.treatment], u.serial))]
    treatment_of = {u.code: u.treatment for u in plan.units}
    position = {code: i for i, code in enumerate(order)}
    plots = []
    step, left, height, top = 14, 46, 150, 10
    for r in plan.spec.response:
        if r.kind not in ("number", "integer"):
            continue
        for rnd in plan.rounds:
            part = tidy[(tidy["round"] == rnd.name) & tidy[r.name].notna()]
            if part.empty:
                continue
            vals = part[r.name].astype(float)
            lo, hi = float(vals.min()), float(vals.max())
            span = hi - lo or 1.0
            dots = []
            for code, unit, value in zip(part["code"], part["unit"], vals, strict=True):
                flagged = (code, rnd.name, r.name) in result.outliers
                swapped = (unit, rnd.name) in result.swaps
                dots.append(
                    {
                        "x": left + position[unit] * step + step / 2,
                        "y": round(top + height - (float(value) - lo) / span * height, 1),
                        "cls": "out" if flagged else "swap" if swapped else "",
                        "title": f"{code}: {value:g}",
                    }
                )
            groups = []
            if not blind:
                start = 0
                for t in plan.spec.treatments:
                    n = sum(1 for c in order if treatment_of[c] == t)
                    groups.append({"x": left + start * step, "w": n * step, "label": t})
                    start += n
            plots.append(
                {
                    "response": r.header,
                    "round": rnd.name,
                    "dots": dots,
                    "groups": groups,
                    "width": left + len(order) * step + 10,
                    "height": height + top + 46,
                    "lo": f"{lo:g}",
                    "hi": f"{hi:g}",
                    "y_lo": top + height,
                    "y_hi": top,
                    "left": left,
                    "base": top + height + 14,
                }
            )
    return plots


def _grouped(findings: list[Any]) -> list[tuple[Any, list[Any]]]:
    """Findings errors first, each with the findings that follow from it (missing slots of an unusable file)."""
    followers: dict[str, list[Any]] = {}
    for f in findings:
        if f.cause:
            followers.setdefault(f.cause, []).append(f)
    out: list[tuple[Any, list[Any]]] = []
    for f in sorted((f for f in findings if not f.cause), key=_severity_rank):
        cause = next((c for c in followers if f.file and f.file in c.split("; ")), None)
        out.append((f, followers.pop(cause) if cause else []))
    out += [(f, []) for rest in followers.values() for f in rest]
    return out


def _status_counts(result: CheckResult, plan: Plan) -> dict[str, dict[str, int]]:
    """Per round, how many units have each status: the map's summary for studies too large to draw. A unit
    with no row in a round is missing there."""
    out: dict[str, dict[str, int]] = {r.name: dict.fromkeys(STATUS_COLOURS, 0) for r in plan.rounds}
    w = _worst_status(result, plan)
    planned = np.array([u in plan.unit_by_code for u in w.unit_names.tolist()], dtype=bool)[w.unit]
    for k, name in enumerate(w.round_names.tolist()):
        if name not in out:
            continue
        counts = np.bincount(w.worst[planned & (w.round == k)], minlength=len(_ORDER))
        for status, n in zip(_ORDER, counts.tolist(), strict=True):
            out[name][status] += n
    for counts in out.values():
        counts["missing"] += len(plan.units) - sum(counts.values())
    return out


def warm_report() -> None:
    """Compile the report's template now (while a returned workbook is still being parsed), not after the check."""
    template_env().get_template("report.html")


def report_html(plan: Plan, result: CheckResult, unblind: bool = False) -> str:
    """The human report: summary, findings, completeness map and strip plots (summarised for large studies)."""
    drawn = len(plan.units) <= MAX_MAP_UNITS
    cells, is_grid = map_cells(plan) if drawn else ([], False)
    status = _unit_status(result, plan) if drawn else {}
    findings = _grouped(result.findings)
    return (
        template_env()
        .get_template("report.html")
        .render(
            **page_context(plan),
            summary=result.summary,
            findings=findings[:MAX_FINDINGS_SHOWN],
            findings_left=len(result.findings) - sum(1 + len(f) for _, f in findings[:MAX_FINDINGS_SHOWN]),
            drawn=drawn,
            status_counts=None if drawn else _status_counts(result, plan),
            plots_left_out=len(plan.units) > MAX_PLOT_UNITS,
            rounds=[r.name for r in plan.rounds],
            cells=cells,
            is_grid=is_grid,
            status=status,
            status_colours=STATUS_COLOURS,
            status_marks=STATUS_MARKS,
            dark={k for k, c in STATUS_COLOURS.items() if luminance(c) < 0.25},
            plots=_strip_plots(plan, result, unblind),
            block_colours=BLOCK_COLOURS,
            errors=result.errors,
            fixes=result.fixes,
            proposed=len(result.proposals),
        )
    )


def write_report(
    plan: Plan, result: CheckResult, out_dir: str | Path, force: bool = False, unblind: bool = False
) -> list[Path]:
    """Write report.json, report.html and tidy.csv; refuses existing files unless force."""
    texts = [
        report_json(result),
        report_html(plan, result, unblind),
        tidy_csv(result.tidy, plan),
        "\ufeff" + proposals_csv(result.proposals),  # with a BOM, so Excel reads it as UTF-8
    ]
    return write_all(out_dir, dict(zip(REPORT_FILES, texts, strict=True)), force)
