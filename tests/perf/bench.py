"""Benchmark: layout's main steps beside bare-library baselines of the same work, in one run.

Run by hand (not part of the test suite):

    python tests/perf/bench.py                 # 100,000 slots: crd, 20 treatments x 1,000 x 5, two responses
    python tests/perf/bench.py --big           # also the 1,000,000-slot check
    python tests/perf/bench.py --reps 1 --out bench.json

Every step runs in a fresh Python process, three times by default, its runs alternating with its
baseline's; the median time and the largest peak memory (ru_maxrss of that process) are
reported. Ratios are layout's median over the baseline's median from the same run, so they
hold on any machine. The timed part of each step leaves out the imports on both sides (the
baseline imports its library, layout the modules of the command, before the clock starts);
"process s" is the whole process, imports and start-up included. `plan` is timed as a whole process, as its target is.
"""

from __future__ import annotations

import argparse
import json
import platform
import statistics
import subprocess
import sys
import tempfile
import textwrap
import time
from pathlib import Path

from rich.console import Console
from rich.table import Table

ROOT = Path(__file__).resolve().parents[2]

SPEC = """
[study]
id = "BX{tag}"
title = "Benchmark"
seed = 1
[design]
type = "crd"
replicates = {reps}
subsamples = {subs}
treatments = [{treatments}]
[[response]]
name = "mass"
kind = "number"
unit = "g"
min = 0
max = 1000
decimals = 1
[[response]]
name = "count"
kind = "integer"
min = 0
max = 500
"""

# Each step is a snippet run in its own process; it prints the seconds its work took.
# {work} is the folder with spec.toml and, after setup, plan.json, filled.xlsx, tidy.csv.
STEPS = {
    "plan": (
        "layout",
        "from layout.cli import main\nt=time.perf_counter()\nimport uuid\nmain(['plan', W+'/spec.toml', '-o', W+f'/p-{uuid.uuid4().hex}.json'])\n"
        "print(time.perf_counter()-t)",
    ),
    "workbook": (
        "layout",
        "from layout import load_plan\nfrom layout.outputs.workbook import workbook_bytes\n"
        "plan=load_plan(W+'/plan.json')\nt=time.perf_counter()\nopen(W+'/e.xlsx','wb').write(workbook_bytes(plan))\n"
        "print(time.perf_counter()-t)",
    ),
    "workbook-baseline": (
        "openpyxl write-only dump of the same cells",
        "from layout import load_plan\nfrom layout.outputs.entry_table import entry_rows, headers\n"
        "from layout.outputs.workbook import structure_values\nfrom openpyxl import Workbook\n"
        "plan=load_plan(W+'/plan.json')\nrows=[structure_values(plan, r) for r in entry_rows(plan)]\n"
        "t=time.perf_counter()\nwb=Workbook(write_only=True)\nws=wb.create_sheet('entry')\n"
        "ws.append(headers(plan))\nfor r in rows: ws.append(r)\nwb.save(W+'/bare.xlsx')\nprint(time.perf_counter()-t)",
    ),
    "check": (
        "layout",
        # the command's modules are imported before the clock starts, as the baseline imports calamine first
        "from layout.cli import main\nimport contextlib, io\nimport layout.intake.check, layout.intake.report\n"
        "t=time.perf_counter()\nwith contextlib.redirect_stdout(io.StringIO()):\n"
        "    rc = main(['check', W+'/plan.json', W+'/filled.xlsx', '-o', W+'/checked', '--force'])\n"
        "t = time.perf_counter() - t\n"
        "assert rc == 0, f'the check of clean simulated returns exited {rc}: stale --work files?'\nprint(t)",
    ),
    "check-baseline": (
        "python-calamine read of the same file",
        "from python_calamine import CalamineWorkbook\nt=time.perf_counter()\n"
        "rows=CalamineWorkbook.from_path(W+'/filled.xlsx').get_sheet_by_name('entry').to_python()\n"
        "print(time.perf_counter()-t)",
    ),
    "labels": (
        "layout (10,000 slot labels, HTML with SVG QR)",
        "from layout import load_plan\nfrom layout.outputs.labels import LabelGeometry\n"
        "from layout.outputs.printable import render_labels\nfrom dataclasses import replace\n"
        "plan=load_plan(W+'/plan.json')\nplan=replace(plan, slots=plan.slots[:10000])\n"
        "t=time.perf_counter()\nhtml=render_labels(plan, LabelGeometry())\nprint(time.perf_counter()-t)",
    ),
    "labels-baseline": (
        "qrcode make-and-SVG of the same codes",
        "from layout import load_plan\nimport qrcode\nfrom qrcode.image.svg import SvgPathImage\n"
        "codes=[s.code for s in load_plan(W+'/plan.json').slots[:10000]]\nt=time.perf_counter()\n"
        "out=[qrcode.make(c, image_factory=SvgPathImage).to_string() for c in codes]\nprint(time.perf_counter()-t)",
    ),
    "analyze": (
        "layout",
        # tidy.csv read as the command reads it (text columns, numbers where they parse), before the clock
        "from layout import load_plan\nfrom layout.stats.analyze import analyze\nfrom layout.stats.data import load_checked\n"
        "plan=load_plan(W+'/plan.json')\ntidy=load_checked(plan, W+'/checked').tidy\n"
        "t=time.perf_counter()\nanalyze(plan, tidy)\nprint(time.perf_counter()-t)",
    ),
    "analyze-baseline": (
        "numpy group-by of the same sums of squares",
        "import numpy as np, pandas as pd\ntidy=pd.read_csv(W+'/checked/tidy.csv')\nt=time.perf_counter()\n"
        "for col in ('mass', 'count'):\n"
        "    y=tidy[col].to_numpy(float); u=pd.factorize(tidy['unit'])[0]; g=pd.factorize(tidy['treatment'])[0]\n"
        "    m=y.mean(); su=np.bincount(u, y); nu=np.bincount(u); sg=np.bincount(g, y); ng=np.bincount(g)\n"
        "    ss_t=(sg**2/ng).sum()-y.sum()**2/len(y); ss_u=(su**2/nu).sum()-(sg**2/ng).sum()\n"
        "    ss_s=(y**2).sum()-(su**2/nu).sum()\n"
        "print(time.perf_counter()-t)",
    ),
}

BASELINE = "-baseline"

RUNNER = """
import time, resource, sys
W = {work!r}
{code}
print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)
"""


def run_step(code: str, work: Path) -> tuple[float, float, int]:
    """(seconds of the work, seconds of the whole process, peak KiB) of one fresh process."""
    started = time.perf_counter()
    out = subprocess.run(
        [sys.executable, "-c", RUNNER.format(work=str(work), code=code)],
        capture_output=True,
        text=True,
        cwd=ROOT,
        check=True,
    ).stdout.split()
    return float(out[-2]), time.perf_counter() - started, int(out[-1])


def _write_spec(work: Path, replicates: int, tag: str, subsamples: int) -> None:
    """spec.toml: a crd of 20 treatments with the given replicates and subsamples."""
    treatments = ", ".join(f'"t{i:02d}"' for i in range(20))
    text = SPEC.format(tag=tag, reps=replicates, treatments=treatments, subs=subsamples)
    (work / "spec.toml").write_text(text, encoding="utf-8")


def _run(work: Path, code: str) -> None:
    """A setup snippet in a fresh process, with W set to the work folder."""
    subprocess.run([sys.executable, "-c", f"W = {str(work)!r}\n{code}"], check=True, cwd=ROOT)


def setup(work: Path, replicates: int, tag: str, subsamples: int = 5) -> None:
    """spec.toml, plan.json, the filled workbook (simulated values) and its check's tidy.csv."""
    _write_spec(work, replicates, tag, subsamples)
    code = textwrap.dedent(
        """
        from layout import load_spec, make_plan
        from layout.outputs.workbook import workbook_bytes
        from layout.simulate import simulate, fill_workbook
        from layout.cli import main
        import contextlib, io
        plan = make_plan(load_spec(W + '/spec.toml'))
        plan.save(W + '/plan.json', force=True)
        open(W + '/entry.xlsx', 'wb').write(workbook_bytes(plan))
        fill_workbook(plan, W + '/entry.xlsx', W + '/filled.xlsx', simulate(plan, missing_share=0.0), force=True)
        with contextlib.redirect_stdout(io.StringIO()):
            main(['check', W + '/plan.json', W + '/filled.xlsx', '-o', W + '/checked', '--force'])
        """
    )
    _run(work, code)


def setup_csv(work: Path, replicates: int, tag: str, subsamples: int = 10) -> None:
    """spec.toml, plan.json and filled.csv: a re-typed return of every slot (codes and values only), written
    directly, since filling a workbook of 1,000,000 rows through openpyxl would take longer than the check."""
    _write_spec(work, replicates, tag, subsamples)
    code = textwrap.dedent(
        """
        import csv
        from layout import load_spec, make_plan
        from layout.simulate import simulate
        plan = make_plan(load_spec(W + '/spec.toml'))
        plan.save(W + '/plan.json', force=True)
        values = simulate(plan, missing_share=0.0)
        with open(W + '/filled.csv', 'w', newline='') as fh:
            w = csv.writer(fh)
            w.writerow(['code', 'mass (g)', 'count'])
            for (code, rnd), f in values.items():
                w.writerow([code, f.values.get('mass', ''), f.values.get('count', '')])
        """
    )
    _run(work, code)


def pdf_rates(work: Path, reps: int) -> dict[str, float]:
    """Labels per second to PDF, 2,000 slot labels, for each engine found."""
    from layout.outputs.pdf import choose_engine

    rates = {}
    for engine in ("chromium", "weasyprint"):
        try:
            path = choose_engine(engine)
        except Exception:
            continue
        code = (
            "from layout import load_plan\nfrom layout.outputs.labels import LabelGeometry\n"
            "from layout.outputs.printable import render_labels\nfrom layout.outputs.pdf import html_to_pdf\n"
            "from dataclasses import replace\nfrom pathlib import Path\n"
            "plan=load_plan(W+'/plan.json')\nplan=replace(plan, slots=plan.slots[:2000])\n"
            "Path(W+'/l.html').write_text(render_labels(plan, LabelGeometry()), encoding='utf-8')\n"
            f"t=time.perf_counter()\nhtml_to_pdf(Path(W+'/l.html'), {path!r})\nprint(time.perf_counter()-t)"
        )
        times = [run_step(code, work)[0] for _ in range(reps)]
        rates[engine] = 2000 / statistics.median(times)
    return rates


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--reps", type=int, default=3)
    ap.add_argument("--big", action="store_true", help="also check 1,000,000 slots")
    ap.add_argument("--out", default="bench.json")
    ap.add_argument("--only", help="comma-separated steps (of the table, or pdf)")
    ap.add_argument("--work", help="keep the set-up files in this folder and reuse them on the next run")
    args = ap.parse_args()
    console = Console()
    figures: dict = {"machine": platform.platform(), "python": platform.python_version(), "steps": {}}
    with tempfile.TemporaryDirectory(prefix="layout-bench-") as tmp:
        work = Path(args.work or tmp)
        work.mkdir(parents=True, exist_ok=True)
        if not (work / "checked" / "tidy.csv").exists():
            console.print("setting up 100,000 slots (plan, workbook, simulated values, first check)...")
            setup(work, 1000, "1")
        steps = args.only.split(",") if args.only else list(STEPS)
        chosen = [n for n in steps if n in STEPS]
        for name in chosen:
            if name.endswith(BASELINE) and name.removesuffix(BASELINE) in chosen:
                continue  # run beside its step
            # a step's runs alternate with its baseline's: a machine that speeds up or slows down during the
            # run (this one drifts by 20-40% over minutes) then moves both medians alike
            pair = [name, *[n for n in (name + BASELINE,) if n in chosen]]
            runs: dict[str, list[tuple[float, float, int]]] = {n: [] for n in pair}
            for _ in range(args.reps):
                for n in pair:
                    runs[n].append(run_step(STEPS[n][1], work))
            for n in pair:
                figures["steps"][n] = {
                    "what": STEPS[n][0],
                    "seconds": statistics.median(r[0] for r in runs[n]),
                    "process_seconds": statistics.median(r[1] for r in runs[n]),
                    "peak_mib": max(r[2] for r in runs[n]) / 1024,
                    "runs": [r[0] for r in runs[n]],
                }
                console.print(f"  {n}: {figures['steps'][n]['seconds']:.2f} s")
        if not args.only or "pdf" in steps:
            figures["pdf_labels_per_second"] = pdf_rates(work, args.reps)
        if args.big:
            big = work / "big"
            big.mkdir(exist_ok=True)
            if not (big / "filled.csv").exists():
                console.print("setting up 1,000,000 slots...")
                setup_csv(big, 5000, "2", subsamples=10)  # 100,000 units (the spec's most) x 10 subsamples
            runs = [run_step(STEPS["check"][1].replace("filled.xlsx", "filled.csv"), big)]
            figures["check_1m"] = {"what": "layout check of a 1,000,000-row CSV return", "seconds": runs[0][0],
                                   "peak_mib": runs[0][2] / 1024}  # fmt: skip
    s = figures["steps"]
    ratios = {
        name: s[name]["seconds"] / s[f"{name}-baseline"]["seconds"]
        for name in ("workbook", "check", "labels", "analyze")
        if name in s and f"{name}-baseline" in s
    }
    figures["ratios"] = ratios
    table = Table(title=f"layout benchmark (median of {args.reps})")
    for col in ("step", "what", "s", "process s", "peak MiB", "ratio"):
        table.add_column(col, justify="left" if col in ("step", "what") else "right")
    for name, f in s.items():
        ratio = ratios.get(name)
        table.add_row(name, f["what"], f"{f['seconds']:.2f}", f"{f['process_seconds']:.2f}", f"{f['peak_mib']:.0f}",
                      f"{ratio:.2f}x" if ratio is not None else "")  # fmt: skip
    console.print(table)
    for engine, rate in figures.get("pdf_labels_per_second", {}).items():
        console.print(f"PDF labels, {engine}: {rate:.0f} per second")
    if "check_1m" in figures:
        console.print(f"check of 1,000,000 slots: {figures['check_1m']['seconds']:.1f} s")
    Path(args.out).write_text(json.dumps(figures, indent=1) + "\n", encoding="utf-8")
    console.print(f"figures written to {args.out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
