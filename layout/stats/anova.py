"""The ANOVA of a design with subsampling, each F against its correct error term.

Sums of squares: each design term by sequential least squares on the unit means (times
the subsamples per unit), the experimental error as what the unit means leave, and the
sampling error as the spread of subsamples around their unit mean. Values are centred on
their median first, which leaves every sum of squares unchanged and keeps precision for
data with many constant leading digits. Expected mean squares are written out for the
balanced case, so a reader sees why each F has the denominator it has.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import stats

from layout.plan import Plan, Unit
from layout.stats.terms import Term, columns, design_terms, levels_of


@dataclass
class Row:
    """One line of the ANOVA table."""

    source: str
    df: int
    ss: float
    ms: float | None = None
    f: float | None = None
    p: float | None = None
    error: str | None = None  # the source this row's F is tested against
    ems: str = ""

    def to_dict(self) -> dict[str, object]:
        return {
            "source": self.source,
            "df": self.df,
            "ss": self.ss,
            "ms": self.ms,
            "f": self.f,
            "p": self.p,
            "error_term": self.error,
            "expected_ms": self.ems,
        }


@dataclass
class Table:
    """An ANOVA table with what it rests on."""

    rows: list[Row] = field(default_factory=list)
    subsamples: int = 1
    units: int = 0

    def row(self, source: str) -> Row | None:
        return next((r for r in self.rows if r.source == source), None)


def _fit_rss(x: np.ndarray, y: np.ndarray, rcond: float) -> tuple[float, int]:
    beta, _, rank, _ = np.linalg.lstsq(x, y, rcond=rcond)
    resid = y - x @ beta
    return float(resid @ resid), int(rank)


def _cells(plan: Plan, units: list[Unit]) -> tuple[np.ndarray, list[Unit]]:
    """Each unit's cell (its combination of every part of the design's terms), and one unit standing for each cell."""
    cell = np.zeros(len(units), dtype=np.int64)
    for part in dict.fromkeys(p for term in design_terms(plan) for p in term.parts):
        which, levels = pd.factorize(np.array(levels_of(units, part), dtype=object))
        cell = pd.factorize(cell * len(levels) + which)[0]  # renumbered each time, so it cannot overflow
    _, first = np.unique(cell, return_index=True)
    return cell, [units[i] for i in first.tolist()]


def unit_table(plan: Plan, units: list[Unit], means: np.ndarray, weight: float) -> list[tuple[Term | None, int, float]]:
    """(term, df, ss) for every design term on the unit means, then (None, df, ss) for what is left.

    Every column of every term is constant within a cell, so the fits are done on the cell means weighted by
    the units in each (the same fitted values; the spread within cells is added to each residual sum of squares):
    a crd of 20 treatments fits 20 rows, not 20,000.
    """
    y = means - np.median(means)
    cell, standing = _cells(plan, units)
    n = np.bincount(cell)
    cell_mean = np.bincount(cell, y) / n
    within = float(((y - cell_mean[cell]) ** 2).sum())
    w = np.sqrt(n)
    # singular values of the weighted cell rows are those of the unit rows (same X'X), so lstsq's default cut-off
    # for the units' matrix (eps × its larger dimension) makes the same rank decisions
    rcond = np.finfo(float).eps * len(units)
    x = np.ones((len(standing), 1))
    rss, rank = float(((y - y.mean()) ** 2).sum()), 1  # the intercept alone: the fit is the mean
    out: list[tuple[Term | None, int, float]] = []
    for term in design_terms(plan):
        x = np.column_stack([x, columns(term, standing)])
        cell_rss, new_rank = _fit_rss(x * w[:, None], cell_mean * w, max(rcond, np.finfo(float).eps * x.shape[1]))
        new_rss = within + cell_rss
        out.append((term, new_rank - rank, weight * max(rss - new_rss, 0.0)))
        rss, rank = new_rss, new_rank
    out.append((None, len(units) - rank, weight * rss))
    return out


def _ems(plan: Plan, term: Term | None, s: int, n_units: int, per_plot: int) -> str:
    """The expected mean square of a source, in the balanced case."""
    base = "σ²(sub)" if s > 1 else ""
    unit = f"{s}·σ²(unit)" if s > 1 else "σ²(unit)"
    head = f"{base} + {unit}" if base else unit
    split = plan.spec.design.type == "split-plot"
    if term is None:
        return head
    if term.kind == "whole-plot error":
        return f"{head} + {s * per_plot}·σ²(whole plot)"
    cells = 1
    for part in term.parts:
        cells *= len({level for level in _levels(plan, part)})
    coef = s * n_units // max(1, cells)
    whole = split and term.kind != "blocking" and all(_is_whole(plan, p) for p in term.parts)
    mid = f" + {s * per_plot}·σ²(whole plot)" if split and (whole or term.name == "block") else ""
    return f"{head}{mid} + {coef}·θ({term.name})"


def _levels(plan: Plan, part: str) -> list[str]:
    if part == "block":
        return [str(b) for b in range(1, (plan.spec.design.blocks or 0) + 1)]
    if part in ("row", "col"):
        return [str(i) for i in range(1, len(plan.spec.treatments) + 1)]
    if part == "treatment":
        return list(plan.spec.treatments)
    return list(next(f.levels for f in plan.spec.factor if f.name == part))


def _is_whole(plan: Plan, part: str) -> bool:
    return any(f.whole_plot and f.name == part for f in plan.spec.factor)


def anova(
    plan: Plan,
    units: list[Unit],
    values: list[np.ndarray] | np.ndarray,
    on_means: list[tuple[Term | None, int, float]] | None = None,
) -> Table:
    """The ANOVA with subsampling of balanced data: values[i] are the subsample values of units[i]
    (a list of equal-length arrays, or a units x subsamples array).

    on_means, when given, is unit_table of the unit means at weight 1 (computed once by the caller).
    """
    s = len(values[0])
    grid = np.asarray(values, dtype=float)  # units x subsamples: the data are balanced
    means = grid.mean(axis=1)
    centre = float(np.median(grid))  # sums of squares about the median first, for their precision
    sampling_ss = float(((grid - means[:, None]) ** 2).sum())
    sampling_df = grid.size - len(values)
    total_ss = float(((grid - centre) ** 2).sum()) - grid.size * (float(grid.mean()) - centre) ** 2
    if on_means is None:
        parts = unit_table(plan, units, means, float(s))
    else:
        parts = [(term, df, s * ss) for term, df, ss in on_means]
    split = plan.spec.design.type == "split-plot"
    whole_plots = {u.whole_plot for u in units} if split else set()
    per_plot = len(units) // max(1, len(whole_plots)) if split else 1
    table = Table(subsamples=s, units=len(units))
    error_name = "sub-plot error" if split else "experimental error"
    for term, df, ss in parts:
        name = term.name if term else error_name
        table.rows.append(Row(name, df, ss, ems=_ems(plan, term, s, len(units), per_plot)))
    if s > 1:
        table.rows.append(Row("sampling error", sampling_df, sampling_ss, ems="σ²(sub)"))
    table.rows.append(Row("total", len(units) * s - 1, total_ss))
    for r in table.rows:
        if r.source != "total" and r.df > 0:
            r.ms = r.ss / r.df
    _tests(table, split)
    return table


def _tests(table: Table, split: bool) -> None:
    """F and p for each source against the error its expected mean square calls for.

    Design terms are tested against the experimental error (in a split-plot: block and the
    whole-plot factor against the whole-plot error, everything else against the sub-plot
    error); the experimental error itself against the sampling error, which tests whether
    units differ beyond their subsamples.
    """
    error = table.row("sub-plot error" if split else "experimental error")
    whole = table.row("whole-plot error")
    sampling = table.row("sampling error")
    for r in table.rows:
        if r.source in ("total", "sampling error") or r.ms is None:
            continue
        if r is error:
            against = sampling
        elif r is whole:
            against = error
        elif split and "σ²(whole plot)" in r.ems:
            against = whole
        else:
            against = error
        if against is None or against.ms is None or against.ms <= 0:
            continue
        r.error = against.source
        r.f = r.ms / against.ms
        r.p = float(stats.f.sf(r.f, r.df, against.df))
