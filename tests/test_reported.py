"""Tests of causalcheck.reported: a published table to a Summary, checks and bad input.

The conversions (interval, t, p-value to a standard error) are checked against statsmodels OLS
output on simulated data: its coefficient, interval, t and p-value must give back its own SE.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from causalcheck.errors import ReportedError
from causalcheck.reported import apply_overrides, summarize
from causalcheck.study import Reported, parse_study


@pytest.fixture(scope="module")
def ols():
    rng = np.random.default_rng(3)
    n = 120
    x = rng.normal(size=(n, 3))
    y = 0.4 * x[:, 0] + x[:, 1:] @ [0.3, -0.2] + rng.normal(size=n)
    return sm.OLS(y, sm.add_constant(x)).fit()


def test_standard_error_from_each_source_matches_statsmodels(ols):
    # statsmodels OLS: estimate, its 95% interval (t quantile at df_resid), t and p-value each
    # give back its standard error.
    est, se, dof = ols.params[1], ols.bse[1], ols.df_resid
    low, high = ols.conf_int(alpha=0.05)[1]
    from_ci = summarize(Reported(estimate=est, ci=(low, high), dof=dof))
    from_t = summarize(Reported(estimate=est, t=ols.tvalues[1], dof=dof))
    from_p = summarize(Reported(estimate=est, p_value=ols.pvalues[1], dof=dof))
    for summary, source in ((from_ci, "ci"), (from_t, "t"), (from_p, "p_value")):
        assert summary.std_error == pytest.approx(se, rel=1e-9)
        assert summary.se_source == source
        assert summary.critical == "t"
        assert summary.t == pytest.approx(ols.tvalues[1], rel=1e-9)
        assert summary.p_value == pytest.approx(ols.pvalues[1], rel=1e-7)
    given = summarize(Reported(estimate=est, std_error=se, dof=dof))
    assert (given.ci_low, given.ci_high) == pytest.approx((low, high), rel=1e-12)
    assert given.notes == ()


def test_dof_from_n_and_covariates(ols):
    # DESIGN.md: dof = n - covariates - 2 (covariates count the controls only); the statsmodels
    # fit above has n = 120, the treatment plus 2 controls and an intercept: 116 dof.
    summary = summarize(Reported(estimate=ols.params[1], std_error=ols.bse[1], n=120,
                                 covariates=2))
    assert summary.dof == ols.df_resid == 116
    assert summary.dof_source == "n - covariates - 2"


def test_interval_without_dof_uses_the_normal_quantile_and_says_so():
    summary = summarize(Reported(estimate=0.5, ci=(0.1, 0.9)))
    assert summary.critical == "normal"
    assert summary.std_error == pytest.approx(0.8 / (2 * stats.norm.ppf(0.975)), rel=1e-12)
    assert any("normal quantile (dof unknown)" in n for n in summary.notes)
    assert any("taken to be a 95% confidence interval" in n for n in summary.notes)


def test_interval_level_is_respected():
    summary = summarize(Reported(estimate=0.5, ci=(0.1, 0.9), ci_level=0.9, dof=50))
    assert summary.std_error == pytest.approx(0.8 / (2 * stats.t.ppf(0.95, 50)), rel=1e-12)
    assert not any("taken to be" in n for n in summary.notes)


def test_ratio_is_worked_on_the_log_scale():
    # VanderWeele & Ding (2017) example, RR 3.9 (1.8 to 8.7) (from memory): on the log scale the
    # SE is (ln 8.7 - ln 1.8) / (2 × 1.96) = 0.402 (hand computation).
    summary = summarize(Reported(estimate=3.9, ci=(1.8, 8.7), measure="risk_ratio"))
    assert summary.scale == "log" and summary.is_ratio
    assert summary.estimate == pytest.approx(math.log(3.9))
    assert summary.std_error == pytest.approx(0.4019, abs=5e-5)
    assert summary.reported_estimate == 3.9
    assert summary.reported_ci == (1.8, 8.7)
    # no asymmetry note: the log midpoint 3.96 is within rounding of 3.9
    assert not any("not symmetric" in n for n in summary.notes)
    d = summary.to_dict()
    assert d["scale"] == "log" and d["reported_ci"] == [1.8, 8.7]


def test_ratio_standard_error_is_read_on_the_log_scale():
    summary = summarize(Reported(estimate=2.0, std_error=0.2, measure="odds_ratio"))
    assert summary.ci_low == pytest.approx(math.log(2.0) - stats.norm.ppf(0.975) * 0.2)
    assert any("standard error of the log odds ratio" in n for n in summary.notes)


def test_consistent_inputs_within_rounding_give_no_note():
    # Darfur, Cinelli & Hazlett (2020) (from memory): 0.097, SE 0.023, t 4.18 agree within the
    # rounding of the printed digits (0.097/0.023 = 4.22).
    summary = summarize(Reported(estimate=0.097, std_error=0.023, t=4.18, dof=783))
    assert summary.notes == ()


def test_inconsistent_t_and_p_are_noted():
    summary = summarize(Reported(estimate=0.097, std_error=0.023, t=2.1, p_value=0.2, dof=783))
    assert any("[reported].t = 2.1 disagrees with estimate / SE = 4.217" in n
               for n in summary.notes)
    assert any("[reported].p_value = 0.2 disagrees" in n for n in summary.notes)
    assert summary.std_error == 0.023


def test_t_sign_flip_is_noted():
    summary = summarize(Reported(estimate=-0.5, t=2.5, dof=100))
    assert summary.std_error == pytest.approx(0.2)
    assert summary.t == pytest.approx(-2.5)
    assert any("opposite sign" in n for n in summary.notes)


def test_standard_error_disagreeing_with_interval_is_noted():
    summary = summarize(Reported(estimate=1.0, std_error=0.1, ci=(0.2, 1.8), dof=100))
    assert summary.se_source == "std_error"
    assert any("disagrees with [reported].ci, whose width implies a standard error of 0.403"
               in n for n in summary.notes)


def test_asymmetric_interval_is_noted():
    summary = summarize(Reported(estimate=1.0, ci=(0.9, 1.8), dof=100))
    assert any("not symmetric around the estimate" in n for n in summary.notes)


def test_dof_and_n_disagreeing_is_noted():
    summary = summarize(Reported(estimate=1.0, std_error=0.1, dof=90, n=100, covariates=3))
    assert summary.dof == 90
    assert any("differs from [reported].n - [reported].covariates - 2 = 95" in n
               for n in summary.notes)


def test_n_without_covariates_leaves_dof_unknown():
    summary = summarize(Reported(estimate=1.0, std_error=0.1, n=100))
    assert summary.dof is None
    assert any("without [reported].covariates" in n for n in summary.notes)


def test_study_file_reported_table_round_trip():
    study = parse_study("""
[reported]
estimate = -14.2
ci = [-20.3, -8.1]
n = 1900
covariates = 8
""")
    summary = summarize(study.reported)
    assert summary.dof == 1890
    assert summary.std_error == pytest.approx(12.2 / (2 * stats.t.ppf(0.975, 1890)))


# --------------------------------------------------------------------------------------------
# Overrides from the command line


FLAGS = {"std_error": "--se", "ci": "--ci", "dof": "--dof", "n": "--n", "estimate": "--estimate",
         "covariates": "--covariates", "measure": "--measure", "t": "--t"}


def test_overrides_parse_strings_and_say_what_they_replaced():
    base = Reported(estimate=0.1, std_error=0.03, dof=500)
    merged, notes = apply_overrides(base, {"std_error": "0.02", "dof": "783"}, names=FLAGS)
    assert merged.std_error == 0.02 and merged.dof == 783.0 and merged.estimate == 0.1
    assert "--se 0.02 overrides [reported].std_error = 0.03 from the study file" in notes
    assert "--dof 783 overrides [reported].dof = 500 from the study file" in notes


def test_precision_flag_replaces_every_precision_field_of_the_file():
    base = Reported(estimate=0.1, std_error=0.03, t=3.3, n=100, covariates=3)
    merged, notes = apply_overrides(base, {"ci": ("0.05", "0.15"), "dof": 90}, names=FLAGS)
    assert merged.std_error is None and merged.t is None and merged.ci == (0.05, 0.15)
    assert merged.n is None and merged.covariates is None and merged.dof == 90
    assert "--ci replaces [reported].std_error = 0.03 from the study file" in notes
    assert "--dof replaces [reported].n = 100 from the study file" in notes
    summary = summarize(merged)
    assert summary.se_source == "ci"


def test_overrides_without_a_file():
    merged, notes = apply_overrides(None, {"estimate": "1.8", "ci": ["1.2", "2.7"],
                                           "measure": "odds_ratio"}, names=FLAGS)
    assert notes == ()
    assert summarize(merged, names=FLAGS).measure == "odds_ratio"


# --------------------------------------------------------------------------------------------
# Bad input


def test_error_negative_standard_error():
    with pytest.raises(ReportedError, match=r"\[reported\]\.std_error must be positive; got "
                                            r"-0\.1\. A standard error is never zero"):
        summarize(Reported(estimate=0.5, std_error=-0.1, dof=10))


def test_error_reversed_interval():
    with pytest.raises(ReportedError, match=r"--ci is reversed or empty: low 0\.9 is not below "
                                            r"high 0\.1; write \[low, high\]"):
        summarize(Reported(estimate=0.5, ci=(0.9, 0.1)), names=FLAGS)


def test_error_estimate_outside_interval():
    with pytest.raises(ReportedError, match=r"\[reported\]\.estimate = 2\.0 lies outside "
                                            r"\[reported\]\.ci = \[0\.1, 0\.9\]"):
        summarize(Reported(estimate=2.0, ci=(0.1, 0.9)))


def test_error_dof_not_positive():
    with pytest.raises(ReportedError, match=r"--dof must be positive \(residual degrees of "
                                            r"freedom\); got -3"):
        summarize(Reported(estimate=0.5, std_error=0.1, dof=-3), names=FLAGS)


def test_error_non_positive_ratio():
    with pytest.raises(ReportedError, match=r"is a odds ratio and must be positive; got -0\.4\. "
                                            r"Give the ratio itself"):
        summarize(Reported(estimate=-0.4, std_error=0.1, measure="odds_ratio"))
    with pytest.raises(ReportedError, match=r"\[reported\]\.ci of a risk ratio must be "
                                            r"positive; got \[0\.0, 2\.0\]"):
        summarize(Reported(estimate=1.2, ci=(0.0, 2.0), measure="risk_ratio"))


def test_error_unknown_measure_suggests_a_match():
    with pytest.raises(ReportedError, match=r"--measure must be one of 'difference', "
                                            r"'risk_ratio', .* got 'odds ratio' \(did you mean "
                                            r"'odds_ratio'"):
        summarize(Reported(estimate=1.2, std_error=0.1, measure="odds ratio"), names=FLAGS)


def test_error_strings_and_infinities_in_code_built_tables():
    with pytest.raises(ReportedError, match=r"\[reported\]\.std_error must be a number; got "
                                            r"'0\.1'"):
        summarize(Reported(estimate=0.5, std_error="0.1"))
    with pytest.raises(ReportedError, match=r"\[reported\]\.estimate must be a finite number; "
                                            r"got inf"):
        summarize(Reported(estimate=math.inf, std_error=0.1))


def test_error_flags_that_are_not_numbers():
    with pytest.raises(ReportedError, match=r"--se must be a number such as 0\.05; got 'abc'"):
        apply_overrides(None, {"estimate": "1", "std_error": "abc"}, names=FLAGS)
    with pytest.raises(ReportedError, match=r"--estimate must be a finite number; got 'inf'"):
        apply_overrides(None, {"estimate": "inf"}, names=FLAGS)
    with pytest.raises(ReportedError, match=r"--n must be a whole number; got '12\.5'"):
        apply_overrides(None, {"estimate": "1", "n": "12.5"}, names=FLAGS)


def test_error_lists_every_problem_at_once():
    with pytest.raises(ReportedError, match=r"\(2 problems\): .*--se must be a number.*"
                                            r"--dof must be a finite number"):
        apply_overrides(None, {"std_error": "x", "dof": "nan"}, names=FLAGS)


def test_error_missing_precision_and_estimate():
    with pytest.raises(ReportedError, match=r"the precision is missing: give one of "
                                            r"\[reported\]\.std_error, \[reported\]\.ci"):
        summarize(Reported(estimate=0.5, dof=10))
    with pytest.raises(ReportedError, match=r"\[reported\]\.estimate is missing"):
        summarize(Reported(std_error=0.5))


def test_error_no_residual_dof_from_n_and_covariates():
    with pytest.raises(ReportedError, match=r"--n = 10 with --covariates = 8 leaves no "
                                            r"residual degrees of freedom"):
        summarize(Reported(estimate=1.0, std_error=0.1, n=10, covariates=8), names=FLAGS)


def test_error_t_or_p_cannot_give_a_standard_error():
    with pytest.raises(ReportedError, match=r"--t = 0 gives no standard error"):
        summarize(Reported(estimate=1.0, t=0.0), names=FLAGS)
    with pytest.raises(ReportedError, match=r"p_value = 1 means t = 0"):
        summarize(Reported(estimate=1.0, p_value=1.0))
    with pytest.raises(ReportedError, match=r"exactly the null, so a t statistic or p-value "
                                            r"cannot give its standard error"):
        summarize(Reported(estimate=0.0, t=2.0))


def test_dof_and_n_flags_together_replace_only_what_they_do_not_set():
    base = Reported(estimate=0.1, std_error=0.03, dof=500, n=510, covariates=8)
    merged, notes = apply_overrides(base, {"dof": "700", "n": "710"}, names=FLAGS)
    assert merged.dof == 700 and merged.n == 710 and merged.covariates is None
    assert "--dof replaces [reported].covariates = 8 from the study file" in notes
    assert not any("replaces [reported].n " in n for n in notes)
    assert "--n 710 overrides [reported].n = 510 from the study file" in notes
