"""Filled-in values from published data sets, for tests that need a returned sheet.

Flatworm densities per stone: Quinn & Keough (2002), Experimental Design and Data
Analysis for Biologists, Cambridge University Press (Curdies River example), as used
via Logan (2010); file tests/reference/nested/flatworms_season_site.csv (source in
tests/reference/README.md). 2 seasons × 3 sites × 6 stones: a crd with subsampling, sites
the experimental units, stones the subsamples.
"""

from __future__ import annotations

import csv
from collections.abc import Iterator
from pathlib import Path

from layout import Plan

FLATWORMS = Path(__file__).parent / "reference" / "nested" / "flatworms_season_site.csv"

# a crd shaped like the flatworm data: treatments are the seasons, 3 sites, 6 stones
FLATWORM_DESIGN = 'type = "crd"\nreplicates = 3\nsubsamples = 6\ntreatments = ["summer", "winter"]'


def flatworm_densities() -> dict[tuple[str, int, int], float]:
    """(season, site within its season 1-3, stone 1-6) → density, as published (CRLF and padding stripped)."""
    rows: dict[str, dict[int, list[float]]] = {}
    with FLATWORMS.open(newline="", encoding="utf-8") as fh:
        for rec in csv.DictReader(fh):
            rows.setdefault(rec["Season"].strip().lower(), {}).setdefault(int(rec["Site"]), []).append(
                float(rec["Density"])
            )
    out: dict[tuple[str, int, int], float] = {}
    for season, sites in rows.items():
        for i, site in enumerate(sorted(sites), start=1):
            for stone, value in enumerate(sites[site], start=1):
                out[(season, i, stone)] = value
    return out


def flatworm_fill(plan: Plan) -> Iterator[tuple[str, str, float]]:
    """(slot code, round, density) for every slot of a crd of 2 treatments × 3 units × 6 subsamples.

    The plan's first treatment takes the summer sites, the second the winter sites.
    """
    values = flatworm_densities()
    season = dict(zip(plan.spec.treatments, ("summer", "winter"), strict=True))
    for rnd in plan.rounds:
        for s in plan.slots:
            u = plan.unit_by_code[s.unit]
            yield s.code, rnd.name, values[(season[u.treatment], u.replicate, s.subsample)]
