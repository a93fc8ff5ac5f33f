"""layout analyze and power against outside references, each named beside its check.

Values to fill workbooks come from the published data sets in tests/reference/.
"""

from __future__ import annotations

import re
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from layout import Plan, loads_spec, make_plan
from layout.cli import main
from layout.intake.check import check_returns
from layout.intake.report import write_report
from layout.outputs.workbook import workbook_bytes
from layout.simulate import Filled, fill_workbook
from layout.stats.analyze import analyze
from layout.stats.anova import anova
from layout.stats.data import load_checked
from layout.stats.power import optimal_subsamples, power_grid, power_of
from tests.published import REFERENCE, cortisol, flatworm_densities, nist_values

NIST = sorted((REFERENCE / "nist_anova").glob("*.dat"))


def _certified(path: Path) -> dict[str, list[float]]:
    """The certified Between and Within lines of a NIST StRD ANOVA file (df, SS, MS[, F])."""
    out = {}
    for line in path.read_text(encoding="utf-8").splitlines():
        m = re.match(r"^(Between|Within) \S+\s+(.*)$", line.strip())
        if m:
            out[m.group(1)] = [float(x) for x in m.group(2).split()]
    return out


def _groups(path: Path) -> list[int]:
    lines = path.read_text(encoding="utf-8").splitlines()
    start = max(i for i, line in enumerate(lines) if line.startswith("Data:"))
    return [int(p[0]) for p in (line.split() for line in lines[start + 1 :]) if len(p) == 2]


def _pipeline(spec: str, fill: dict, tmp: Path, accept: bool = False) -> tuple[Plan, dict]:
    """plan → entry.xlsx → filled copy → check → analyze, as a user runs them."""
    plan = make_plan(loads_spec(spec, "spec.toml"))
    tmp.mkdir(parents=True, exist_ok=True)
    blank = tmp / "entry.xlsx"
    blank.write_bytes(workbook_bytes(plan))
    filled = fill_workbook(plan, blank, tmp / "filled.xlsx", fill(plan))
    result = check_returns(plan, [filled])
    write_report(plan, result, tmp / "checked")
    checked = load_checked(plan, tmp / "checked", accept_errors=accept)
    return plan, analyze(plan, checked.tidy, checked.accepted)


class TestNist:
    @pytest.mark.parametrize("path", NIST, ids=lambda p: p.stem)
    def test_certified_anova(self, path: Path, tmp_path: Path) -> None:
        """NIST StRD one-way ANOVA (certified values in each file's header) through plan, sheets, fill, check, analyze,
        one subsample per unit. SmLs07-09 carry 13 constant digits that a spreadsheet cell (float64) cannot hold
        (shared/reference/SOURCES.md, precision note): there the values as stored are compared with scipy's f_oneway."""
        values, groups = nist_values(path.stem), _groups(path)
        k = max(groups)
        n = len(values) // k
        spec = (
            f'[study]\nid = "NS1"\ntitle = "{path.stem}"\nseed = 1\n[design]\ntype = "crd"\nreplicates = {n}\n'
            f"treatments = [{', '.join(f'{chr(34)}g{i}{chr(34)}' for i in range(1, k + 1))}]\n"
            '[[response]]\nname = "y"\nkind = "number"\n'
        )
        by_group = {g: [v for v, gg in zip(values, groups, strict=True) if gg == g] for g in range(1, k + 1)}

        def fill(plan: Plan) -> dict:
            return {
                (s.code, "1"): Filled(
                    {
                        "y": by_group[int(plan.unit_by_code[s.unit].treatment[1:])][
                            plan.unit_by_code[s.unit].replicate - 1
                        ]
                    },
                    None,
                )
                for s in plan.slots
            }

        _, result = _pipeline(spec, fill, tmp_path)
        (r,) = result["results"]
        table = {row["source"]: row for row in r["table"]}
        between, within = _certified(path)["Between"], _certified(path)["Within"]
        if path.stem in ("SmLs07", "SmLs08", "SmLs09"):
            f = stats.f_oneway(*by_group.values()).statistic  # scipy on the same float64 values
            assert table["treatment"]["f"] == pytest.approx(f, rel=1e-6)
            assert table["treatment"]["f"] == pytest.approx(between[3], rel=5e-2)
            return
        assert table["treatment"]["df"] == between[0] and table["experimental error"]["df"] == within[0]
        assert table["treatment"]["ss"] == pytest.approx(between[1], rel=1e-9)
        assert table["treatment"]["ms"] == pytest.approx(between[2], rel=1e-9)
        assert table["treatment"]["f"] == pytest.approx(between[3], rel=1e-9)
        assert table["experimental error"]["ss"] == pytest.approx(within[1], rel=1e-9)
        assert table["experimental error"]["ms"] == pytest.approx(within[2], rel=1e-9)


FLATWORM_SPEC = """
[study]
id = "FW9"
title = "Flatworms"
seed = 3
[design]
type = "crd"
replicates = 3
subsamples = 6
treatments = ["summer", "winter"]
[[response]]
name = "density"
kind = "number"
"""


class TestPublishedNested:
    def test_flatworms(self, tmp_path: Path) -> None:
        """Quinn & Keough (2002) via the lab page's aov(Density ~ Season + Error(Site)): Season 1, 36.81, F 3.918,
        p 0.119; Site 4, 37.58, 9.40; Within 30, 203.9, 6.798 (shared/reference/SOURCES.md, 2b)."""
        d = flatworm_densities()

        def fill(plan: Plan) -> dict:
            return {
                (s.code, "1"): Filled(
                    {
                        "density": d[
                            (plan.unit_by_code[s.unit].treatment, plan.unit_by_code[s.unit].replicate, s.subsample)
                        ]
                    },
                    None,
                )
                for s in plan.slots
            }

        _, result = _pipeline(FLATWORM_SPEC, fill, tmp_path)
        t = {row["source"]: row for row in result["results"][0]["table"]}
        assert (t["treatment"]["df"], t["experimental error"]["df"], t["sampling error"]["df"]) == (1, 4, 30)
        assert t["treatment"]["ss"] == pytest.approx(36.81002, abs=5e-6)
        assert t["experimental error"]["ss"] == pytest.approx(37.58301, abs=5e-6)
        assert t["sampling error"]["ss"] == pytest.approx(203.92685, abs=5e-6)
        assert round(t["treatment"]["f"], 3) == 3.918 and round(t["treatment"]["p"], 3) == 0.119
        assert t["treatment"]["error_term"] == "experimental error"
        # tidy.csv edited by hand, with text in the number column: read as text and coerced, not refused
        path = tmp_path / "checked" / "tidy.csv"
        edited = pd.read_csv(path, dtype=str, keep_default_na=False)
        edited.loc[0, "density"] = "n/a"
        edited.to_csv(path, index=False)
        plan = make_plan(loads_spec(FLATWORM_SPEC, "spec.toml"))
        (again,) = analyze(plan, load_checked(plan, tmp_path / "checked").tidy)["results"]
        assert again["method"] == "unit-means" and again["table"][0]["df"] == 1

    def test_cortisol(self, tmp_path: Path) -> None:
        """Doncaster & Davey (2007) model 2.1(i): A 1, 177.13, F 8.64, P 0.026; B(A) 6, 122.99, 20.50, F 3.78,
        P 0.016; error 16, 86.79, 5.42 (shared/reference/SOURCES.md, 2c)."""
        c = cortisol()
        spec = FLATWORM_SPEC.replace("replicates = 3", "replicates = 4").replace("subsamples = 6", "subsamples = 3")
        spec = spec.replace('["summer", "winter"]', '["even", "patchy"]').replace("density", "cortisol")

        def fill(plan: Plan) -> dict:
            food = {"even": 1, "patchy": 2}
            return {
                (s.code, "1"): Filled(
                    {
                        "cortisol": c[
                            (
                                food[plan.unit_by_code[s.unit].treatment],
                                plan.unit_by_code[s.unit].replicate,
                                s.subsample,
                            )
                        ]
                    },
                    None,
                )
                for s in plan.slots
            }

        _, result = _pipeline(spec, fill, tmp_path)
        t = {row["source"]: row for row in result["results"][0]["table"]}
        assert round(t["treatment"]["ss"], 2) == 177.13 and round(t["treatment"]["f"], 2) == 8.64
        assert round(t["treatment"]["p"], 3) == 0.026
        assert t["experimental error"]["df"] == 6 and round(t["experimental error"]["ms"], 2) == 20.50
        assert round(t["experimental error"]["f"], 2) == 3.78 and round(t["experimental error"]["p"], 3) == 0.016
        assert t["sampling error"]["df"] == 16 and round(t["sampling error"]["ss"], 2) == 86.79
        assert round(t["total"]["ss"], 2) == 386.90


def _design_data(design: str) -> tuple[Plan, list, list[np.ndarray]]:
    """A design with subsampling filled with NIST SmLs02's published values (structure-free numbers)."""
    designs = {
        "rcbd": 'type = "rcbd"\nblocks = 4\nsubsamples = 3\ntreatments = ["a", "b", "c"]',
        "latin": 'type = "latin-square"\nsubsamples = 2\ntreatments = ["a", "b", "c", "d"]',
        "crd": 'type = "crd"\nreplicates = 4\nsubsamples = 2\ntreatments = ["a", "b", "c"]',
        "factorial": (
            'type = "crd"\nreplicates = 3\nsubsamples = 2\n[[factor]]\nname = "p"\nlevels = ["p1", "p2"]\n'
            '[[factor]]\nname = "q"\nlevels = ["q1", "q2", "q3"]'
        ),
        "split": (
            'type = "split-plot"\nblocks = 3\nsubsamples = 2\n[[factor]]\nname = "w"\nlevels = ["w1", "w2"]\nwhole_plot = true\n'
            '[[factor]]\nname = "v"\nlevels = ["v1", "v2", "v3"]'
        ),
    }
    plan = make_plan(
        loads_spec(
            f'[study]\nid = "SM1"\ntitle = "t"\nseed = 5\n[design]\n{designs[design]}\n[[response]]\nname = "y"\nkind = "number"\n',
            "s.toml",
        )
    )
    raw = iter(nist_values("SiRstv") + nist_values("SmLs02"))
    # the crds lose their first two units: unequal replication, so cells hold different numbers of units
    units = list(plan.units)[2:] if design in ("crd", "factorial") else list(plan.units)
    values = [np.array([next(raw) * (1 + 0.01 * units.index(u)) for _ in plan.slots_of[u.code]]) for u in units]
    return plan, units, values


class TestAgainstStatsmodels:
    @pytest.mark.parametrize("design", ["rcbd", "latin", "split", "crd", "factorial"])
    def test_type_one_sums_of_squares(self, design: str) -> None:
        """statsmodels OLS with type-I sums of squares agrees to 1e-8: the design's terms fitted to the unit means
        (times s; their residual is the experimental error), the sampling error as the residual of y ~ C(unit).
        The crds have unequal replication, so the fit on weighted cell means is checked where cells differ."""
        import statsmodels.formula.api as smf
        from statsmodels.stats.anova import anova_lm

        plan, units, values = _design_data(design)
        s = len(values[0])
        unit_rows = [
            {
                "y": float(np.mean(v)),
                "block": str(u.block),
                "row": str(u.row),
                "col": str(u.col),
                "treatment": u.treatment,
                **u.levels,
            }
            for u, v in zip(units, values, strict=True)
        ]
        formula = {
            "rcbd": "y ~ C(block) + C(treatment)",
            "latin": "y ~ C(row) + C(col) + C(treatment)",
            "split": "y ~ C(block) + C(w) + C(block):C(w) + C(v) + C(w):C(v)",
            "crd": "y ~ C(treatment)",
            "factorial": "y ~ C(p) + C(q) + C(p):C(q)",
        }[design]
        ref = anova_lm(smf.ols(formula, pd.DataFrame(unit_rows)).fit(), typ=1)
        obs = pd.DataFrame([{"y": x, "unit": u.code} for u, v in zip(units, values, strict=True) for x in v])
        sampling = smf.ols("y ~ C(unit)", obs).fit()
        ours = {r.source: r for r in anova(plan, units, values).rows}
        names = {
            "rcbd": {"C(block)": "block", "C(treatment)": "treatment", "Residual": "experimental error"},
            "latin": {
                "C(row)": "row",
                "C(col)": "column",
                "C(treatment)": "treatment",
                "Residual": "experimental error",
            },
            "split": {
                "C(block)": "block",
                "C(w)": "w",
                "C(block):C(w)": "whole-plot error",
                "C(v)": "v",
                "C(w):C(v)": "w:v",
                "Residual": "sub-plot error",
            },
            "crd": {"C(treatment)": "treatment", "Residual": "experimental error"},
            "factorial": {"C(p)": "p", "C(q)": "q", "C(p):C(q)": "p:q", "Residual": "experimental error"},
        }[design]
        for theirs, mine in names.items():
            assert ours[mine].df == ref.loc[theirs, "df"], mine
            assert ours[mine].ss == pytest.approx(s * ref.loc[theirs, "sum_sq"], rel=1e-8), mine
        assert ours["sampling error"].df == sampling.df_resid
        assert ours["sampling error"].ss == pytest.approx(sampling.ssr, rel=1e-8)

    def test_split_plot_error_terms(self) -> None:
        """Split-plot: the whole-plot factor is tested against the whole-plot error, the sub-plot factor and the
        interaction against the sub-plot error (the design's definition)."""
        plan, units, values = _design_data("split")
        rows = {r.source: r for r in anova(plan, units, values).rows}
        assert rows["w"].error == "whole-plot error" and rows["block"].error == "whole-plot error"
        assert rows["v"].error == "sub-plot error" and rows["w:v"].error == "sub-plot error"

    def test_reml_equals_anova_estimates_when_balanced(self) -> None:
        """statsmodels MixedLM (REML) on a balanced crd with subsampling (the cortisol data, Doncaster & Davey 2007)
        gives the ANOVA variance components, as REML does for balanced data with positive estimates."""
        import statsmodels.formula.api as smf

        from layout.stats.components import components

        spec = FLATWORM_SPEC.replace("replicates = 3", "replicates = 4").replace("subsamples = 6", "subsamples = 3")
        plan = make_plan(loads_spec(spec.replace('["summer", "winter"]', '["even", "patchy"]'), "s.toml"))
        c = cortisol()
        food = {"even": 1, "patchy": 2}
        units = list(plan.units)
        values = [np.array([c[(food[u.treatment], u.replicate, k)] for k in range(1, 4)]) for u in units]
        comp = components(anova(plan, units, values))
        frame = pd.DataFrame(
            [{"y": x, "unit": u.code, "t": u.treatment} for u, v in zip(units, values, strict=True) for x in v]
        )
        fit = smf.mixedlm("y ~ C(t)", frame, groups=frame["unit"]).fit(reml=True)
        assert float(fit.scale) == pytest.approx(comp["subsample"]["estimate"], rel=1e-4)
        assert float(fit.cov_re.iloc[0, 0]) == pytest.approx(comp["unit"]["estimate"], rel=1e-3)


class TestRefusals:
    def test_errors_refused_unless_accepted(self, tmp_path: Path) -> None:
        """A check with errors stops analyze with exit 1; --accept-errors analyses and says so in every output."""
        d = flatworm_densities()

        def fill(plan: Plan) -> dict:
            out = {
                (s.code, "1"): Filled(
                    {
                        "density": d[
                            (plan.unit_by_code[s.unit].treatment, plan.unit_by_code[s.unit].replicate, s.subsample)
                        ]
                    },
                    None,
                )
                for s in plan.slots
            }
            out.pop(next(iter(out)))  # one value left blank without a reason: an error
            return out

        with pytest.raises(Exception) as caught:
            _pipeline(FLATWORM_SPEC, fill, tmp_path / "a")
        assert getattr(caught.value, "exit_code", None) == 1
        plan, result = _pipeline(FLATWORM_SPEC, fill, tmp_path / "b", accept=True)
        assert result["accepted"] and "error" in result["accepted"][0]
        plan.save(tmp_path / "b" / "plan.json")
        assert main(["analyze", str(tmp_path / "b" / "plan.json"), str(tmp_path / "b" / "checked")]) == 1
        assert (
            main(["analyze", str(tmp_path / "b" / "plan.json"), str(tmp_path / "b" / "checked"), "--accept-errors"])
            == 0
        )
        assert "Analysed although" in (tmp_path / "b" / "checked" / "analysis.html").read_text(encoding="utf-8")


class TestPower:
    def test_matches_statsmodels_anova_power(self) -> None:
        """With σ²(sub) = 0 and one subsample the power is statsmodels' FTestAnovaPower for effect size
        f = √(Σα²/t)/σ (Cohen's f), nobs = t·n."""
        from statsmodels.stats.power import FTestAnovaPower

        t, n, sigma2, d = 4, 6, 2.0, 3.0
        f = np.sqrt((d**2 / 2) / t / sigma2)
        ref = FTestAnovaPower().power(effect_size=f, nobs=t * n, alpha=0.05, k_groups=t)
        assert power_of(t, n, 1, sigma2, 0.0, d, 0.05) == pytest.approx(ref, rel=1e-6)

    def test_noncentral_f_by_hand(self) -> None:
        """The power is scipy's noncentral F beyond the central F's 95% point, with λ = n·(D²/2)/(σ²u + σ²s/s)."""
        t, n, s, vu, vs, d = 3, 5, 4, 1.5, 6.0, 2.5
        lam = n * (d**2 / 2) / (vu + vs / s)
        crit = stats.f.isf(0.05, t - 1, t * (n - 1))
        assert power_of(t, n, s, vu, vs, d, 0.05) == pytest.approx(
            stats.ncf.sf(crit, t - 1, t * (n - 1), lam), rel=1e-12
        )

    def test_optimum_allocation_against_brute_force(self) -> None:
        """s* minimises Var(treatment mean) = σ²u/n + σ²s/(n·s) at a fixed cost n·(cu + s·cs): a search over
        (n, s) on a fine grid at the same cost lands next to s*."""
        vu, vs, cu, cs = 1.2, 7.5, 30.0, 2.0
        best = optimal_subsamples(vu, vs, cu, cs)
        budget = 1000.0
        grid = np.linspace(0.2, 40, 20000)
        var = [(vu + vs / s) * (cu + s * cs) / budget for s in grid]  # n = budget / (cu + s·cs)
        assert best == pytest.approx(grid[int(np.argmin(var))], rel=1e-2)

    def test_more_units_beat_more_subsamples(self) -> None:
        """Doubling units raises power more than doubling subsamples (σ²(unit) cannot be averaged away within units)."""
        g = power_grid(4, 2.0, 4.0, 3.0)
        p = {(x["units"], x["subsamples"]): x["power"] for x in g["grid"]}
        assert p[(8, 2)] > p[(4, 4)]

    def test_json_output(self, capsys: pytest.CaptureFixture[str]) -> None:
        """power --json prints the grid, the recommendation and s*."""
        import json

        assert (
            main(
                [
                    "power",
                    "--treatments",
                    "4",
                    "--var-unit",
                    "2",
                    "--var-sub",
                    "5",
                    "--difference",
                    "3",
                    "--cost-unit",
                    "40",
                    "--cost-sub",
                    "5",
                    "--json",
                ]
            )
            == 0
        )
        data = json.loads(capsys.readouterr().out)
        assert {"grid", "recommended", "optimal_subsamples"} <= set(data)
        assert data["recommended"]["power"] >= 0.8


class TestMethods:
    def _tidy(self, plan: Plan, drop_slots: int = 0, drop_units: int = 0) -> pd.DataFrame:
        d = flatworm_densities()
        rows = []
        dropped_units = {u.code for u in plan.units[:drop_units]}
        for k, s in enumerate(plan.slots):
            u = plan.unit_by_code[s.unit]
            if u.code in dropped_units or (k < drop_slots * 6 and s.subsample == 6):
                continue
            rows.append(
                {
                    "code": s.code,
                    "unit": u.code,
                    "round": "1",
                    "status": "ok",
                    "density": d[(u.treatment, u.replicate, s.subsample)],
                }
            )
        return pd.DataFrame(rows)

    def test_unequal_subsamples_analysed_on_unit_means(self) -> None:
        """With a subsample lost in some units (every unit present), the analysis is on the unit means and says so;
        its F equals a one-way ANOVA of the unit means by scipy."""
        plan = make_plan(loads_spec(FLATWORM_SPEC, "s.toml"))
        tidy = self._tidy(plan, drop_slots=2)
        (r,) = analyze(plan, tidy)["results"]
        assert r["method"] == "unit-means" and any("unit means" in n for n in r["notes"])
        means: dict[str, list[float]] = {}
        for unit, group in tidy.groupby("unit"):
            means.setdefault(plan.unit_by_code[unit].treatment, []).append(group["density"].mean())
        ref = stats.f_oneway(*means.values())
        assert r["table"][0]["f"] == pytest.approx(ref.statistic, rel=1e-10)

    def test_a_subsample_lost_in_every_unit_is_said_as_such(self) -> None:
        """Every unit without its sixth subsample: the unit means are analysed (not every planned subsample has a
        value), and the note does not claim unequal numbers, since every unit has five."""
        plan = make_plan(loads_spec(FLATWORM_SPEC, "s.toml"))
        (r,) = analyze(plan, self._tidy(plan, drop_slots=len(plan.units)))["results"]
        assert r["method"] == "unit-means"
        assert any("the same number in every unit" in n for n in r["notes"])
        assert not any("unequal numbers" in n for n in r["notes"])

    def test_planned_counts_from_the_table_or_the_plan(self) -> None:
        """tidy.csv has a row for every planned slot, so the slots per unit are counted there; a table with rows
        deleted by hand is counted from the plan instead. Either way a lost subsample is seen as lost."""
        plan = make_plan(loads_spec(FLATWORM_SPEC, "s.toml"))
        dropped = self._tidy(plan, drop_slots=2)
        blanked = self._tidy(plan)
        blanked.loc[~blanked["code"].isin(dropped["code"]), "density"] = np.nan
        assert len(blanked) == len(plan.slots) > len(dropped)
        assert analyze(plan, blanked) == analyze(plan, dropped)
        (r,) = analyze(plan, dropped)["results"]
        assert r["method"] == "unit-means"

    def test_missing_units_by_reml(self) -> None:
        """With a whole unit missing, REML through statsmodels is used and named."""
        plan = make_plan(loads_spec(FLATWORM_SPEC.replace("replicates = 3", "replicates = 3"), "s.toml"))
        with warnings.catch_warnings():
            warnings.simplefilter("error")  # statsmodels' warnings go into the notes, none to the terminal
            (r,) = analyze(plan, self._tidy(plan, drop_units=1))["results"]
        assert r["method"] == "reml" and any("REML" in n for n in r["notes"])
        assert r["components"]["subsample"]["estimate"] > 0
        # with this table statsmodels 0.14-0.15 retries its optimiser (seen in the test logs before this change)
        assert any(n.startswith("statsmodels warned: ") for n in r["notes"])

    def test_category_counts_units_not_subsamples(self) -> None:
        """A category response is counted once per unit (its commonest level) and tested on those counts."""
        spec = FLATWORM_SPEC + '[[response]]\nname = "cover"\nkind = "category"\nlevels = ["bare", "algae"]\n'
        plan = make_plan(loads_spec(spec, "s.toml"))
        tidy = self._tidy(plan)
        tidy["cover"] = ["algae" if x > 1 else "bare" for x in tidy["density"]]
        cat = next(r for r in analyze(plan, tidy)["results"] if r["response"] == "cover")
        assert cat["method"] == "counts" and sum(map(sum, cat["counts"]["table"])) == len(plan.units)
        assert "test" in cat and 0 <= cat["test"]["p"] <= 1


class TestBadInput:
    @pytest.mark.parametrize(
        "args",
        [
            ["power", "--treatments", "4", "--var-unit", "0", "--var-sub", "0", "--difference", "2"],
            ["power", "--treatments", "4", "--var-unit", "1", "--var-sub", "1", "--difference", "2", "--alpha", "2"],
            ["power", "--treatments", "4", "--var-unit", "1", "--var-sub", "1", "--difference", "2", "--target", "0"],
            ["power", "--treatments", "4", "--var-unit", "-1", "--var-sub", "1", "--difference", "2"],
        ],
    )
    def test_power_refuses_with_a_message(self, args: list[str], capsys: pytest.CaptureFixture[str]) -> None:
        """Impossible power inputs exit 2 with one line naming the option, never a traceback."""
        assert main(args) == 2
        err = capsys.readouterr().err
        assert err.startswith("error: --") and "Traceback" not in err

    def test_analyze_refuses_a_file_that_is_no_tidy_table(
        self, tmp_path: Path, capsys: pytest.CaptureFixture[str]
    ) -> None:
        """Given a workbook instead of tidy.csv, analyze says what it needs and exits 2."""
        plan = _saved_plan(tmp_path)
        book = tmp_path / "entry.xlsx"
        book.write_bytes(workbook_bytes(plan))
        assert main(["analyze", str(tmp_path / "plan.json"), str(book)]) == 2
        assert "is not a tidy table" in capsys.readouterr().err

    def test_analyze_refuses_a_tidy_table_without_a_response_column(
        self, tmp_path: Path, capsys: pytest.CaptureFixture[str]
    ) -> None:
        """A tidy.csv cut down by hand (the response column gone): one line naming the column, exit 2."""
        import json

        plan = _saved_plan(tmp_path)
        folder = tmp_path / "checked"
        folder.mkdir()
        report = {"summary": {"plan": plan.fingerprint, "by_severity": {"error": 0}}}
        (folder / "report.json").write_text(json.dumps(report), encoding="utf-8")
        (folder / "tidy.csv").write_text(f"code,unit,round,status\n{plan.slots[0].code},x,1,ok\n", encoding="utf-8")
        assert main(["analyze", str(tmp_path / "plan.json"), str(folder)]) == 2
        err = capsys.readouterr().err.strip()
        assert "'density'" in err and "tidy.csv" in err and "\n" not in err and "Traceback" not in err


@pytest.mark.parametrize("k", [2, 3, 5, 10, 20, 40])
def test_studentized_range_at_infinite_df_agrees_with_scipy(k: int) -> None:
    """Our one-integral studentized range at infinite df (used from 10,000 error df on) against
    scipy.stats.studentized_range, the reference library, at df = inf."""
    from layout.stats.compare import range_ppf_inf, range_sf_inf

    q = np.array([0.05, 0.5, 1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 8.0])
    assert np.allclose(range_sf_inf(q, k), stats.studentized_range.sf(q, k, np.inf), rtol=0, atol=1e-12)
    assert range_ppf_inf(0.95, k) == pytest.approx(stats.studentized_range.ppf(0.95, k, np.inf), abs=1e-9)


def test_studentized_range_table_value() -> None:
    """q(0.05; 3 means, infinite df) = 3.314, the last row of the usual tables of the studentized range
    (the value is from memory of those tables)."""
    from layout.stats.compare import range_ppf_inf

    assert range_ppf_inf(0.95, 3) == pytest.approx(3.314, abs=5e-4)


@pytest.mark.parametrize("design", ["crd", "rcbd"])
def test_power_grid_equals_power_of_cell_by_cell(design: str) -> None:
    """The grid, computed with one scipy call per function, holds exactly power_of of each cell (nan where no df)."""
    grid = power_grid(4, 2.0, 3.0, 1.5, units=range(1, 6), subsamples=range(1, 4), design=design)["grid"]
    for cell in grid:
        want = power_of(4, cell["units"], cell["subsamples"], 2.0, 3.0, 1.5, 0.05, design)
        assert cell["power"] == want or (np.isnan(want) and np.isnan(cell["power"]))


def _saved_plan(folder: Path) -> Plan:
    """The flatworm study's plan, saved as folder/plan.json."""
    plan = make_plan(loads_spec(FLATWORM_SPEC, "s.toml"))
    plan.save(folder / "plan.json")
    return plan
