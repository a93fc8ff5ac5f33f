"""The statistical warnings of a whole check: thresholds set for the study, findings with their places."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from layout.intake.findings import Finding, Kind, finding
from layout.intake.merge import Key, Merged
from layout.intake.robust import (
    Outlier,
    Swap,
    find_outliers,
    find_swaps,
    fit_size,
    outlier_candidates,
    outlier_threshold,
    scale_df,
    swap_candidates,
    swap_threshold,
)
from layout.plan import Plan

Groups = dict[tuple[str, str], dict[str, list[tuple[str, float]]]]  # (round, response) → unit → (slot, value)


@dataclass
class Screened:
    """What the screen found, before it is put into words."""

    outliers: list[tuple[str, str, Outlier]] = field(default_factory=list)  # (round, response, outlier)
    swaps: list[tuple[str, str, Swap, dict[str, float], dict[str, float]]] = field(default_factory=list)
    outlier_threshold: float = 0.0
    swap_threshold: float = 0.0


def screen(plan: Plan, groups: Groups) -> Screened:
    """Outlying subsamples and possibly swapped units over every round and response, controlled per study."""
    means_of = {key: {u: sum(v for _, v in vs) / len(vs) for u, vs in g.items()} for key, g in groups.items()}
    n_values = sum(outlier_candidates(g) for g in groups.values())
    n_pairs = sum(swap_candidates(plan, m) for m in means_of.values())
    out = Screened()
    for (rnd, response), g in groups.items():
        out.outlier_threshold = outlier_threshold(n_values, scale_df(g))
        out.outliers += [(rnd, response, o) for o in find_outliers(g, out.outlier_threshold)]
        means = means_of[(rnd, response)]
        treatment_means = _treatment_means(plan, means)
        df, leverage = fit_size(plan, means)
        out.swap_threshold = swap_threshold(n_pairs, df, leverage)
        out.swaps += [(rnd, response, s, means, treatment_means) for s in find_swaps(plan, means, out.swap_threshold)]
    return out


def _treatment_means(plan: Plan, means: dict[str, float]) -> dict[str, float]:
    by: dict[str, list[float]] = {}
    for code, m in means.items():
        by.setdefault(plan.unit_by_code[code].treatment, []).append(m)
    return {t: float(np.mean(v)) for t, v in by.items()}


def groups_of(plan: Plan, merged: dict[Key, Merged]) -> Groups:
    """The numeric values of every round and response, by unit; slots in conflict left out."""
    numeric = [r.name for r in plan.spec.response if r.kind in ("number", "integer")]
    groups: Groups = {}
    for (slot, rnd), m in merged.items():
        if m.conflict:
            continue
        for name in numeric:
            if name in m.values:
                groups.setdefault((rnd, name), {}).setdefault(m.slot.unit, []).append((slot, float(m.values[name])))
    return groups


def statistical_findings(
    plan: Plan, merged: dict[Key, Merged]
) -> tuple[list[Finding], set[tuple[str, str, str]], set[tuple[str, str]]]:
    """outlier-subsample and possible-swap findings, with the (slot, round, response) and (unit, round) they mark."""
    headers = {r.name: r.header for r in plan.spec.response}
    sub_name = plan.spec.design.subsamples_word
    got = screen(plan, groups_of(plan, merged))
    found: list[Finding] = []
    outliers: set[tuple[str, str, str]] = set()
    for rnd, response, o in got.outliers:
        outliers.add((o.slot, rnd, response))
        e = merged[(o.slot, rnd)].anchor
        found.append(
            finding(
                Kind.OUTLIER_SUBSAMPLE,
                f"{headers[response]} {o.value:g} in round {rnd} is far from the other {sub_name} of {o.unit} "
                f"(their mean {o.others:.4g}; {o.score:.1f} SD of the {sub_name}-to-{sub_name} spread, "
                f"flagged above {got.outlier_threshold:.1f})",
                file=e.file,
                row=e.row,
                code=o.slot,
                unit=o.unit,
                column=headers[response],
                value=o.value,
            )
        )
    pairs: dict[tuple[str, str, str], list[str]] = {}
    for rnd, response, s, means, tmeans in got.swaps:
        ta, tb = plan.unit_by_code[s.first].treatment, plan.unit_by_code[s.second].treatment
        pairs.setdefault((s.first, s.second, rnd), []).append(
            f"{headers[response]}: {s.first} {means[s.first]:.4g} and {s.second} {means[s.second]:.4g}, "
            f"while treatment {ta} averages {tmeans[ta]:.4g} and {tb} {tmeans[tb]:.4g} (score {s.score:.0f})"
        )
    swaps: set[tuple[str, str]] = set()
    for (a, b, rnd), hits in pairs.items():
        swaps |= {(a, rnd), (b, rnd)}
        found.append(
            finding(
                Kind.POSSIBLE_SWAP,
                f"{a} and {b} in round {rnd} fit each other's treatment far better than their own "
                f"({'; '.join(hits)}; flagged above {got.swap_threshold:.1f}); check their labels and sheets",
                code=a,
                unit=a,
                value=b,
                suggestion=f"compare the labels of {a} and {b}",
            )
        )
    return found, outliers, swaps
