"""Shared fixtures: plans made from the example specs, and the outside programs the tests use."""

from __future__ import annotations

import os
import shutil
from pathlib import Path

import pytest

from layout import Plan, load_spec, loads_spec, make_plan

HERE = Path(__file__).parent
SPECS = HERE / "specs" / "valid"

# A blind study whose treatment labels are words that appear nowhere else, so a leak is visible.
BLIND_SPEC = """
[study]
id = "BL9"
title = "Blind leak check"
seed = 5
blind = true
[design]
type = "rcbd"
blocks = 3
subsamples = 2
unit_name = "tray"
subsample_name = "sample"
treatments = ["zorbacontrol", "quixolow", "fennimhigh"]
[layout]
rows = 3
cols = 3
[[response]]
name = "mass"
kind = "number"
unit = "g"
min = 0
max = 50
decimals = 2
[[response]]
name = "state"
kind = "category"
levels = ["ok", "bad"]
[collection]
rounds = ["first", "second"]
order = "random"
"""


def need(program: str) -> str:
    """The path of an outside program; missing is a failure in CI, a skip elsewhere."""
    found = shutil.which(program)
    if found:
        return found
    if os.environ.get("CI"):
        pytest.fail(f"{program} is required in CI (.ci/run installs it)")
    pytest.skip(f"{program} is not installed")


@pytest.fixture(scope="session")
def crd_plan() -> Plan:
    """The greenhouse example: crd, 20 pots × 3 seedlings, blind, digit treatment labels."""
    return make_plan(load_spec(SPECS / "greenhouse-biochar-crd.toml"))


@pytest.fixture(scope="session")
def rcbd_plan() -> Plan:
    """The field example: rcbd, 16 plots × 4 cores, two rounds in random order, not blind."""
    return make_plan(load_spec(SPECS / "field-irrigation-rcbd.toml"))


@pytest.fixture(scope="session")
def blind_plan() -> Plan:
    """A small blind rcbd whose treatment names are unmistakable."""
    return make_plan(loads_spec(BLIND_SPEC, "blind.toml"))


@pytest.fixture(scope="session")
def chromium() -> str:
    return need("chromium")


@pytest.fixture(scope="session")
def pdftoppm() -> str:
    return need("pdftoppm")


@pytest.fixture(scope="session")
def soffice() -> str:
    return need("soffice")


def libreoffice_convert(soffice: str, source: Path, fmt: str, out: Path) -> Path:
    """source converted by headless LibreOffice Calc into out (a fresh profile beside it); the new file's path."""
    import subprocess

    profile = out.parent / f"{out.name}-profile"
    subprocess.run(
        [
            soffice,
            f"-env:UserInstallation={profile.as_uri()}",
            "--headless",
            "--convert-to",
            fmt,
            "--outdir",
            str(out),
            str(source),
        ],
        check=True,
        capture_output=True,
        timeout=180,
    )
    return out / f"{source.stem}.{fmt}"
