"""Tests of causalcheck.regress against statsmodels OLS and certified reference values."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from causalcheck.errors import DataError, NumericsError
from causalcheck.moments import design_from_frame, moments_from_array, moments_from_design
from causalcheck.regress import (
    CollinearityWarning,
    fit,
    partial_r2,
    residuals,
    robust_std_error,
    robust_std_errors,
)
from causalcheck.study import parse_study


def _synthetic(n: int = 600, seed: int = 0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    z1 = rng.normal(size=n)
    z2 = rng.gamma(2.0, size=n)
    group = rng.choice(["a", "b", "c", "d"], size=n)
    t = 0.7 * z1 - 0.2 * z2 + (group == "b") + rng.normal(size=n)
    # heteroskedastic errors so that HC1 differs from the classical standard error
    y = 1.5 * t + z1 + 0.5 * z2 - 2.0 * (group == "d") + rng.normal(size=n) * (1 + np.abs(t))
    return pd.DataFrame({"t": t, "y": y, "z1": z1, "z2": z2, "group": group})


STUDY = parse_study("""
[study]
treatment = "t"
outcome = "y"
[variables]
group = { kind = "categorical" }
[graph]
edges = ["z1 -> t", "z2 -> t", "group -> t", "z1 -> y", "z2 -> y", "group -> y", "t -> y"]
""")


@pytest.mark.parametrize("regressors", [["t"], ["t", "z1"], ["t", "z1", "z2", "group"], []])
def test_fit_matches_statsmodels_ols_classical_and_hc1(regressors):
    frame = _synthetic()
    design = design_from_frame(frame, ["t", "y", "z1", "z2", "group"], study=STUDY)
    moments = moments_from_design(design)
    result = fit(moments, "y", regressors)
    columns = moments.select(regressors)
    exog = sm.add_constant(design.take(columns), has_constant="add")
    # reference: statsmodels OLS on the same encoded rows
    reference = sm.OLS(design.column("y"), exog).fit()
    robust = sm.OLS(design.column("y"), exog).fit(cov_type="HC1")
    assert result.dof == int(reference.df_resid)
    assert result.r2 == pytest.approx(reference.rsquared, rel=1e-8, abs=1e-12)
    assert result.intercept == pytest.approx(reference.params[0], rel=1e-8)
    assert result.sigma2 == pytest.approx(reference.scale, rel=1e-8)
    np.testing.assert_allclose(result.coef, reference.params[1:], rtol=1e-8)
    np.testing.assert_allclose(result.std_error, reference.bse[1:], rtol=1e-8)
    np.testing.assert_allclose(robust_std_error(design, result), robust.bse[1:], rtol=1e-8)
    for j, column in enumerate(columns):
        assert result.t(column) == pytest.approx(reference.tvalues[j + 1], rel=1e-8)
        assert result.p_value(column) == pytest.approx(reference.pvalues[j + 1], rel=1e-6)
        interval = result.confidence_interval(column, alpha=0.1)
        low, high = reference.conf_int(alpha=0.1)[j + 1]
        assert (interval.low, interval.high) == pytest.approx((low, high), rel=1e-8)
    np.testing.assert_allclose(residuals(design, result), reference.resid, rtol=1e-7,
                               atol=1e-9)


def test_standardized_slope_is_slope_times_sd_ratio():
    frame = _synthetic()
    design = design_from_frame(frame, ["t", "y", "z1"], study=STUDY)
    result = fit(moments_from_design(design), "y", ["t", "z1"])
    # beta_std = beta * sd(x) / sd(y), computed directly from the rows
    expected = result.coefficient("t") * frame["t"].std() / frame["y"].std()
    assert result.standardized_coefficient("t") == pytest.approx(expected, rel=1e-10)


def test_partial_r2_equals_squared_partial_correlation():
    frame = _synthetic()
    design = design_from_frame(frame, ["t", "y", "z1", "z2"], study=STUDY)
    result = fit(moments_from_design(design), "y", ["t", "z1", "z2"])
    # Frisch–Waugh–Lovell: residualise t and y on (1, z1, z2), correlate the residuals
    exog = sm.add_constant(design.take(["z1", "z2"]))
    rt = sm.OLS(design.column("t"), exog).fit().resid
    ry = sm.OLS(design.column("y"), exog).fit().resid
    assert partial_r2(result, "t") == pytest.approx(np.corrcoef(rt, ry)[0, 1] ** 2, rel=1e-9)


def test_longley_matches_nist_certified_values():
    # NIST StRD "Longley" certified regression results (NIST Statistical Reference Datasets,
    # Longley 1967), printed to 15 significant digits — from memory. Longley's data are a
    # standard stress test for ill-conditioned least squares. Data shipped by statsmodels
    # (statsmodels.datasets.longley).
    data = sm.datasets.longley.load_pandas().data
    names = ["GNPDEFL", "GNP", "UNEMP", "ARMED", "POP", "YEAR"]
    moments = moments_from_array(data[[*names, "TOTEMP"]].to_numpy(), [*names, "TOTEMP"])
    result = fit(moments, "TOTEMP", names)
    certified = [15.0618722713733, -0.358191792925910e-01, -2.02022980381683,
                 -1.03322686717359, -0.511041056535807e-01, 1829.15146461355]
    certified_se = [84.9149257747669, 0.334910077722432e-01, 0.488399681651699,
                    0.214274163161675, 0.226073200069370, 455.478499142212]
    np.testing.assert_allclose(result.coef, certified, rtol=1e-8)
    np.testing.assert_allclose(result.std_error, certified_se, rtol=1e-8)
    assert result.intercept == pytest.approx(-3482258.63459582, rel=1e-8)
    assert result.r2 == pytest.approx(0.995479004577296, rel=1e-10)
    assert np.sqrt(result.sigma2) == pytest.approx(304.854073561965, rel=1e-8)


def test_stackloss_textbook_coefficients():
    # Brownlee's (1965) stack-loss data (statsmodels.datasets.stackloss). The full fit
    # -39.92 + 0.7156 air + 1.2953 water - 0.1521 acid and the simple fit -44.13 + 1.0203 air
    # are printed in many regression texts, e.g. Draper & Smith (1998), Ch. 17 — from memory;
    # they print four decimals.
    data = sm.datasets.stackloss.load_pandas().data
    columns = ["AIRFLOW", "WATERTEMP", "ACIDCONC", "STACKLOSS"]
    moments = moments_from_array(data[columns].to_numpy(), columns)
    full = fit(moments, "STACKLOSS", ["AIRFLOW", "WATERTEMP", "ACIDCONC"])
    assert full.intercept == pytest.approx(-39.9197, abs=5e-5)
    np.testing.assert_allclose(full.coef, [0.7156, 1.2953, -0.1521], atol=5e-5)
    simple = fit(moments, "STACKLOSS", ["AIRFLOW"])
    assert simple.intercept == pytest.approx(-44.1320, abs=5e-5)
    assert simple.coefficient("AIRFLOW") == pytest.approx(1.0203, abs=5e-5)


def test_intercept_only_model():
    values = np.column_stack([np.arange(10.0), np.arange(10.0) ** 2])
    result = fit(moments_from_array(values, ["x", "y"]), "y", [])
    assert result.regressors == () and result.r2 == pytest.approx(0.0, abs=1e-15)
    assert result.dof == 9 and result.intercept == pytest.approx(28.5)
    assert result.sigma2 == pytest.approx(np.var(values[:, 1], ddof=1))


def test_near_collinear_regressors_warn_with_condition_number():
    rng = np.random.default_rng(4)
    x = rng.normal(size=500)
    w = x + 1e-5 * rng.normal(size=500)
    y = x + rng.normal(size=500)
    moments = moments_from_array(np.column_stack([x, w, y]), ["x", "w", "y"])
    with pytest.warns(CollinearityWarning, match=r"nearly collinear \(condition number \d"):
        result = fit(moments, "y", ["x", "w"])
    assert result.condition_number > 1e8


def test_error_perfectly_collinear_regressors_named():
    rng = np.random.default_rng(5)
    a, b, noise = rng.normal(size=(3, 300))
    c = a + 2.0 * b + 3.0
    y = a + noise
    moments = moments_from_array(np.column_stack([a, b, noise, c, y]),
                                 ["a", "b", "noise", "c", "y"])
    with pytest.raises(NumericsError) as info:
        fit(moments, "y", ["a", "noise", "b", "c"])
    message = str(info.value)
    assert "perfectly collinear" in message
    named = message.split("the regressors ")[1].split(" are perfectly")[0]
    # exactly the three columns of the dependence, not the innocent one
    assert set(named.replace("'", "").split(", ")) == {"a", "b", "c"}
    assert "Drop one of them" in message


def test_error_constant_regressor():
    values = np.column_stack([np.ones(20), np.arange(20.0), np.arange(20.0) * 2 + 1])
    values[:, 2] += np.sin(np.arange(20.0))
    moments = moments_from_array(values, ["k", "x", "y"])
    with pytest.raises(NumericsError, match=r"regressor 'k' is constant among the 20 rows"):
        fit(moments, "y", ["x", "k"])


def test_error_outcome_exact_function_of_regressors():
    x = np.arange(30.0)
    moments = moments_from_array(np.column_stack([x, 3 * x + 1]), ["x", "y"])
    with pytest.raises(NumericsError, match=r"outcome 'y' is an exact linear function of x"):
        fit(moments, "y", ["x"])


def test_error_fewer_rows_than_parameters_in_fit():
    rng = np.random.default_rng(6)
    moments = moments_from_array(rng.normal(size=(3, 3)), ["a", "b", "y"])
    with pytest.raises(DataError, match=r"needs more than 3 rows .* only 3 are used"):
        fit(moments, "y", ["a", "b"])


def test_robust_std_errors_of_several_fits_in_one_pass():
    frame = _synthetic(seed=3)
    design = design_from_frame(frame, ["t", "y", "z1", "z2", "group"], study=STUDY)
    moments = moments_from_design(design)
    fits = [fit(moments, "y", ["t"]), fit(moments, "y", ["t", "z1", "group"])]
    together = robust_std_errors(design, fits, "t", chunk_rows=97)
    for result, value in zip(fits, together):
        columns = list(result.regressors)
        exog = sm.add_constant(design.take(columns))
        # reference: statsmodels OLS with cov_type="HC1" on the same rows
        reference = sm.OLS(design.column("y"), exog).fit(cov_type="HC1")
        assert value == pytest.approx(reference.bse[1 + columns.index("t")], rel=1e-8)
