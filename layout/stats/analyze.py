"""layout analyze: for each numeric response and round, the analysis the design and the data allow.

balanced (every planned unit with all its subsamples)  → the ANOVA with subsampling (method "anova");
unequal subsamples, every unit present                  → ANOVA of the unit means ("unit-means");
whole units missing                                     → REML through statsmodels when installed
                                                          ("reml"), else unit means with a warning.
Category responses get a count table of unit-level summaries and a test of independence.
"""

from __future__ import annotations

import warnings
from collections import Counter
from dataclasses import dataclass
from functools import cached_property
from operator import attrgetter
from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

from layout.plan import Plan, Unit
from layout.stats.anova import Table, anova, unit_table
from layout.stats.compare import means_and_pairs
from layout.stats.components import components
from layout.stats.terms import factor_names, level_of, levels_of

UNIT_MEANS_NOTE = (
    "In balanced data the treatment F from the unit means equals the F of the full ANOVA "
    "(a fact of the trade: the subsample-to-subsample variation enters both mean squares equally)."
)


def analyze(plan: Plan, tidy: pd.DataFrame, accepted: list[str] | None = None) -> dict[str, Any]:
    """analysis.json's content: one result per numeric (or category) response and round."""
    results = []
    wanted = [c for c in ("unit", "round", "status", *(r.name for r in plan.spec.response)) if c in tidy.columns]
    tidy = tidy[wanted]  # only what is used: filtering every column of a large table costs more than the analysis
    planned = _rows_where(tidy, tidy["status"].fillna("") != "unmatched")
    parts = {rnd.name: _rows_where(planned, planned["round"].astype(str) == rnd.name) for rnd in plan.rounds}
    unit_codes = pd.Index([u.code for u in plan.units])
    # each row's unit as its place in the plan (-1: not a planned unit), found once per round
    places = {name: unit_codes.get_indexer(part["unit"].astype(str).to_numpy()) for name, part in parts.items()}
    for r in plan.spec.response:
        if r.kind in ("text", "date"):
            continue
        for rnd in plan.rounds:
            part = parts[rnd.name]
            if r.kind == "category":
                results.append(_category(plan, r.name, rnd.name, part))
            else:
                counts = _planned_counts(plan, places[rnd.name])
                results.append(
                    _numeric(plan, r.name, rnd.name, part, places[rnd.name], counts, integer=r.kind == "integer")
                )
    return {
        "format": "layout-analysis/1",
        "plan": plan.fingerprint,
        "accepted": accepted or [],
        "results": results,
    }


@dataclass
class UnitValues:
    """The values of the units that have any, grouped: flat[starts[i] : starts[i] + counts[i]] are units[i]'s."""

    units: list[Unit]
    flat: np.ndarray
    counts: np.ndarray

    @cached_property
    def starts(self) -> np.ndarray:
        return np.concatenate([[0], np.cumsum(self.counts)[:-1]]).astype(int)

    @cached_property
    def arrays(self) -> list[np.ndarray]:
        """One array per unit (slow at 20,000 units, so only for the small or rare paths)."""
        return [self.flat[a : a + n] for a, n in zip(self.starts.tolist(), self.counts.tolist(), strict=True)]

    def means(self) -> np.ndarray:
        return np.add.reduceat(self.flat, self.starts) / self.counts

    def grid(self) -> np.ndarray:
        """units x subsamples, when every unit has the same number of values (no copy)."""
        return self.flat.reshape(len(self.units), -1)


def _values(plan: Plan, name: str, part: pd.DataFrame, place: np.ndarray) -> UnitValues:
    """The planned units with values, and their values in file order; place: each row's unit's place in the plan."""
    vals = pd.to_numeric(part[name], errors="coerce").to_numpy(dtype=float)
    keep = ~np.isnan(vals)
    place = place[keep]
    planned = place >= 0
    order = np.argsort(place[planned], kind="stable")
    grouped, by_place = vals[keep][planned][order], place[planned][order]
    present, counts = np.unique(by_place, return_counts=True)
    units = list(plan.units) if len(present) == len(plan.units) else [plan.units[i] for i in present.tolist()]
    return UnitValues(units, grouped, counts)


def _rows_where(table: pd.DataFrame, keep: pd.Series) -> pd.DataFrame:
    """The rows kept, without a copy when that is all of them (the usual case)."""
    return table if keep.all() else table[keep]


def _planned_counts(plan: Plan, place: np.ndarray) -> np.ndarray:
    """Slots per unit in the plan's unit order; place: the unit's place of each planned row of one round.

    tidy.csv has a row for every planned slot and round, so they are counted there; a table that does
    not add up to the plan's slots (edited by hand) is counted from the plan instead.
    """
    counts = np.bincount(place[place >= 0], minlength=len(plan.units))
    if counts.sum() == len(plan.slots):
        return counts
    by_unit = Counter(map(attrgetter("unit"), plan.slots))
    return np.array([by_unit[u.code] for u in plan.units])


def _numeric(
    plan: Plan,
    name: str,
    rnd: str,
    part: pd.DataFrame,
    place: np.ndarray,
    planned_counts: np.ndarray,
    integer: bool,
) -> dict[str, Any]:
    values = _values(plan, name, part, place)
    units = values.units
    notes: list[str] = []
    if integer:
        notes.append("an integer response, analysed as numbers")
    out: dict[str, Any] = {"response": name, "round": rnd, "notes": notes}
    if len(units) < 3:
        out.update({"method": "none", "table": []})
        notes.append("too few units with values to analyse")
        return out
    complete = len(units) == len(plan.units)
    lengths = values.counts
    full = complete and bool((lengths == planned_counts).all())
    equal = bool((lengths == lengths[0]).all())
    means = values.means()
    parts = unit_table(plan, units, means, 1.0)  # on the unit means, for the ANOVA (times s) and the unit-means F
    if full and equal:
        table = anova(plan, units, values.grid(), parts)
        out["method"] = "anova"
    else:
        if not complete:
            reml = _reml(plan, name, units, values.arrays)
            if reml is not None:
                notes.append(
                    f"{len(plan.units) - len(units)} unit(s) have no values: fitted by REML (statsmodels MixedLM)"
                )
                notes += reml.pop("notes")  # out["notes"] is this list: update must not replace it
                out.update(reml)
                return out
            notes.append(
                f"{len(plan.units) - len(units)} unit(s) have no values and statsmodels is not installed: "
                "analysed on the unit means, which ignores the unequal information (pip install 'layout[reml]')"
            )
        elif equal:
            notes.append(
                "some planned subsamples have no values (the same number in every unit): analysed on the unit means"
            )
        else:
            notes.append("units have unequal numbers of subsamples: analysed on the unit means")
        table = _unit_means_table(plan, units, means, parts)
        out["method"] = "unit-means"
    out["table"] = [row.to_dict() for row in table.rows]
    out["components"] = components(table) if out["method"] == "anova" else {}
    out.update(_means(plan, table, units, values, means))
    unit_means = table if out["method"] == "unit-means" else _unit_means_table(plan, units, means, parts)
    out["unit_means_f"] = _unit_means_f(plan, unit_means)
    if out["method"] == "anova":
        out["notes"].append(UNIT_MEANS_NOTE)
        out["power"] = _next_trial(plan, out)
    return out


def _next_trial(plan: Plan, out: dict[str, Any]) -> dict[str, Any] | None:
    """Power for the next trial from this one's variance components, to detect this trial's Tukey HSD."""
    comp = out.get("components") or {}
    block = next(iter(out.get("means", {}).values()), None)
    if "unit" not in comp or "subsample" not in comp or block is None or not block["tukey"]["hsd"]:
        return None
    from layout.stats.power import power_grid

    design = "rcbd" if plan.spec.design.type == "rcbd" else "crd"
    grid = power_grid(
        len(block["means"]),
        comp["unit"]["estimate"],
        comp["subsample"]["estimate"],
        block["tukey"]["hsd"],
        units=range(2, 13),
        subsamples=range(1, 9),
        design=design,
    )
    grid["note"] = "the difference is this trial's Tukey HSD, the smallest difference it could call significant"
    return grid


def _unit_means_table(plan: Plan, units: list[Unit], means: np.ndarray, parts: list[Any]) -> Table:
    """The design's ANOVA on one mean per unit (no sampling error row); parts: unit_table of the means."""
    from layout.stats.anova import Row, _tests

    split = plan.spec.design.type == "split-plot"
    table = Table(subsamples=1, units=len(units))
    for term, df, ss in parts:
        table.rows.append(Row(term.name if term else ("sub-plot error" if split else "experimental error"), df, ss))
    total = float(np.sum((means - means.mean()) ** 2))
    table.rows.append(Row("total", len(units) - 1, total))
    for r in table.rows:
        if r.source != "total" and r.df > 0:
            r.ms = r.ss / r.df
    for r in table.rows:  # whole-plot sources carry σ²(whole plot), so _tests sends them to the whole-plot error
        if split and r.source == plan.spec.factor[[f.whole_plot for f in plan.spec.factor].index(True)].name:
            r.ems = "σ²(whole plot)"
        if split and r.source == "block":
            r.ems = "σ²(whole plot)"
    _tests(table, split)
    return table


def _unit_means_f(plan: Plan, table: Table) -> list[dict[str, Any]]:
    names = set(factor_names(plan)) | {":".join(c) for c in _combos(plan)}
    return [{"source": r.source, "f": r.f, "p": r.p} for r in table.rows if r.source in names and r.f is not None]


def _combos(plan: Plan) -> list[tuple[str, ...]]:
    from itertools import combinations

    names = factor_names(plan)
    return [c for k in range(2, len(names) + 1) for c in combinations(names, k)]


def _means(plan: Plan, table: Table, units: list[Unit], values: UnitValues, unit_means: np.ndarray) -> dict[str, Any]:
    """Means of every treatment factor (and of the treatments) with SE from their error term and Tukey's HSD."""
    names = factor_names(plan)
    split = plan.spec.design.type == "split-plot"
    out: dict[str, Any] = {"means": {}}
    for source in names + (["treatment"] if len(names) > 1 else []):
        row = table.row(source) if source != "treatment" else None
        err = table.row(row.error if row and row.error else ("sub-plot error" if split else "experimental error"))
        if err is None or err.ms is None or err.df <= 0:
            continue
        groups = _grouped(levels_of(units, source), unit_means)
        order = list(plan.spec.treatments) if source == "treatment" else _level_order(plan, source)
        groups = {k: groups[k] for k in sorted(groups, key=lambda k: order.index(k) if k in order else len(order))}
        per_mean = table.subsamples * min(len(g) for g in groups.values())
        out["means"][source] = {"error_term": err.source, **means_and_pairs(groups, err.ms, err.df, per_mean)}
        if "points" not in out and len(values.flat) <= 5000:
            # for the plot: each level's unit means and subsample values
            subs: dict[str, list[float]] = {}
            for u, v in zip(units, values.arrays, strict=True):
                key = level_of(u, source)
                subs.setdefault(key, []).extend(float(x) for x in v)
            out["points"] = {"source": source, "units": groups, "subsamples": subs}
    return out


def _grouped(keys: list[str], unit_means: np.ndarray) -> dict[str, list[float]]:
    """The unit means of each level, levels in order of first appearance, units in order within a level."""
    which, levels = pd.factorize(np.array(keys, dtype=object))
    order = np.argsort(which, kind="stable")
    ends = np.cumsum(np.bincount(which, minlength=len(levels))).tolist()
    means = unit_means[order].tolist()
    return {str(k): means[a:b] for k, a, b in zip(levels, [0, *ends[:-1]], ends, strict=True)}


def _level_order(plan: Plan, source: str) -> list[str]:
    return list(next((f.levels for f in plan.spec.factor if f.name == source), plan.spec.treatments))


def _reml(plan: Plan, name: str, units: list[Unit], values: list[np.ndarray]) -> dict[str, Any] | None:
    """Variance components and Wald tests by REML with statsmodels' MixedLM, when it is installed."""
    try:
        import statsmodels.formula.api as smf
    except ImportError:
        return None
    rows = []
    for u, v in zip(units, values, strict=True):
        for x in v:
            rec = {"y": float(x), "unit": u.code, "treatment": u.treatment, "block": str(u.block)}
            rows.append(rec)
    frame = pd.DataFrame(rows)
    frame["y"] -= frame["y"].median()
    formula = "y ~ C(treatment)" + (" + C(block)" if plan.spec.design.type in ("rcbd", "split-plot") else "")
    # statsmodels' warnings (an optimiser retried or not converged, an estimate on the boundary) belong in the
    # analysis, where the reader of its results sees them, not as stray lines on the terminal
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            fit = smf.mixedlm(formula, frame, groups=frame["unit"]).fit(reml=True)
            wald = fit.wald_test_terms(scalar=True)
        except Exception as exc:  # a model that does not converge is reported, not raised
            return {"method": "reml", "table": [], "notes": [f"REML fit failed: {exc}"]}
    said = [f"statsmodels warned: {text}" for text in dict.fromkeys(str(w.message) for w in caught)]
    if not getattr(fit, "converged", True):
        said.append("the REML fit did not converge: treat its estimates and tests with caution")
    table = [
        {
            "source": str(term).replace("C(", "").replace(")", ""),
            "df": int(res[2]),
            "chi2": float(res[0]),
            "p": float(res[1]),
        }
        for term, res in zip(wald.table.index, wald.table.values, strict=True)
        if term != "Intercept"
    ]
    return {
        "method": "reml",
        "table": table,
        "notes": said,
        "components": {
            "unit": {"estimate": float(fit.cov_re.iloc[0, 0]), "method": "REML (statsmodels MixedLM)"},
            "subsample": {"estimate": float(fit.scale), "method": "REML (statsmodels MixedLM)"},
            "notes": [],
        },
    }


def _category(plan: Plan, name: str, rnd: str, part: pd.DataFrame) -> dict[str, Any]:
    """Counts of each unit's most frequent level, per treatment, and a test of independence on those units."""
    levels = next(r.levels for r in plan.spec.response if r.name == name) or ()
    per_unit: dict[str, str] = {}
    for unit, group in part.groupby("unit"):
        vals = [v for v in group[name] if isinstance(v, str) and v]
        if vals:
            per_unit[str(unit)] = max(levels, key=lambda lv: (vals.count(lv), -levels.index(lv)))
    treatments = list(plan.spec.treatments)
    table = [
        [sum(1 for u in plan.units if u.treatment == t and per_unit.get(u.code) == lv) for lv in levels]
        for t in treatments
    ]
    out: dict[str, Any] = {
        "response": name,
        "round": rnd,
        "method": "counts",
        "counts": {"treatments": treatments, "levels": list(levels), "table": table},
        "notes": [
            "each unit counted once, by its most frequent level: subsamples are not independent replicates",
        ],
    }
    arr = np.array(table)
    arr = arr[arr.sum(axis=1) > 0][:, arr.sum(axis=0) > 0]
    if arr.shape[0] >= 2 and arr.shape[1] >= 2:
        if arr.shape == (2, 2):
            res = stats.fisher_exact(arr)
            out["test"] = {"name": "Fisher's exact test", "p": float(res.pvalue)}
        else:
            chi2, p, df, _ = stats.chi2_contingency(arr)
            out["test"] = {"name": "chi-square test of independence", "chi2": float(chi2), "df": int(df), "p": float(p)}
            out["notes"].append("few units per cell make the chi-square approximation rough")
    return out
