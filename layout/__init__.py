"""layout: seeded randomization, checkable codes and field sheets for experiments with subsampling."""

from __future__ import annotations

from layout.errors import LayoutError, PlanError, SpecError  # noqa: E402
from layout.intake.check import CheckResult, check_returns  # noqa: E402
from layout.meta import __version__
from layout.outputs import SheetOptions, write_sheets  # noqa: E402
from layout.plan import Plan, load_plan, make_plan  # noqa: E402
from layout.spec import Spec, load_spec, loads_spec  # noqa: E402
from layout.stats.analyze import analyze  # noqa: E402
from layout.stats.power import power_grid as power  # noqa: E402

__all__ = [
    "CheckResult",
    "LayoutError",
    "Plan",
    "PlanError",
    "Spec",
    "SheetOptions",
    "SpecError",
    "__version__",
    "analyze",
    "check_returns",
    "load_plan",
    "load_spec",
    "loads_spec",
    "make_plan",
    "power",
    "write_sheets",
]
