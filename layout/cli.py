"""The layout command: argument parsing and printing over the library functions."""

from __future__ import annotations

import argparse
import gc
import os
import sys
from collections import Counter
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import TYPE_CHECKING

from rich.console import Console
from rich.table import Table

from layout.cli_stats import add_commands, print_analysis
from layout.errors import LayoutError, PlanError, UsageError
from layout.files import refuse_existing
from layout.meta import PRODUCTS, __version__

if TYPE_CHECKING:
    from layout.intake.check import CheckResult
from layout.outputs.labels import LabelGeometry, parse_pair
from layout.plan import Plan, load_plan, make_plan
from layout.spec import MAX_SEED, load_spec

# Markup off: titles, labels and messages are the user's text and may hold brackets.
out = Console(highlight=False, markup=False)
err = Console(stderr=True, highlight=False, markup=False)

_EPILOG_PLAN = """example:
  layout plan examples/greenhouse-biochar-crd.toml -o plan.json
  layout plan field.toml --seed 20260415 -o field-plan.json

Without a seed in the spec or on the command line, one is drawn from the
operating system, printed and recorded in the plan. An existing plan is never
replaced without --force: re-randomizing must be deliberate."""

_EPILOG_SHEETS = """example:
  layout sheets plan.json -o field --pdf
  layout sheets plan.json --only labels --label-printer --label-size 50x25 --pdf
  layout sheets plan.json --split round -o field        # entry-<round>.xlsx: one copy per person
  layout sheets plan.json --only labels --label-grid 2x7 --label-size 99x38 --label-margins 15x6 --label-gaps 2x0

Makes entry.xlsx, sheets.html, labels.html, unit-labels.html, map.html (for collectors),
map-key.html (with treatments, for the study lead) and key.csv from the plan alone. An existing file, such as a
filled-in entry.xlsx, is never replaced without --force."""

_EPILOG_CHECK = """example:
  layout check plan.json returns/*.xlsx returns/*.csv -o checked
  layout check plan.json entry-anna.xlsx entry-ben.csv --force

Reads any mix of returned .xlsx and .csv files (read-only; they are never changed),
matches rows to the plan by code, and writes report.json, report.html and tidy.csv.
Exit 0: no errors; 1: errors found; 2: unusable arguments or plan."""

_EPILOG_DEMO = """example:
  layout demo              # into ./layout-demo
  layout demo /tmp/trial   # into another folder"""


def print_plan_summary(plan: Plan, path: Path | None) -> None:
    """The plan at a glance: treatments × replicates, counts, seed and fingerprint."""
    spec = plan.spec
    out.print(f"{spec.study.id}: {spec.study.title}", style="bold")
    table = Table()
    table.add_column("treatment")
    table.add_column(f"{spec.design.units_word}", justify="right")
    counts = Counter(u.treatment for u in plan.units)
    for label in spec.treatments:
        table.add_row(label, str(counts[label]))
    out.print(table)
    d = spec.design
    blocks = f", {d.blocks} blocks" if d.blocks else ""
    out.print(f"design      {d.type}{blocks}, {len(spec.treatments)} treatments")
    per = "varying" if plan.subsamples_vary else str(d.most_subsamples)
    each = d.subsample_name if per == "1" else d.subsamples_word
    slots = f"{len(plan.slots)} slot" + ("" if len(plan.slots) == 1 else "s")
    out.print(f"units       {len(plan.units)} {d.units_word} × {per} {each} = {slots}")
    out.print(f"rounds      {', '.join(r.name for r in plan.rounds)} (order: {spec.collection.order})")
    out.print(f"seed        {plan.seed}")
    out.print(f"fingerprint {plan.fingerprint}")
    if path is not None:
        out.print(f"written     {path}")


def _replaced(path: Path, force: bool) -> Plan | None:
    """The plan that --force is about to replace, when there is a readable one."""
    if not force or not path.is_file():
        return None
    try:
        return load_plan(path)
    except PlanError:
        return None


def _plan(args: argparse.Namespace) -> int:
    spec = load_spec(args.spec)
    with err.status("randomizing and writing the plan"):  # a second or two at 100,000 slots
        old = _replaced(Path(args.output), args.force)
        plan = make_plan(spec, seed=args.seed, replacing=old)
        path = plan.save(args.output, force=args.force)
    if args.seed is None and spec.study.seed is None:
        out.print(f"No seed was given; drew {plan.seed} and recorded it in the plan.", style="bold")
    if old is not None and plan.replaces is not None:
        out.print(
            f"This plan replaces {old.fingerprint[:12]}: its codes carry other check letters, so sheets and "
            "files of the old plan are refused by 'layout check' (print the new sheets).",
            style="bold",
        )
    print_plan_summary(plan, path)
    return 0


def _label_geometry(args: argparse.Namespace) -> LabelGeometry:
    values = dict(LabelGeometry.for_paper(args.paper).__dict__)
    if args.label_printer:
        values["single"] = True
        values["width"], values["height"] = 50.0, 25.0
    if args.label_size:
        values["width"], values["height"] = parse_pair(args.label_size, "--label-size")
    if args.label_grid:
        cols, rows = parse_pair(args.label_grid, "--label-grid")
        if cols != int(cols) or rows != int(rows) or cols < 1 or rows < 1:
            raise UsageError(
                f"--label-grid: must be whole numbers of columns x rows such as 3x8, got {args.label_grid!r}"
            )
        values["cols"], values["rows"] = int(cols), int(rows)
    if args.label_margins:
        values["top"], values["left"] = parse_pair(args.label_margins, "--label-margins")
    if args.label_gaps:
        values["col_gap"], values["row_gap"] = parse_pair(args.label_gaps, "--label-gaps")
    values["paper"] = args.paper
    return LabelGeometry(**values)


def _sheets(args: argparse.Namespace) -> int:
    from layout.outputs import SheetOptions, write_sheets

    plan = load_plan(args.plan)
    only = tuple(p.strip() for p in args.only.split(",") if p.strip()) if args.only else PRODUCTS
    options = SheetOptions(
        only=only,
        pdf=args.pdf,
        paper=args.paper,
        labels=_label_geometry(args),
        pdf_engine=args.pdf_engine,
        force=args.force,
        progress=True,
        split=args.split,
    )
    folder = Path(args.output) if args.output else Path(args.plan).parent
    written = write_sheets(plan, folder, options)
    out.print(
        f"{plan.spec.study.id}: {len(plan.units)} {plan.spec.design.units_word}, {len(plan.slots)} slots, "
        f"{len(plan.rounds)} round(s); plan {plan.fingerprint[:12]}"
    )
    for path in written:
        out.print(f"  wrote {path}")
    if plan.spec.study.blind and ("key" in only or "map" in only):
        out.print(
            "Blind study: key.csv and map-key.html show treatments; keep them away from collectors.", style="bold"
        )
    return 0


def print_check_summary(result: CheckResult, written: list[Path]) -> None:
    """Counts by kind and the first findings."""
    from layout.intake.findings import Severity

    s = result.summary
    out.print(
        f"{s['study']}: {s['slots_found']} of {s['slots_expected']} slot-rounds found in {len(s['files'])} file(s)"
    )
    table = Table()
    for col in ("kind", "severity", "count"):
        table.add_column(col, justify="right" if col == "count" else "left")
    rank = {"error": 0, "warning": 1, "info": 2}
    counts = Counter((f.severity.value, f.kind.value) for f in result.findings)
    for (severity, kind), n in sorted(counts.items(), key=lambda kv: (rank[kv[0][0]], kv[0][1])):
        table.add_row(kind, severity, str(n))
    if counts:
        out.print(table)
    ranked = sorted(result.findings, key=lambda f: f.severity is not Severity.ERROR)
    first = [f for f in ranked if f.severity is not Severity.INFO and not f.cause][:12]
    for f in first:
        out.print(
            f"{f.severity.value}: {f.where + ': ' if f.where else ''}{f.message}",
            style="red" if f.severity is Severity.ERROR else "yellow",
        )
    rest = len([f for f in result.findings if f.severity is not Severity.INFO and not f.cause]) - len(first)
    if rest > 0:
        out.print(f"... and {rest} more in report.html")
    errors = s["by_severity"]["error"]
    out.print(
        f"{errors} error(s), {s['by_severity']['warning']} warning(s), {s['by_severity']['info']} info",
        style="bold red" if errors else "bold green",
    )
    if result.fixes:
        out.print(f"{len(result.fixes)} approved fix(es) applied (listed in report.html; the files are unchanged)")
    if result.proposals:
        out.print(f"{len(result.proposals)} fix(es) proposed in fixes-proposed.csv: approve, then check with --fixes")
    for path in written:
        out.print(f"  wrote {path}")


def _check(args: argparse.Namespace) -> int:
    from layout.intake.check import check_returns
    from layout.intake.fixes import read_fixes
    from layout.intake.readahead import ReadAhead
    from layout.intake.report import REPORT_FILES, warm_report, write_report

    folder = Path(args.output) if args.output else Path(args.plan).parent / "checked"
    for name in REPORT_FILES:  # refused now, not after a check that may take a minute
        refuse_existing(folder / name, args.force)
    ahead = ReadAhead(args.returned)  # the first workbook is parsed in a thread while the plan loads
    plan = load_plan(args.plan)
    warm_report()
    for path in args.returned:
        if not Path(path).exists():
            raise UsageError(f"{path}: no such file; name the returned .xlsx and .csv files to check")
    fixes = None
    if args.fixes:
        if not Path(args.fixes).is_file():
            raise UsageError(
                f"{args.fixes}: no such fixes file"
                if not Path(args.fixes).exists()
                else f"{args.fixes}: not a file; name the fixes CSV"
            )
        fixes = read_fixes(args.fixes)
    with err.status("checking") as status:
        result = check_returns(plan, args.returned, progress=lambda step: status.update(step), fixes=fixes, ahead=ahead)
    written = write_report(plan, result, folder, force=args.force, unblind=args.unblind)
    unread = [
        f
        for f in result.summary["files"]
        if f.get("status") == "unreadable" or str(f.get("status", "")).startswith("same as")
    ]
    # the code is settled before anything is printed, so a closed pipe cannot change it
    args.exit_code = 2 if len(unread) == len(result.summary["files"]) else (1 if result.errors else 0)
    print_check_summary(result, written)
    if args.exit_code == 2:
        err.print("error: not one of the returned files could be read; the report says why", style="red")
    if plan.spec.study.blind:
        out.print(
            "This study is blind: tidy.csv names each unit's treatment. Keep it with the study lead, "
            "away from the people who collect and measure.",
            style="bold",
        )
    return int(args.exit_code)


def _demo(args: argparse.Namespace) -> int:
    from layout.demo import run_demo

    result = run_demo(args.folder, force=args.force, progress=True)
    print_plan_summary(result.plan, None)
    out.print(f"\nThe demo wrote {len(result.written)} files into {result.folder}:")
    for path in result.written:
        out.print(f"  {path}")
    if result.check is not None:
        out.print(
            "\nThe demo then filled the workbook with invented values, added a re-typed CSV with two "
            "planted mistakes, and checked both:"
        )
        print_check_summary(result.check, [])
    if result.fixed is not None:
        out.print(
            f"\nThe check proposed {len(result.check.proposals)} fixes in {result.folder / 'checked' / 'fixes-proposed.csv'}. "
            f"A demo lead approved {len(result.fixed.fixes)} (the mistyped code as the paper sheet has it; the workbook's side of the "
            f"conflict) in {result.folder / 'returns' / 'fixes-approved.csv'}, and both files were checked "
            "again with --fixes (the returned files are never changed):"
        )
        print_check_summary(result.fixed, [])
    if result.analysis is not None:
        out.print(
            f"\nThe corrected data in {result.folder / 'analysis'} were analysed: "
            "treatments tested against the experimental error."
        )
        print_analysis({"results": result.analysis["results"][:1]})
    if result.power is not None:
        response, rnd, grid = result.power
        rec = grid["recommended"]
        if rec:
            out.print(
                f"Next trial, to detect {grid['difference']:g} in {response} ({rnd}) with power {grid['target']:g}: "
                f"{rec['units']} units per treatment × {rec['subsamples']} subsamples"
                + (
                    f" (cost-optimal s* = {grid['optimal_subsamples']:.1f} at 12 per unit, 1.5 per subsample)"
                    if grid["optimal_subsamples"]
                    else ""
                )
            )
    if not result.pdf:
        out.print("No PDF engine was found, so no PDFs were made: pip install 'layout[pdf]' or install Chromium.")
    return 0


def _seed(text: str) -> int:
    try:
        value = int(text, 10)
    except ValueError:
        raise argparse.ArgumentTypeError(f"must be a whole number from 0 to 2^53-1, got {text!r}") from None
    if not 0 <= value <= MAX_SEED:
        raise argparse.ArgumentTypeError(f"must be a whole number from 0 to 2^53-1, got {text!r}")
    return value


def build_parser() -> argparse.ArgumentParser:
    """The command-line grammar."""
    parser = argparse.ArgumentParser(
        prog="layout",
        description="Seeded randomization, checkable codes, field sheets and checks for experiments with subsampling.",
        epilog="example:\n  layout demo\n  layout plan spec.toml -o plan.json\n\nEach command has its own --help.",
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"layout {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", required=True)

    demo = sub.add_parser(
        "demo",
        help="run the built-in invented example end to end",
        epilog=_EPILOG_DEMO,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    demo.add_argument(
        "folder", nargs="?", default="layout-demo", metavar="DIR", help="where to write (default: ./layout-demo)"
    )
    demo.add_argument("--force", action="store_true", help="replace files a previous demo wrote")
    demo.set_defaults(run=_demo)

    plan = sub.add_parser(
        "plan",
        help="randomize a design spec into plan.json",
        epilog=_EPILOG_PLAN,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    plan.add_argument("spec", metavar="SPEC", help="the design spec (.toml, or .json with the same keys)")
    plan.add_argument("-o", "--output", default="plan.json", help="the plan file to write (default: plan.json)")
    plan.add_argument("--seed", type=_seed, help="the seed; overrides the spec's")
    plan.add_argument("--force", action="store_true", help="replace an existing plan (re-randomizes!)")
    plan.set_defaults(run=_plan)

    sheets = sub.add_parser(
        "sheets",
        help="make the workbook, collection sheets, labels, map and key from a plan",
        epilog=_EPILOG_SHEETS,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    sheets.add_argument("plan", metavar="PLAN", help="plan.json made by 'layout plan'")
    sheets.add_argument("-o", "--output", metavar="DIR", help="folder to write into (default: the plan's folder)")
    sheets.add_argument("--only", metavar="LIST", help=f"comma-separated subset of {','.join(PRODUCTS)}")
    sheets.add_argument(
        "--split",
        choices=["round", "block"],
        help="one workbook and one set of sheets per round (or block), entry-<round>.xlsx, for people filling their own copies",
    )
    sheets.add_argument("--pdf", action="store_true", help="also write PDFs of the sheets and labels")
    sheets.add_argument(
        "--pdf-engine",
        default="auto",
        metavar="ENGINE",
        help="auto (a Chromium browser if found, else WeasyPrint), weasyprint, chromium, or a browser's path",
    )
    sheets.add_argument("--paper", choices=("a4", "letter"), default="a4", help="paper size (default: a4)")
    sheets.add_argument("--label-grid", metavar="COLSxROWS", help="labels across x down on a sheet (default: 3x8)")
    sheets.add_argument(
        "--label-size", metavar="WxH", help="label width x height in mm (default: 64x34; 50x25 with --label-printer)"
    )
    sheets.add_argument("--label-margins", metavar="TOPxLEFT", help="sheet margins in mm (default: 12.5x7)")
    sheets.add_argument("--label-gaps", metavar="COLxROW", help="gaps between labels in mm (default: 2x0)")
    sheets.add_argument("--label-printer", action="store_true", help="one label per page, for label printers")
    sheets.add_argument(
        "--force", action="store_true", help="replace existing files (a filled-in workbook would be lost!)"
    )
    sheets.set_defaults(run=_sheets)

    check = sub.add_parser(
        "check",
        help="check returned workbooks and CSV files against the plan",
        epilog=_EPILOG_CHECK,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    check.add_argument("plan", metavar="PLAN", help="plan.json made by 'layout plan'")
    check.add_argument("returned", metavar="RETURNED", nargs="+", help="returned .xlsx and .csv files")
    check.add_argument(
        "-o",
        "--output",
        metavar="DIR",
        help="folder for report.json, report.html, tidy.csv (default: checked/ beside the plan)",
    )
    check.add_argument("--force", action="store_true", help="replace an earlier report in that folder")
    check.add_argument(
        "--fixes",
        metavar="FILE",
        help="approved fixes (rows of fixes-proposed.csv, signed): applied to the rows as read; "
        "the returned files are never changed",
    )
    check.add_argument(
        "--unblind", action="store_true", help="group the report's plots by treatment even for a blind study"
    )
    check.set_defaults(run=_check)
    add_commands(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the layout command; returns the exit code."""
    args = build_parser().parse_args(argv)
    run: Callable[[argparse.Namespace], int] = args.run
    # A command makes a few million small objects and frees them by reference counting; the cyclic
    # collector only rescans them again and again (40% of a 100,000-slot check). It is off while the
    # command runs and back on after.
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        return run(args)
    except BrokenPipeError:
        # the reader went away (`| head`): the exit code is still the command's own
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return int(getattr(args, "exit_code", 0))
    except LayoutError as exc:
        for line in exc.lines():
            err.print(f"error: {line}", style="red", soft_wrap=True)
        return exc.exit_code
    except KeyboardInterrupt:
        err.print("interrupted")
        return 130
    finally:
        if was_enabled:
            gc.enable()


if __name__ == "__main__":
    sys.exit(main())
