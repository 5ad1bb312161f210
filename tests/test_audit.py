"""Tests of causalcheck.audit: headline choice, numbers against statsmodels, simulations."""

from __future__ import annotations

import hashlib
import json
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf

from causalcheck import sensitivity
from causalcheck.audit import audit
from causalcheck.errors import DataError, NumericsError, StudyFileError
from causalcheck.report.jsonout import dumps
from causalcheck.study import parse_study

ROOT = Path(__file__).resolve().parents[1]
WATER = ROOT / "scenarios" / "water_rebate" / "study.toml"


def _study(tmp_path: Path, body: str, frame: pd.DataFrame | None = None,
           name: str = "data.csv"):
    if frame is not None:
        frame.to_csv(tmp_path / name, index=False)
    path = tmp_path / "study.toml"
    path.write_text(body)
    return path


CONFOUNDED = """
[study]
treatment = "t"
outcome = "y"
[data]
path = "data.csv"
[graph]
edges = ["z -> t", "z -> y", "t -> y", "w -> y"]
"""


def _confounded(n: int, seed: int, *, effect: float = 1.0, confounding: float = 1.0):
    rng = np.random.default_rng(seed)
    z = rng.normal(size=n)
    w = rng.normal(size=n)
    t = confounding * z + rng.normal(size=n)
    y = effect * t + 2.0 * z + w + rng.normal(size=n)
    return pd.DataFrame({"t": t, "y": y, "z": z, "w": w})


# -- simulations ------------------------------------------------------------------------------


def test_randomised_treatment_naive_and_adjusted_agree_within_their_intervals(tmp_path):
    # t is assigned at random (no z -> t edge in the data): naive and adjusted both estimate 1
    frame = _confounded(4000, 1, confounding=0.0)
    result = audit(_study(tmp_path, CONFOUNDED, frame))
    naive, adjusted = result.naive, result.adjusted
    assert adjusted is not None and adjusted.set == ("w", "z")      # optimal: z plus w
    # they agree: with t randomised, Var(naive - adjusted) = Var(naive) - Var(adjusted)
    # asymptotically, the adjusted slope being efficient (Hausman 1978, Lemma 2.1 — from
    # memory); a difference beyond 3 of its SDs has probability 0.3%
    spread = math.sqrt(naive.std_error**2 - adjusted.std_error**2)
    assert abs(naive.estimate - adjusted.estimate) < 3 * spread
    assert naive.ci_low <= 1.0 <= naive.ci_high and adjusted.ci_low <= 1.0 <= adjusted.ci_high
    # adjusting for outcome predictors only sharpens the estimate
    assert adjusted.std_error < naive.std_error


def test_confounded_naive_misses_the_truth_and_adjusted_covers_it(tmp_path):
    frame = _confounded(4000, 2)
    result = audit(_study(tmp_path, CONFOUNDED, frame))
    # naive slope = 1 + 2 Cov(t,z)/Var(t) = 1 + 2 * 1/2 = 2 in the population
    assert not result.naive.ci_low <= 1.0 <= result.naive.ci_high
    assert result.naive.estimate == pytest.approx(2.0, abs=0.1)
    assert result.adjusted.ci_low <= 1.0 <= result.adjusted.ci_high
    assert result.adjusted_reason == "optimal"
    # z explains (almost) all of the gap: w is independent of t
    share = result.decomposition.term("z").share
    assert share == pytest.approx(1.0, abs=0.05)


def test_interval_coverage_over_repeated_confounded_studies(tmp_path):
    # 95% intervals of the adjusted slope cover the truth about 95% of the time (binomial SD
    # over 60 studies is 2.8 points; 85% is a loose floor), the naive ones almost never
    covered_adjusted = covered_naive = 0
    for seed in range(60):
        frame = _confounded(300, 100 + seed)
        result = audit(parse_study(CONFOUNDED.replace('[data]\npath = "data.csv"\n', "")),
                       data=frame)
        covered_adjusted += result.adjusted.ci_low <= 1.0 <= result.adjusted.ci_high
        covered_naive += result.naive.ci_low <= 1.0 <= result.naive.ci_high
    assert covered_adjusted >= 51 and covered_naive <= 3


# -- against statsmodels on the scenario data ---------------------------------------------------


@pytest.fixture(scope="module")
def water():
    return audit(WATER)


def test_water_numbers_match_statsmodels_ols_on_the_same_rows(water):
    data = pd.read_csv(WATER.parent / "households.csv")
    used = data.dropna().copy()                       # the audit drops incomplete rows
    assert water.rows.used == len(used) and water.rows.read == len(data)
    naive = smf.ols("water_use_change ~ rebate", used).fit()
    naive_hc1 = smf.ols("water_use_change ~ rebate", used).fit(cov_type="HC1")
    assert water.naive.estimate == pytest.approx(naive.params["rebate"], rel=1e-8)
    assert water.naive.std_error == pytest.approx(naive.bse["rebate"], rel=1e-8)
    assert water.naive.robust_std_error == pytest.approx(naive_hc1.bse["rebate"], rel=1e-8)
    assert water.naive.r2 == pytest.approx(naive.rsquared, rel=1e-8)
    # headline: no valid set (conservation is unmeasured), so the best available set
    assert water.adjusted_reason == "best_available"
    assert water.adjusted.set == ("garden", "household_size", "income", "region",
                                  "tenure_years")
    formula = ("water_use_change ~ rebate + garden + household_size + income + C(region) + "
               "tenure_years")
    adjusted = smf.ols(formula, used).fit()
    robust = smf.ols(formula, used).fit(cov_type="HC1")
    assert water.adjusted.estimate == pytest.approx(adjusted.params["rebate"], rel=1e-8)
    assert water.adjusted.std_error == pytest.approx(adjusted.bse["rebate"], rel=1e-8)
    assert water.adjusted.robust_std_error == pytest.approx(robust.bse["rebate"], rel=1e-8)
    assert water.adjusted.dof == int(adjusted.df_resid)
    assert water.adjusted.r2 == pytest.approx(adjusted.rsquared, rel=1e-8)
    low, high = adjusted.conf_int(alpha=0.05).loc["rebate"]
    assert (water.adjusted.ci_low, water.adjusted.ci_high) == pytest.approx((low, high),
                                                                            rel=1e-8)
    declared = smf.ols("water_use_change ~ rebate + income + household_size + "
                       "efficient_fixtures", used).fit()
    entry = next(s for s in water.by_set if "declared" in s.labels)
    assert entry.valid is False
    assert entry.estimate == pytest.approx(declared.params["rebate"], rel=1e-8)


def test_water_decomposition_sums_to_the_gap_and_region_is_one_term(water):
    parts = water.decomposition
    gap = water.naive.estimate - water.adjusted.estimate
    assert sum(t.contribution for t in parts.terms) == pytest.approx(gap, rel=1e-9)
    assert sum(t.share for t in parts.terms) == pytest.approx(1.0, rel=1e-9)
    region = parts.term("region")
    levels = pd.read_csv(WATER.parent / "households.csv")["region"].nunique()
    assert region.gamma is None and len(region.columns) == levels - 1   # one term, k-1 dummies


def test_water_bad_control_shift_matches_a_refit(water):
    data = pd.read_csv(WATER.parent / "households.csv").dropna()
    (shift,) = water.bad_controls
    assert shift.variable == "efficient_fixtures" and shift.problems == ("mediator",)
    with_it = smf.ols("water_use_change ~ rebate + garden + household_size + income + "
                      "C(region) + tenure_years + efficient_fixtures", data).fit()
    assert shift.estimate_with == pytest.approx(with_it.params["rebate"], rel=1e-8)
    assert shift.shift == pytest.approx(with_it.params["rebate"] - water.adjusted.estimate,
                                        rel=1e-8)


def test_water_sensitivity_numbers(water):
    rv = water.robustness
    t = water.adjusted.estimate / water.adjusted.std_error
    # Cinelli & Hazlett (2020), Sec. 4: partial R2 of the treatment = t^2 / (t^2 + dof)
    assert rv.partial_r2 == pytest.approx(t * t / (t * t + water.adjusted.dof), rel=1e-12)
    # the defining property of the robustness value: a confounder with both partial R2 equal
    # to RV moves the estimate exactly to the threshold (0)
    at_rv = sensitivity.bounds(water.adjusted.estimate, water.adjusted.std_error,
                               water.adjusted.dof, rv.point, rv.point)
    assert float(at_rv.adjusted_estimate) == pytest.approx(0.0, abs=1e-9)
    # benchmarks: garden's partial R2 with the treatment, computed directly with statsmodels
    data = pd.read_csv(WATER.parent / "households.csv").dropna()
    full = smf.ols("rebate ~ garden + household_size + income + C(region) + tenure_years",
                   data).fit().rsquared
    reduced = smf.ols("rebate ~ household_size + income + C(region) + tenure_years",
                      data).fit().rsquared
    garden = [b for b in water.benchmarks if b["benchmark"] == "garden"]
    assert [b["kd"] for b in garden] == [1.0, 2.0, 3.0]
    assert garden[0]["r2dxj"] == pytest.approx((full - reduced) / (1 - reduced), rel=1e-8)


def test_water_document_follows_the_contract(water):
    document = json.loads(dumps(water.to_dict()))
    assert document["schema"] == "causalcheck/audit/1"
    assert set(document["rows"]) >= {"read", "used", "dropped_missing"}
    adjusted = document["estimates"]["adjusted"]
    for key in ("set", "reason", "estimate", "std_error", "robust_std_error", "robust_type",
                "ci_low", "ci_high", "dof", "t", "r2", "standardized"):
        assert key in adjusted, key
    assert adjusted["robust_type"] == "HC1"
    for key in ("estimate", "std_error", "robust_std_error", "ci_low", "ci_high"):
        assert key in document["estimates"]["naive"]
    assert all({"set", "estimate", "std_error"} <= set(s) for s in
               document["estimates"]["by_set"])
    assert all({"variable", "gamma", "delta", "contribution"} <= set(d) for d in
               document["decomposition"])
    assert set(document["sensitivity"]) >= {"partial_r2", "robustness_value",
                                            "robustness_value_ci", "benchmarks"}
    assert all({"left", "right", "given", "statistic", "p_value"} <= set(i) for i in
               document["implications"])
    assert document["identifiable"] is False and document["controls"]["valid"] is False


# -- headline choice ---------------------------------------------------------------------------


HEADLINE = """
[study]
treatment = "t"
outcome = "y"
[variables]
{variables}
[graph]
edges = ["a -> t", "a -> b", "b -> y", "t -> y", "p -> y"]
{controls}
"""


def _chain_frame(n: int = 3000, seed: int = 5) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    a = rng.normal(size=n)
    b = a + rng.normal(size=n)
    p = rng.normal(size=n)
    t = a + rng.normal(size=n)
    y = 0.5 * t + b + p + rng.normal(size=n)
    return pd.DataFrame({"t": t, "y": y, "a": a, "b": b, "p": p})


@pytest.mark.parametrize(("variables", "controls", "reason", "headline"), [
    ("", '[controls]\nused = ["a"]', "declared", ("a",)),
    ("", '[controls]\nused = ["t_copy"]'.replace("t_copy", "p"), "optimal", ("b", "p")),
    ("p = { measured = false }", "", "minimal", ("a",)),
])
def test_headline_set_choice(variables, controls, reason, headline):
    study = parse_study(HEADLINE.format(variables=variables, controls=controls))
    frame = _chain_frame()
    result = audit(study, data=frame)
    assert result.adjusted_reason == reason
    assert result.adjusted.set == headline
    # every minimal set is estimated: {a} and {b}
    estimated = {s.set for s in result.by_set if s.estimate is not None}
    assert {("a",), ("b",)} <= estimated
    document = result.to_dict()
    assert document["estimates"]["adjusted"]["reason"] == reason


def test_not_identifiable_without_optimal_reports_naive_and_declared(tmp_path):
    # u is an unmeasured common cause and nothing measured lies on the back-door path
    study = parse_study("""
[study]
treatment = "t"
outcome = "y"
[variables]
u = { measured = false }
[graph]
edges = ["u -> t", "u -> y", "t -> y", "c -> y"]
[controls]
used = ["c"]
""")
    rng = np.random.default_rng(9)
    u, c = rng.normal(size=(2, 500))
    t = u + rng.normal(size=500)
    frame = pd.DataFrame({"t": t, "y": t + u + c + rng.normal(size=500), "c": c})
    result = audit(study, data=frame)
    assert result.identifiable is False
    # the best available set is {c} (u dropped); it is not valid
    assert result.adjusted_reason == "best_available" and result.adjusted.valid is False
    assert any("not identified by covariate adjustment" in note for note in result.notes)


# -- the open dataset ----------------------------------------------------------------------------


def test_stackloss_audit_matches_textbook_and_statsmodels(tmp_path):
    # Brownlee's stack-loss plant data (statsmodels.datasets.stackloss). Simple slope on air
    # flow 1.0203, adjusted for water temperature and acid concentration 0.7156 (Draper & Smith
    # 1998, Ch. 17 — from memory, four decimals). The graph is our own reading of the plant:
    # cooling-water temperature and acid concentration affect both the air flow set and the loss.
    data = sm.datasets.stackloss.load_pandas().data
    path = _study(tmp_path, """
[study]
treatment = "AIRFLOW"
outcome = "STACKLOSS"
[data]
path = "stackloss.csv"
[graph]
edges = ["WATERTEMP -> AIRFLOW", "WATERTEMP -> STACKLOSS", "ACIDCONC -> AIRFLOW",
         "ACIDCONC -> STACKLOSS", "AIRFLOW -> STACKLOSS"]
[controls]
used = ["WATERTEMP", "ACIDCONC"]
""", data, name="stackloss.csv")
    result = audit(path)
    assert result.naive.estimate == pytest.approx(1.0203, abs=5e-5)
    assert result.adjusted.estimate == pytest.approx(0.7156, abs=5e-5)
    assert result.adjusted_reason == "declared"
    reference = sm.OLS(data.STACKLOSS, sm.add_constant(data[["AIRFLOW", "WATERTEMP",
                                                             "ACIDCONC"]])).fit()
    assert result.adjusted.std_error == pytest.approx(reference.bse["AIRFLOW"], rel=1e-8)
    gap = result.naive.estimate - result.adjusted.estimate
    assert sum(t.contribution for t in result.decomposition.terms) == pytest.approx(gap,
                                                                                 rel=1e-9)


# -- implications against data -------------------------------------------------------------------


def test_contradicted_implication_is_reported(tmp_path):
    # the graph says a _||_ y | t (a acts only through t), but the data have a -> y directly
    rng = np.random.default_rng(11)
    a = rng.normal(size=3000)
    t = a + rng.normal(size=3000)
    y = t + 0.5 * a + rng.normal(size=3000)
    study = parse_study("""
[study]
treatment = "t"
outcome = "y"
[graph]
edges = ["a -> t", "t -> y"]
""")
    result = audit(study, data=pd.DataFrame({"a": a, "t": t, "y": y}))
    (test,) = result.implications
    assert (test.left, test.right, test.given) in {("a", "y", ("t",)), ("y", "a", ("t",))}
    assert test.rejected is True and test.holm_p_value < 1e-6
    assert any("contradict 1 of 1" in note for note in result.notes)


# -- errors ----------------------------------------------------------------------------------------


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_error_no_data_table(tmp_path):
    path = _study(tmp_path, CONFOUNDED.replace('[data]\npath = "data.csv"\n', ""))
    with pytest.raises(DataError, match=r"has no \[data\] table, so there is nothing to "
                                        r"audit; add \[data\] with path"):
        audit(path)


def test_error_missing_column_names_near_match_and_leaves_file_alone(tmp_path):
    frame = _confounded(100, 3).rename(columns={"z": "zz"})
    path = _study(tmp_path, CONFOUNDED, frame)
    before = _digest(tmp_path / "data.csv")
    with pytest.raises(DataError, match=r"has no column 'z' \(did you mean 'zz'\?\)"):
        audit(path)
    assert _digest(tmp_path / "data.csv") == before


def test_error_graph_cycle_is_reported_before_a_data_problem(tmp_path):
    from causalcheck.errors import GraphError

    body = CONFOUNDED.replace('"w -> y"', '"w -> y", "y -> z"').replace("data.csv", "no.csv")
    with pytest.raises(GraphError, match="cycle"):
        audit(_study(tmp_path, body))


def test_error_data_file_not_found(tmp_path):
    path = _study(tmp_path, CONFOUNDED.replace("data.csv", "missing.csv"))
    with pytest.raises(DataError, match=r"'.*missing\.csv' does not exist"):
        audit(path)


def test_error_unmeasured_treatment(tmp_path):
    body = CONFOUNDED.replace("[graph]", '[variables]\nt = { measured = false }\n[graph]')
    with pytest.raises(StudyFileError, match=r"the treatment 't' is marked measured = false"):
        audit(_study(tmp_path, body, _confounded(50, 4)))


def test_error_constant_treatment(tmp_path):
    frame = _confounded(50, 4)
    frame["t"] = 2.0
    with pytest.raises(DataError, match=r"the treatment 't' is constant in data file"):
        audit(_study(tmp_path, CONFOUNDED, frame))


def test_collinear_optimal_set_falls_back_to_a_minimal_set(tmp_path):
    frame = _confounded(200, 6)
    frame["w"] = 3.0 * frame["z"] - 1.0            # w duplicates z: the optimal set is {w, z}
    result = audit(_study(tmp_path, CONFOUNDED, frame))
    assert result.adjusted_reason == "minimal" and result.adjusted.set == ("z",)
    optimal = next(s for s in result.by_set if "optimal" in s.labels)
    assert optimal.estimate is None and "perfectly collinear" in optimal.note
    degenerate = [t for t in result.implications if t.test == "degenerate"]
    assert degenerate and all(t.rejected is None for t in degenerate)


def test_error_every_valid_set_collinear(tmp_path):
    frame = _confounded(200, 6)
    frame["z"] = 2.0 * frame["t"] + 1.0            # z is a copy of the treatment
    with pytest.raises(NumericsError, match=r"no valid adjustment set could be estimated .*"
                                            r"'t', 'z' are perfectly collinear|"
                                            r"'z', 't' are perfectly collinear"):
        audit(_study(tmp_path, CONFOUNDED, frame))


def test_error_non_numeric_value_in_the_file(tmp_path):
    frame = _confounded(30, 7)
    frame["w"] = frame["w"].astype(object)
    frame.loc[12, "w"] = "n.a."
    path = _study(tmp_path, CONFOUNDED, frame)
    with pytest.raises(DataError, match=r"column 'w' in data file '.*data\.csv' is not numeric"
                                        r": data row 13 .* holds 'n\.a\.'"):
        audit(path)


def test_nothing_written_and_numbers_finite(water):
    assert all(math.isfinite(s.estimate) for s in water.by_set if s.estimate is not None)
