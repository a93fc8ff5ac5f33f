"""The statistical warnings of a whole check: thresholds set for the study, findings with their places."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from layout.intake.findings import Finding, Kind, finding
from layout.intake.returned import ROWS, Returned
from layout.intake.robust import (
    Grouped,
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
from layout.intake.rows import PlanIndex
from layout.plan import Plan

# (round, response) → the values by unit: a Grouped, or unit → [(slot, value)]
Groups = dict[tuple[str, str], Grouped | dict[str, list[tuple[str, float]]]]


@dataclass
class Screened:
    """What the screen found, before it is put into words."""

    outliers: list[tuple[str, str, Outlier]] = field(default_factory=list)  # (round, response, outlier)
    swaps: list[tuple[str, str, Swap, dict[str, float], dict[str, float]]] = field(default_factory=list)
    outlier_threshold: float = 0.0
    swap_threshold: float = 0.0


def screen(plan: Plan, groups: Groups) -> Screened:
    """Outlying subsamples and possibly swapped units over every round and response, controlled per study."""
    grouped = {key: g if isinstance(g, Grouped) else Grouped.of(g) for key, g in groups.items()}
    means_of = {key: g.means() for key, g in grouped.items()}
    n_values = sum(outlier_candidates(g) for g in grouped.values())
    n_pairs = sum(swap_candidates(plan, m) for m in means_of.values())
    out = Screened()
    for (rnd, response), g in grouped.items():
        out.outlier_threshold = outlier_threshold(n_values, scale_df(g))
        out.outliers += [(rnd, response, o) for o in find_outliers(g, out.outlier_threshold)]
        means = means_of[(rnd, response)]
        treatment_means = _treatment_means(plan, means)
        df, leverage = fit_size(plan, means)
        out.swap_threshold = swap_threshold(n_pairs, df, leverage)
        out.swaps += [(rnd, response, s, means, treatment_means) for s in find_swaps(plan, means, out.swap_threshold)]
    return out


def _treatment_means(plan: Plan, means: dict[str, float]) -> dict[str, float]:
    """Each treatment's mean of its units' means (each treatment's means in the order given, as np.mean adds)."""
    unit_by_code = plan.unit_by_code
    labels, which = np.unique(np.array([unit_by_code[c].treatment for c in means]), return_inverse=True)
    values = np.fromiter(means.values(), float, len(means))
    order = np.argsort(which, kind="stable")
    parts = np.split(values[order], np.cumsum(np.bincount(which, minlength=len(labels)))[:-1])
    return {str(t): float(np.mean(part)) for t, part in zip(labels.tolist(), parts, strict=True)}


def groups_of(plan: Plan, merged: Returned) -> Groups:
    """The numeric values of every round and response, by unit, in reading order; slots in conflict left out.

    Built from arrays: the order is that of reading every row one by one (units in the order first read, each
    unit's values in the order read; the groups in the order their first value was read).
    """
    numeric = [r.name for r in plan.spec.response if r.kind in ("number", "integer")]
    seq, slot, rnd = [], [], []
    values: dict[str, list[np.ndarray]] = {n: [] for n in numeric}
    has: dict[str, list[np.ndarray]] = {n: [] for n in numeric}
    for b in merged.blocks:
        seq.append(merged.places[b.file] * ROWS + b.numbers)
        slot.append(b.slots)
        rnd.append(b.rounds)
        for n in numeric:
            values[n].append(b.values[n].astype(float))
            has[n].append(b.has[n])
    special = [(key, m) for key, m in merged.special.items() if not m.conflict]
    if special:
        seq.append(np.array([merged.first_seen(m) for _, m in special], dtype=np.int64))
        slot.append(np.array([merged.idx.slot_number[k[0]] for k, _ in special], dtype=np.int64))
        rnd.append(np.array([merged.idx.round_number[k[1]] for k, _ in special], dtype=np.int64))
        for n in numeric:
            values[n].append(np.array([float(m.values[n]) if n in m.values else 0.0 for _, m in special]))
            has[n].append(np.array([n in m.values for _, m in special], dtype=bool))
    if not seq:
        return {}
    order = np.argsort(np.concatenate(seq), kind="stable")
    seq_all = np.concatenate(seq)[order]
    slot_all = np.concatenate(slot)[order]
    rnd_all = np.concatenate(rnd)[order]
    unit_all = merged.idx.unit_of_slot[slot_all]
    firsts: list[tuple[int, int, tuple[str, str], Grouped]] = []
    for r, round_ in enumerate(plan.rounds):
        in_round = rnd_all == r
        for j, n in enumerate(numeric):
            pick = np.flatnonzero(in_round & np.concatenate(has[n])[order])
            if len(pick):
                g = _grouped_of(merged.idx, unit_all[pick], slot_all[pick], np.concatenate(values[n])[order][pick])
                firsts.append((int(seq_all[pick[0]]), j, (round_.name, n), g))
    return {key: g for _, _, key, g in sorted(firsts, key=lambda f: (f[0], f[1]))}


def _grouped_of(idx: PlanIndex, unit: np.ndarray, slot: np.ndarray, values: np.ndarray) -> Grouped:
    """Values in reading order, gathered unit by unit (units in the order first read)."""
    units = idx.plan.units
    first = np.unique(unit, return_index=True)[1]  # each unit's first place, units ascending
    units_read = unit[np.sort(first)]  # the units, in the order first read
    rank = np.empty(len(units), dtype=np.int64)
    rank[units_read] = np.arange(len(units_read))
    order = np.argsort(rank[unit], kind="stable")
    return Grouped(
        [units[u].code for u in units_read.tolist()],
        idx.slot_codes[slot[order]].tolist(),
        values[order],
        np.bincount(rank[unit], minlength=len(units_read)),
    )


def statistical_findings(
    plan: Plan, merged: Returned
) -> tuple[list[Finding], set[tuple[str, str, str]], set[tuple[str, str]]]:
    """outlier-subsample and possible-swap findings, with the (slot, round, response) and (unit, round) they mark."""
    headers = {r.name: r.header for r in plan.spec.response}
    sub_name = plan.spec.design.subsamples_word
    got = screen(plan, groups_of(plan, merged))
    found: list[Finding] = []
    outliers: set[tuple[str, str, str]] = set()
    for rnd, response, o in got.outliers:
        outliers.add((o.slot, rnd, response))
        file, row = merged.anchor((o.slot, rnd))
        found.append(
            finding(
                Kind.OUTLIER_SUBSAMPLE,
                f"{headers[response]} {o.value:g} in round {rnd} is far from the other {sub_name} of {o.unit} "
                f"(their mean {o.others:.4g}; {o.score:.1f} SD of the {sub_name}-to-{sub_name} spread, "
                f"flagged above {got.outlier_threshold:.1f})",
                file=file,
                row=row,
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
