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

REFERENCE = Path(__file__).parent / "reference"
FLATWORMS = REFERENCE / "nested" / "flatworms_season_site.csv"
CORTISOL = REFERENCE / "nested" / "doncaster_davey_2_1_cortisol_food_pen.csv"
SILVER = REFERENCE / "nist_anova" / "AtmWtAg.dat"

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


def cortisol() -> dict[tuple[int, int, int], float]:
    """(food 1-2, pen 1-4, animal 1-3) → cortisol: Doncaster & Davey (2007), model 2.1, worked example 1."""
    out: dict[tuple[int, int, int], float] = {}
    count: dict[tuple[int, int], int] = {}
    with CORTISOL.open(newline="", encoding="utf-8") as fh:
        for rec in csv.DictReader(fh):
            food, pen = int(rec["Food_A"]), int(rec["Pen_B"])
            count[(food, pen)] = count.get((food, pen), 0) + 1
            out[(food, pen, count[(food, pen)])] = float(rec["Cortisol_Y"])
    return out


def silver() -> dict[tuple[int, int], float]:
    """(instrument 1-2, reading 1-24) → atomic weight of silver: NIST StRD AtmWtAg (Powell, Murphy & Gramlich 1982).

    Kept as the text printed in the file, turned into float once, so values compare exactly.
    """
    lines = SILVER.read_text(encoding="utf-8").splitlines()
    start = next(i for i, line in enumerate(lines) if line.startswith("Data:") and "AgWt" in line)
    out: dict[tuple[int, int], float] = {}
    count = {1: 0, 2: 0}
    for line in lines[start + 1 :]:
        parts = line.split()
        if len(parts) == 2:
            inst = int(parts[0])
            count[inst] += 1
            out[(inst, count[inst])] = float(parts[1])
    return out


# an rcbd shaped like both: 2 treatments, 4 blocks, 3 subsamples; round one cortisol, round two silver
TWO_ROUND_DESIGN = 'type = "rcbd"\nblocks = 4\nsubsamples = 3\ntreatments = ["even", "patchy"]'


def two_round_values(plan: Plan) -> dict[tuple[str, str], float]:
    """(slot code, round) → a published value, for a plan made from TWO_ROUND_DESIGN with two rounds."""
    first, second = (r.name for r in plan.rounds)
    food = {"even": 1, "patchy": 2}
    c, ag = cortisol(), silver()
    out: dict[tuple[str, str], float] = {}
    for s in plan.slots:
        u = plan.unit_by_code[s.unit]
        assert u.block is not None
        out[(s.code, first)] = c[(food[u.treatment], u.block, s.subsample)]
        out[(s.code, second)] = ag[(food[u.treatment], (u.block - 1) * 3 + s.subsample)]
    return out


def nist_values(name: str) -> list[float]:
    """The responses of a NIST StRD one-way ANOVA file (tests/reference/nist_anova/NAME.dat), in file order."""
    lines = (REFERENCE / "nist_anova" / f"{name}.dat").read_text(encoding="utf-8").splitlines()
    start = max(i for i, line in enumerate(lines) if line.startswith("Data:"))  # the second "Data:" heads the values
    return [float(p[1]) for p in (line.split() for line in lines[start + 1 :]) if len(p) == 2]
