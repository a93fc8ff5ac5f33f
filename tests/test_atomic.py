"""Outputs are written under a temporary name and renamed into place: a killed run leaves no half file."""

from __future__ import annotations

import hashlib
import os
import signal
import subprocess
import sys
import time
import zipfile
from pathlib import Path

from layout import loads_spec, make_plan

SPEC = """
[study]
id = "AT1"
title = "Killed mid-run"
seed = 9
[design]
type = "crd"
replicates = 60
subsamples = 4
treatments = ["a", "b", "c", "d", "e"]
[[response]]
name = "y"
kind = "number"
[[response]]
name = "state"
kind = "category"
levels = ["ok", "poor"]
[collection]
rounds = ["r1", "r2"]
"""


def complete(path: Path) -> bool:
    """Whether a file under a final name is whole: a workbook's zip tests clean, a page ends its HTML."""
    if path.suffix == ".xlsx":
        with zipfile.ZipFile(path) as z:
            return z.testzip() is None
    if path.suffix == ".html":
        return path.read_text(encoding="utf-8").rstrip().endswith("</html>")
    return path.stat().st_size > 0


def digests(folder: Path) -> dict[str, str]:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in folder.iterdir() if not p.name.startswith(".")}


def test_sigkill_leaves_old_or_new_files_never_half(tmp_path: Path) -> None:
    """layout sheets --force killed with SIGKILL at several moments: every file under a final name is the
    earlier run's or a complete new one, and nothing of the earlier run is lost."""
    make_plan(loads_spec(SPEC, "at.toml")).save(tmp_path / "plan.json")
    out = tmp_path / "out"
    cmd = [sys.executable, "-m", "layout", "sheets", str(tmp_path / "plan.json"), "-o", str(out)]
    subprocess.run(cmd, check=True, capture_output=True)
    earlier = digests(out)
    assert {"entry.xlsx", "sheets.html", "labels.html", "key.csv"} <= set(earlier)
    outcomes = set()
    for delay in (0.4, 0.9, 1.6, 2.5):
        run = subprocess.Popen(
            [*cmd, "--force", "--paper", "letter"], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL
        )
        time.sleep(delay)
        os.kill(run.pid, signal.SIGKILL)
        run.wait()
        now = digests(out)
        assert set(now) == set(earlier), "a file of the earlier run disappeared, or a stray one appeared"
        for name in now:
            assert complete(out / name), f"{name} is half written after a kill at {delay} s"
        outcomes.add(tuple(sorted(n for n in now if now[n] != earlier[n])))
        earlier = now
    # the kills fell at different points: some files were already replaced, others not yet
    assert len(outcomes) > 1 or outcomes != {()}
