"""layout: seeded randomization, checkable codes and field sheets for experiments with subsampling.

The names below are imported when first used, so a command pays only for what it runs
(the check's statistics alone would add a second to every start).
"""

from __future__ import annotations

from importlib import import_module
from typing import Any

from layout.meta import __version__  # noqa: F401 - re-exported

_WHERE = {
    "LayoutError": "layout.errors",
    "PlanError": "layout.errors",
    "SpecError": "layout.errors",
    "CheckResult": "layout.intake.check",
    "check_returns": "layout.intake.check",
    "SheetOptions": "layout.outputs",
    "write_sheets": "layout.outputs",
    "Plan": "layout.plan",
    "load_plan": "layout.plan",
    "make_plan": "layout.plan",
    "Spec": "layout.spec",
    "load_spec": "layout.spec",
    "loads_spec": "layout.spec",
    "analyze": "layout.stats.analyze",
    "power": "layout.stats.power",
}

__all__ = sorted([*_WHERE, "__version__"])


def __getattr__(name: str) -> Any:
    if name not in _WHERE:
        raise AttributeError(f"module 'layout' has no attribute {name!r}")
    value = getattr(import_module(_WHERE[name]), "power_grid" if name == "power" else name)
    globals()[name] = value
    return value
