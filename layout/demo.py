"""The built-in invented example, run end to end into one folder."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Final

from layout.errors import UsageError
from layout.files import write_new
from layout.outputs import SheetOptions, write_sheets
from layout.outputs.pdf import choose_engine
from layout.plan import Plan, make_plan
from layout.spec import loads_spec

# An invented greenhouse study: four biochar rates (t/ha), five pots each, three seedlings a pot.
DEMO_SPEC: Final = """\
[study]
id = "BC26"
title = "Biochar rate and seedling growth (invented demo)"
seed = 4817
blind = true

[design]
type = "crd"
replicates = 5
subsamples = 3
unit_name = "pot"
subsample_name = "seedling"

[[factor]]
name = "biochar"
levels = ["0", "2", "4", "8"]

[layout]
rows = 4
cols = 5
walk = "serpentine"

[[response]]
name = "height"
kind = "number"
unit = "mm"
min = 0
max = 400
decimals = 0

[[response]]
name = "leaves"
kind = "integer"
min = 0
max = 40

[[response]]
name = "condition"
kind = "category"
levels = ["healthy", "wilted", "damaged"]

[collection]
rounds = ["day14", "day28"]
order = "walk"
"""


@dataclass
class DemoResult:
    """What the demo made."""

    folder: Path
    plan: Plan
    written: list[Path] = field(default_factory=list)
    pdf: bool = False


def run_demo(folder: str | Path, force: bool = False, progress: bool = False) -> DemoResult:
    """Write the demo spec and every output the tool makes from it into folder."""
    out = Path(folder)
    spec_path = write_new(out / "spec.toml", DEMO_SPEC, force=force)
    plan = make_plan(loads_spec(DEMO_SPEC, str(spec_path)))
    result = DemoResult(out, plan, [spec_path])
    result.written.append(plan.save(out / "plan.json", force=force))
    try:
        choose_engine("auto")
        pdf = True
    except UsageError:
        pdf = False  # no PDF engine on this machine: the HTML pages print from any browser
    options = SheetOptions(pdf=pdf, force=force, progress=progress)
    result.written += write_sheets(plan, out, options)
    result.pdf = pdf
    return result
