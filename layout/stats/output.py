"""analysis.json, analysis.html and the terminal table of an analysis."""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any, Final

from layout.files import write_all
from layout.meta import __version__
from layout.plan import Plan
from layout.render import page_context, template_env

ANALYSIS_FILES: Final = ("analysis.json", "analysis.html")


def _clean(value: Any) -> Any:
    """JSON-safe: NaN and infinity as null."""
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: _clean(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_clean(v) for v in value]
    return value


def analysis_json(result: dict[str, Any]) -> str:
    data = {"tool": {"name": "layout", "version": __version__}, **result}
    return json.dumps(_clean(data), indent=1, ensure_ascii=False) + "\n"


def fmt(x: Any, digits: int = 4) -> str:
    """A number for a table: 4 significant digits, p-values below 0.0001 as '<0.0001'."""
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return ""
    if isinstance(x, int):
        return str(x)
    return f"{x:.{digits}g}"


def _plot(result: dict[str, Any]) -> dict[str, Any] | None:
    """Per level: subsample values (small grey), unit means (open circles), the mean ± SE of the correct error."""
    points = result.get("points")
    if not points:
        return None
    block = result["means"][points["source"]]
    means = block["means"]
    every = [x for v in points["subsamples"].values() for x in v] + [
        m["mean"] + s * m["se"] for m in means for s in (-1, 1)
    ]
    lo, hi = min(every), max(every)
    span = (hi - lo) or 1.0
    height, top, left, step = 160, 10, 60, 80

    def y(v: float) -> float:
        return round(top + height - (v - lo) / span * height, 1)

    levels = []
    for i, m in enumerate(means):
        x = left + i * step + step / 2
        levels.append(
            {
                "x": x,
                "y": y(m["mean"]),
                "y1": y(m["mean"] + m["se"]),
                "y2": y(m["mean"] - m["se"]),
                "label": m["level"],
                "subs": [
                    {"x": x - 22 + (k % 7) * 2, "y": y(v)}
                    for k, v in enumerate(points["subsamples"].get(m["level"], []))
                ],
                "units": [{"x": x - 8, "y": y(v)} for v in points["units"].get(m["level"], [])],
            }
        )
    return {
        "levels": levels,
        "width": left + len(means) * step + 10,
        "height": height + top + 40,
        "lo": fmt(lo),
        "hi": fmt(hi),
        "left": left,
        "y_lo": top + height,
        "y_hi": top,
        "error": block["error_term"],
        "source": points["source"],
    }


def _heat(result: dict[str, Any]) -> dict[str, Any] | None:
    """The power grid as cells of a heat map: darker is more power, the value printed in each cell."""
    grid = result.get("power")
    if not grid:
        return None
    units = sorted({g["units"] for g in grid["grid"]})
    subs = sorted({g["subsamples"] for g in grid["grid"]})
    power = {(g["units"], g["subsamples"]): g["power"] for g in grid["grid"]}
    size, left, top = 30, 70, 24
    cells = []
    for i, n in enumerate(units):
        for j, s in enumerate(subs):
            p = power[(n, s)]
            shade = int(245 - 200 * (p if p == p else 0))
            cells.append(
                {
                    "x": left + j * size,
                    "y": top + i * size,
                    "fill": f"rgb({shade},{shade},{min(255, shade + 30)})",
                    "text": "1" if p >= 0.995 else f"{p:.2f}"[1:],
                    "dark": p > 0.55,
                }
            )
    return {
        "cells": cells,
        "size": size,
        "left": left,
        "top": top,
        "units": [{"y": top + i * size + size / 2 + 3, "n": n} for i, n in enumerate(units)],
        "subs": [{"x": left + j * size + size / 2, "s": s} for j, s in enumerate(subs)],
        "width": left + len(subs) * size + 10,
        "height": top + len(units) * size + 30,
        "difference": grid["difference"],
        "note": grid["note"],
        "target": grid["target"],
    }


def analysis_html(plan: Plan, result: dict[str, Any]) -> str:
    return (
        template_env()
        .get_template("analysis.html")
        .render(
            **page_context(plan),
            result=result,
            plots=[_plot(r) for r in result["results"]],
            heats=[_heat(r) for r in result["results"]],
            fmt=fmt,
        )
    )


def write_analysis(plan: Plan, result: dict[str, Any], folder: str | Path, force: bool = False) -> list[Path]:
    """Write analysis.json and analysis.html; refuses existing files unless force."""
    texts = [analysis_json(result), analysis_html(plan, result)]
    return write_all(folder, dict(zip(ANALYSIS_FILES, texts, strict=True)), force)
