"""The analyze and power commands: argument parsing and printing only."""

from __future__ import annotations

import argparse
import json
from pathlib import Path
from typing import Any

from rich.console import Console
from rich.table import Table

from layout.errors import LayoutError, Problem, UsageError
from layout.plan import load_plan

err = Console(stderr=True, highlight=False, markup=False)
out = Console()

_EPILOG_ANALYZE = """example:
  layout analyze plan.json checked              # check's folder (tidy.csv and report.json)
  layout analyze plan.json checked/tidy.csv -o analysis --accept-errors

Tests treatments against the experimental error (unit to unit), not the sampling error.
Refuses data whose check found errors, unless --accept-errors, which every output then says."""

_EPILOG_POWER = """example:
  layout power --treatments 4 --var-unit 2.1 --var-sub 5.5 --difference 3
  layout power --treatments 4 --var-unit 2.1 --var-sub 5.5 --difference 3 --cost-unit 40 --cost-sub 5 --json
  layout power --from analysis/analysis.json --response height --round day28 --difference 20"""


def _analyze(args: argparse.Namespace) -> int:
    from layout.stats.analyze import analyze
    from layout.stats.data import load_checked
    from layout.stats.output import write_analysis

    with err.status("analysing") as status:
        plan = load_plan(args.plan)
        checked = load_checked(plan, args.checked, accept_errors=args.accept_errors)
        status.update("fitting the design's ANOVA")
        result = analyze(plan, checked.tidy, checked.accepted)
        folder = Path(args.output) if args.output else checked.folder
        status.update("writing analysis.json and analysis.html")
        written = write_analysis(plan, result, folder, force=args.force)
    for why in checked.accepted:
        out.print(f"Analysed although {why}.", style="bold red")
    print_analysis(result)
    for path in written:
        out.print(f"  wrote {path}")
    return 0


def print_analysis(result: dict[str, Any]) -> None:
    """One ANOVA table per response and round, with the error term of each F."""
    from layout.stats.output import fmt

    for r in result["results"]:
        out.print(f"\n{r['response']}, round {r['round']} ({r['method']})", style="bold")
        if r["method"] in ("anova", "unit-means"):
            table = Table()
            for col in ("source", "df", "SS", "MS", "F", "p", "against"):
                table.add_column(col, justify="left" if col in ("source", "against") else "right")
            for row in r["table"]:
                table.add_row(
                    row["source"],
                    str(row["df"]),
                    fmt(row["ss"]),
                    fmt(row["ms"]),
                    fmt(row["f"]),
                    fmt(row["p"]),
                    row["error_term"] or "",
                )
            out.print(table)
            comp = r.get("components") or {}
            if "unit" in comp and "subsample" in comp:
                out.print(f"σ²(unit) {fmt(comp['unit']['estimate'])}, σ²(sub) {fmt(comp['subsample']['estimate'])}")
        elif r["method"] == "counts" and r.get("test"):
            out.print(f"{r['test']['name']}: p = {fmt(r['test']['p'])}")
        for note in r["notes"]:
            out.print(f"  {note}")


def _components_from(path: str, response: str, rnd: str | None) -> tuple[float, float, int, str]:
    try:
        data = json.loads(Path(path).read_text(encoding="utf-8"))
        results = data["results"]
    except (OSError, ValueError, KeyError, TypeError) as exc:
        raise LayoutError(Problem(path, "", f"not an analysis.json ({exc})")) from None
    chosen = [r for r in results if r.get("response") == response and (rnd is None or r.get("round") == rnd)]
    if not chosen:
        names = sorted({f"{r.get('response')} (round {r.get('round')})" for r in results})
        raise UsageError(f"--response: {response!r} is not in {path}; it has {', '.join(names)}")
    r = chosen[0]
    comp = r.get("components") or {}
    if "unit" not in comp or "subsample" not in comp:
        raise UsageError(
            f"{path}: {response} round {r.get('round')} has no variance components (method {r.get('method')})"
        )
    blocks = r.get("means", {})
    block = blocks.get("treatment") or next(iter(blocks.values()), None)
    if block is None:
        raise UsageError(f"{path}: {response} round {r.get('round')} has no treatment means; give --treatments")
    t = len(block["means"])
    return comp["unit"]["estimate"], comp["subsample"]["estimate"], t, str(r.get("round"))


def _power(args: argparse.Namespace) -> int:
    from layout.stats.power import power_grid

    if args.from_analysis:
        if not args.response:
            raise UsageError("--from needs --response NAME")
        var_unit, var_sub, t, _ = _components_from(args.from_analysis, args.response, args.round)
        t = args.treatments or t
    else:
        missing = [
            o
            for o, v in (("--treatments", args.treatments), ("--var-unit", args.var_unit), ("--var-sub", args.var_sub))
            if v is None
        ]
        if missing:
            raise UsageError(f"{', '.join(missing)}: required (or take them from an analysis with --from)")
        var_unit, var_sub, t = args.var_unit, args.var_sub, args.treatments
    if (args.cost_unit is None) != (args.cost_sub is None):
        raise UsageError("--cost-unit and --cost-sub: give both, or neither")
    for name, v in (("--treatments", t), ("--difference", args.difference)):
        if v is None or v <= 0:
            raise UsageError(f"{name}: must be above 0, got {v}")
    if t < 2:
        raise UsageError(f"--treatments: a comparison needs at least 2, got {t}")
    if var_unit < 0 or var_sub < 0 or var_unit + var_sub <= 0:
        raise UsageError(
            f"--var-unit, --var-sub: variances must be 0 or more and not both 0, got {var_unit:g} and {var_sub:g}"
        )
    for name, v in (("--alpha", args.alpha), ("--target", args.target)):
        if not 0 < v < 1:
            raise UsageError(f"{name}: must be between 0 and 1, got {v:g}")
    result = power_grid(
        t,
        var_unit,
        var_sub,
        args.difference,
        args.alpha,
        args.target,
        args.cost_unit,
        args.cost_sub,
        design=args.design,
    )
    if args.json:
        print(json.dumps(result, indent=1))
        return 0
    units = sorted({g["units"] for g in result["grid"]})
    subs = sorted({g["subsamples"] for g in result["grid"]})
    table = Table(title=f"power to detect {args.difference:g} among {t} treatments (α {args.alpha:g})")
    table.add_column("units \\ subsamples")
    for s in subs:
        table.add_column(str(s), justify="right")
    power = {(g["units"], g["subsamples"]): g["power"] for g in result["grid"]}
    for n in units:
        table.add_row(str(n), *[f"{power[(n, s)]:.2f}" for s in subs])
    out.print(table)
    rec = result["recommended"]
    if rec:
        cost = f", cost {rec['cost']:g}" if rec["cost"] is not None else ""
        out.print(f"reaches {args.target:g}: {rec['units']} units per treatment × {rec['subsamples']} subsamples{cost}")
    else:
        out.print(f"no plan in the grid reaches power {args.target:g}")
    if result["optimal_subsamples"] is not None:
        out.print(f"cost-optimal subsamples per unit s* = {result['optimal_subsamples']:.2f}")
    return 0


def add_commands(sub: Any) -> None:
    """The analyze and power subcommands."""
    a = sub.add_parser(
        "analyze",
        help="the ANOVA with subsampling of checked data",
        epilog=_EPILOG_ANALYZE,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    a.add_argument("plan", metavar="PLAN", help="plan.json")
    a.add_argument("checked", metavar="CHECKED", help="check's output folder, or its tidy.csv")
    a.add_argument(
        "-o", "--output", metavar="DIR", help="folder for analysis.json and analysis.html (default: beside tidy.csv)"
    )
    a.add_argument(
        "--accept-errors", action="store_true", help="analyse although the check found errors (said on every output)"
    )
    a.add_argument("--force", action="store_true", help="replace an earlier analysis in that folder")
    a.set_defaults(run=_analyze)
    p = sub.add_parser(
        "power",
        help="power over units × subsamples, and the cheapest plan",
        epilog=_EPILOG_POWER,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("--treatments", type=int, help="number of treatments")
    p.add_argument("--var-unit", type=float, help="σ²(unit): variance between units of one treatment")
    p.add_argument("--var-sub", type=float, help="σ²(sub): variance between subsamples of one unit")
    p.add_argument("--difference", type=float, help="the difference between treatment means to detect")
    p.add_argument("--alpha", type=float, default=0.05, help="significance level (default 0.05)")
    p.add_argument("--target", type=float, default=0.8, help="power to reach (default 0.8)")
    p.add_argument("--cost-unit", type=float, help="cost of one more unit")
    p.add_argument("--cost-sub", type=float, help="cost of one more subsample")
    p.add_argument(
        "--design", choices=["crd", "rcbd"], default="crd", help="crd (units per treatment) or rcbd (blocks)"
    )
    p.add_argument("--from", dest="from_analysis", metavar="ANALYSIS", help="take σ² from an analysis.json")
    p.add_argument("--response", help="with --from: the response")
    p.add_argument("--round", help="with --from: the round (default: the first)")
    p.add_argument("--json", action="store_true", help="print the grid and recommendation as JSON")
    p.set_defaults(run=_power)
