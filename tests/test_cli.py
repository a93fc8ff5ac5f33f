"""The layout command: exit codes, messages without tracebacks, integrity of outputs."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from layout import load_plan
from layout.cli import main

HERE = Path(__file__).parent
INVALID = sorted(p for p in (HERE / "specs" / "invalid").iterdir() if p.suffix in (".toml", ".json"))
EXAMPLE = HERE / "specs" / "valid" / "greenhouse-biochar-crd.toml"


def run(*args: str, cwd: Path | None = None) -> subprocess.CompletedProcess[str]:
    """The command as a user runs it, in a fresh process."""
    env = {**os.environ, "COLUMNS": "200"}
    return subprocess.run([sys.executable, "-m", "layout", *args], capture_output=True, text=True, cwd=cwd, env=env)


class TestHelp:
    @pytest.mark.parametrize("args", [["--help"], ["plan", "--help"], ["demo", "--help"]])
    def test_help_has_an_example(self, args: list[str]) -> None:
        """Every command's help runs and shows an example."""
        result = run(*args)
        assert result.returncode == 0 and "example" in result.stdout


class TestPlanCommand:
    @pytest.mark.parametrize("path", INVALID, ids=lambda p: p.name)
    def test_bad_spec_exits_2_with_its_messages(
        self, path: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
    ) -> None:
        """Every invalid spec exits 2 and prints exactly its messages, no traceback, no plan."""
        expected = (path.parent / f"{path.name}.expected").read_text(encoding="utf-8").strip().splitlines()
        code = main(["plan", str(path), "-o", str(tmp_path / "plan.json")])
        err = capsys.readouterr().err
        assert code == 2
        assert "Traceback" not in err
        prefix = str(path.parent) + os.sep
        assert [line.removeprefix("error: ").replace(prefix, "") for line in err.strip().splitlines()] == expected
        assert not (tmp_path / "plan.json").exists()

    def test_writes_plan_and_summary(self, tmp_path: Path) -> None:
        """A good spec writes the plan and prints seed, fingerprint and counts."""
        result = run("plan", str(EXAMPLE), "-o", str(tmp_path / "p.json"))
        assert result.returncode == 0, result.stderr
        plan = load_plan(tmp_path / "p.json")
        assert str(plan.seed) in result.stdout and plan.fingerprint in result.stdout
        assert "20 pots × 3 seedlings = 60 slots" in result.stdout

    def test_refuses_to_overwrite(self, tmp_path: Path) -> None:
        """An existing plan is kept unless --force is given."""
        target = tmp_path / "plan.json"
        assert run("plan", str(EXAMPLE), "-o", str(target), "--seed", "1").returncode == 0
        before = target.read_bytes()
        result = run("plan", str(EXAMPLE), "-o", str(target), "--seed", "2")
        assert result.returncode == 2 and "already exists" in result.stderr and "Traceback" not in result.stderr
        assert target.read_bytes() == before
        assert run("plan", str(EXAMPLE), "-o", str(target), "--seed", "2", "--force").returncode == 0
        assert load_plan(target).seed == 2

    def test_seed_drawn_and_printed(self, tmp_path: Path) -> None:
        """Without a seed anywhere, one is drawn from the OS, printed and recorded."""
        spec = tmp_path / "s.toml"
        spec.write_text(EXAMPLE.read_text().replace("seed = 4817\n", ""))
        result = run("plan", str(spec), "-o", str(tmp_path / "p.json"))
        assert result.returncode == 0, result.stderr
        seed = load_plan(tmp_path / "p.json").seed
        assert f"drew {seed}" in result.stdout

    def test_seed_option_overrides(self, tmp_path: Path) -> None:
        """--seed replaces the spec's seed in the plan."""
        assert run("plan", str(EXAMPLE), "-o", str(tmp_path / "p.json"), "--seed", "123").returncode == 0
        data = json.loads((tmp_path / "p.json").read_text())
        assert data["seed"] == 123 and data["spec"]["study"]["seed"] == 123

    @pytest.mark.parametrize("bad", ["-1", "abc", str(2**64)])
    def test_bad_seed_option(self, bad: str, tmp_path: Path) -> None:
        """A seed that is not a whole number in range is a usage error, exit 2."""
        result = run("plan", str(EXAMPLE), "-o", str(tmp_path / "p.json"), "--seed", bad)
        assert result.returncode == 2 and "Traceback" not in result.stderr

    def test_missing_spec_file(self, tmp_path: Path) -> None:
        """A spec path that does not exist is one line and exit 2."""
        result = run("plan", str(tmp_path / "nope.toml"))
        assert result.returncode == 2
        assert result.stderr.strip() == f"error: {tmp_path / 'nope.toml'}: no such file"


class TestDemo:
    def test_demo_writes_a_loadable_plan(self, tmp_path: Path) -> None:
        """layout demo writes its spec and a valid plan into the folder."""
        result = run("demo", str(tmp_path / "d"))
        assert result.returncode == 0, result.stderr
        assert (tmp_path / "d" / "spec.toml").exists()
        assert len(load_plan(tmp_path / "d" / "plan.json").slots) == 60
        made = {p.name for p in (tmp_path / "d").iterdir()}
        assert {
            "entry.xlsx",
            "sheets.html",
            "labels.html",
            "unit-labels.html",
            "map.html",
            "map-key.html",
            "key.csv",
        } <= made
        assert {"sheets.pdf", "labels.pdf", "unit-labels.pdf"} <= made  # the test extra installs WeasyPrint
        # the fixes round trip: proposals from the first check, signed fixes, a clean check with them
        assert (tmp_path / "d" / "checked" / "fixes-proposed.csv").exists()
        assert (tmp_path / "d" / "returns" / "fixes-approved.csv").exists()
        fixed = json.loads((tmp_path / "d" / "analysis" / "report.json").read_text(encoding="utf-8"))
        assert fixed["summary"]["by_severity"]["error"] == 0
        assert {f["action"] for f in fixed["fixes"]} == {"recode", "keep-this"}
        first = json.loads((tmp_path / "d" / "checked" / "report.json").read_text(encoding="utf-8"))
        assert first["summary"]["by_severity"]["error"] == 2

    def test_demo_twice_needs_force(self, tmp_path: Path) -> None:
        """Running the demo again into the same folder keeps what is there unless --force."""
        assert run("demo", str(tmp_path)).returncode == 0
        again = run("demo", str(tmp_path))
        assert again.returncode == 2 and "already exists" in again.stderr
        assert run("demo", str(tmp_path), "--force").returncode == 0
