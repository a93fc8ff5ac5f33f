"""Power of the treatment F test over units per treatment × subsamples per unit, and the cheapest plan.

λ = n·Σα² / (σ²(unit) + σ²(sub)/s), with the least favourable configuration for a
difference D between the extreme treatments (two means D apart, the others midway:
Σα² = D²/2); power = P(F' > F_crit) for the noncentral F with t − 1 and the error df
(crd: t(n − 1); rcbd, blocks instead of replicates: (t − 1)(n − 1)).

The cost-optimal subsamples per unit, s* = √(c_unit·σ²(sub) / (c_sub·σ²(unit))), is the
classical optimum allocation of two-stage sampling (Cochran, Sampling Techniques, 3rd
ed., 1977, section 10.6; from memory): it minimises the variance of a treatment mean for a
fixed cost.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from scipy import stats


def power_of(
    t: int, n: int, s: int, var_unit: float, var_sub: float, difference: float, alpha: float, design: str = "crd"
) -> float:
    """Power of the treatment F test with n units per treatment (blocks in an rcbd) and s subsamples each."""
    return _powers(t, [(n, s)], var_unit, var_sub, difference, alpha, design)[0]


def _powers(
    t: int, cells: list[tuple[int, int]], var_unit: float, var_sub: float, difference: float, alpha: float, design: str
) -> list[float]:
    """power_of for every (n, s) at once (λ and the df as in the module's note), one scipy call per function;
    nan where the error has no df."""
    n = np.array([c[0] for c in cells], dtype=float)
    s = np.array([c[1] for c in cells], dtype=float)
    df1 = t - 1
    df2 = t * (n - 1) if design == "crd" else (t - 1) * (n - 1)
    ok = df2 > 0
    lam = n * (difference**2 / 2) / (var_unit + var_sub / s)
    out = np.full(len(cells), np.nan)
    if ok.any():
        crit = stats.f.isf(alpha, df1, df2[ok])
        out[ok] = stats.ncf.sf(crit, df1, df2[ok], lam[ok])
    return [float(p) for p in out]


def optimal_subsamples(var_unit: float, var_sub: float, cost_unit: float, cost_sub: float) -> float | None:
    """s* = √(c_unit·σ²(sub) / (c_sub·σ²(unit))), or None when σ²(unit) is 0 (then subsamples are all that helps)."""
    if var_unit <= 0 or cost_sub <= 0:
        return None
    return math.sqrt(cost_unit * var_sub / (cost_sub * var_unit))


def power_grid(
    t: int,
    var_unit: float,
    var_sub: float,
    difference: float,
    alpha: float = 0.05,
    target: float = 0.8,
    cost_unit: float | None = None,
    cost_sub: float | None = None,
    units: range = range(2, 17),
    subsamples: range = range(1, 9),
    design: str = "crd",
) -> dict[str, Any]:
    """The grid, the cheapest plan reaching the target power (or the fewest observations), and s*."""
    cells = [(n, s) for n in units for s in subsamples]
    powers = _powers(t, cells, var_unit, var_sub, difference, alpha, design)
    grid = []
    for (n, s), p in zip(cells, powers, strict=True):
        cost = t * n * (cost_unit + s * cost_sub) if cost_unit is not None and cost_sub is not None else None
        grid.append({"units": n, "subsamples": s, "power": p, "cost": cost})
    reaching = [g for g in grid if g["power"] >= target]
    key = (
        (lambda g: (g["cost"], g["units"] * g["subsamples"]))
        if cost_unit is not None
        else (lambda g: (g["units"] * g["subsamples"], g["units"]))
    )
    recommended = min(reaching, key=key) if reaching else None
    optimal = (
        optimal_subsamples(var_unit, var_sub, cost_unit, cost_sub)
        if cost_unit is not None and cost_sub is not None
        else None
    )
    return {
        "treatments": t,
        "design": design,
        "var_unit": var_unit,
        "var_sub": var_sub,
        "difference": difference,
        "alpha": alpha,
        "target": target,
        "grid": grid,
        "recommended": recommended,
        "optimal_subsamples": optimal,
    }
