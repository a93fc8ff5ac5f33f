"""The built-in invented example, run end to end into one folder."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Final

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
levels = ["healthy", "wilted", "chewed"]

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
    check: Any = None
    fixed: Any = None  # the check again, with the demo lead's approved fixes
    analysis: Any = None
    power: Any = None


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
    result.written += _returns_and_check(plan, out, force, result)
    result.written += _analysis(plan, out, force, result)
    return result


def _analysis(plan: Plan, out: Path, force: bool, result: DemoResult) -> list[Path]:
    """The re-typed CSV has planted errors; the workbook alone checks clean, so that check is analysed."""
    from layout.intake.check import check_returns
    from layout.intake.fixes import read_fixes
    from layout.intake.report import write_report
    from layout.stats.analyze import analyze
    from layout.stats.data import load_checked
    from layout.stats.output import write_analysis
    from layout.stats.power import power_grid

    returns = [out / "returns" / "entry-filled.xlsx", out / "returns" / "recheck.csv"]
    meant = plan.slots[5].code  # the code the re-typed row should have had (see _recheck_csv)
    fixes = _approve_demo_fixes(result.check.proposals, meant, out / "returns" / "fixes-approved.csv", force)
    clean = check_returns(plan, returns, fixes=read_fixes(fixes))
    result.fixed = clean
    written = [fixes, *write_report(plan, clean, out / "analysis", force=force)]
    checked = load_checked(plan, out / "analysis")
    result.analysis = analyze(plan, checked.tidy, checked.accepted)
    written += write_analysis(plan, result.analysis, out / "analysis", force=force)
    first = next((r for r in result.analysis["results"] if r.get("components", {}).get("unit")), None)
    if first is not None:
        comp = first["components"]
        result.power = (
            first["response"],
            first["round"],
            power_grid(
                len(plan.spec.treatments),
                comp["unit"]["estimate"],
                comp["subsample"]["estimate"],
                20.0,
                cost_unit=12.0,
                cost_sub=1.5,
            ),
        )
    return written


def _approve_demo_fixes(proposals: list[dict[str, Any]], meant: str, target: Path, force: bool) -> Path:
    """The demo lead's fixes file: the mistyped code read as the paper sheet has it, and the workbook's
    side of the conflict kept; signed with who, when and why."""
    from layout.intake.proposals import proposals_csv

    sign = {"approved_by": "demo lead", "approved_on": "2026-06-01", "reason": "looked up on the paper sheet"}
    chosen = [
        {**p, **sign, "value": p["value"] or meant} if p["action"] == "recode" else {**p, **sign}
        for p in proposals
        if p["action"] == "recode" or (p["action"] == "keep-this" and str(p["file"]).endswith(".xlsx"))
    ]
    return write_new(target, "\ufeff" + proposals_csv(chosen), force=force)


# A second person re-typed three rows from their paper sheet: one agrees, one disagrees,
# and one code has two characters swapped. The check should catch the last two.
def _recheck_csv(plan: Plan, filled: dict) -> str:
    rows = [s for s in plan.slots[3:6]]
    lines = ["code;round;height (mm);leaves;condition;missing_reason;note"]
    for i, s in enumerate(rows):
        f = filled[(s.code, "day14")]
        height = f.values.get("height", "")
        if i == 1 and height != "":
            height = height + 12
        code = s.code if i != 2 else s.code[:6] + s.code[7] + s.code[6] + s.code[8:]  # BC26-002-3E → BC26-020-3E
        lines.append(
            f"{code};day14;{height};{f.values.get('leaves', '')};{f.values.get('condition', '')};{f.reason or ''};re-typed"
        )
    return "\n".join(lines) + "\n"


def _returns_and_check(plan: Plan, out: Path, force: bool, result: DemoResult) -> list[Path]:
    from layout.intake.check import check_returns
    from layout.intake.report import write_report
    from layout.simulate import fill_workbook, simulate

    # round day14 complete (so its analysis is the full ANOVA with subsampling); day28 with a few declared missing
    complete = simulate(plan, missing_share=0.0)
    filled = {k: (complete[k] if k[1] == plan.rounds[0].name else v) for k, v in simulate(plan).items()}
    returns = out / "returns"
    written = [
        fill_workbook(plan, out / "entry.xlsx", returns / "entry-filled.xlsx", filled, force=force),
        write_new(returns / "recheck.csv", _recheck_csv(plan, filled), force=force),
    ]
    result.check = check_returns(plan, written)
    written += write_report(plan, result.check, out / "checked", force=force)
    return written
