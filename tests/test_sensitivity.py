"""Tests of causalcheck.sensitivity: published worked examples, exact identities, bad input.

Reference values name their source beside them. "From memory" marks values recalled from the
publication; their tolerance is the digits the publication prints. Identities are checked on
simulated data with a known confounder, with the regressions solved by statsmodels / numpy
(outside the project), and on population covariance matrices of linear SEMs.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import optimize, stats

from causalcheck.errors import NumericsError
from causalcheck.sensitivity import (
    adjusted_std_error,
    benchmark_bounds,
    benchmark_partial_r2,
    bias_bound,
    bias_sweep,
    bounds,
    bounds_grid,
    coefficient_stability,
    critical_t,
    e_value,
    extreme_bound,
    group_partial_r2,
    partial_r2_from_r2,
    partial_r2_from_t,
    risk_ratio_e_value,
    robustness_value,
    robustness_values,
    smd_to_risk_ratio,
    to_risk_ratio,
)

# Darfur example, Cinelli & Hazlett (2020), Sec. 2 and the minimal-reporting table of Sec. 5:
# the effect of being directly harmed on attitudes toward peace (from memory).
DARFUR = {"estimate": 0.09731582, "std_error": 0.02325654, "dof": 783}


# --------------------------------------------------------------------------------------------
# Published worked examples


def test_darfur_partial_r2_and_robustness_values():
    # Cinelli & Hazlett (2020), Sec. 5, Table of minimal reporting (from memory):
    # t = 4.18, R²_{Y~D|X} = 2.19%, RV_{q=1} = 13.88%, RV_{q=1,α=0.05} = 7.63%.
    rv = robustness_values(**DARFUR)
    assert rv.t == pytest.approx(4.18, abs=0.005)
    assert 100 * rv.partial_r2 == pytest.approx(2.19, abs=0.005)
    assert 100 * rv.point == pytest.approx(13.88, abs=0.005)
    assert 100 * rv.ci == pytest.approx(7.63, abs=0.005)
    assert robustness_value(**DARFUR) == rv.point
    assert robustness_value(**DARFUR, alpha=0.05) == rv.ci


def test_darfur_extreme_scenario():
    # Cinelli & Hazlett (2020), Sec. 4.2 (from memory): a confounder explaining all the residual
    # variance of the outcome would need to explain at least R²_{Y~D|X} = 2.19% of the
    # treatment's residual variance to bring the estimate to zero.
    rv = robustness_values(**DARFUR)
    assert 100 * rv.extreme_r2dz == pytest.approx(2.19, abs=0.005)
    ext = extreme_bound(**DARFUR, r2dz=[rv.extreme_r2dz])
    assert float(ext.adjusted_estimate[0]) == pytest.approx(0.0, abs=1e-12)
    assert ext.r2dz_to_threshold == pytest.approx(rv.extreme_r2dz, rel=1e-12)


def _darfur_benchmark_inputs():
    # The 1x "female" row of the Darfur bounds table, Cinelli & Hazlett (2020), Sec. 6 and
    # the accompanying software output (from memory): R²_{D~Z|X} = 0.0092, R²_{Y~Z|D,X} = 0.1246.
    # Solve the benchmark formulas backwards for the covariate's own partial R² values, then
    # check every other printed number of the table against them.
    r2dxj = 0.0092 / (1 + 0.0092)            # from r2dz = r2dxj / (1 - r2dxj) at k = 1
    r2yxj = optimize.brentq(
        lambda r: float(benchmark_partial_r2(r2dxj, r, 1.0)[1][()]) - 0.1246, 1e-6, 0.5)
    return r2dxj, r2yxj


def test_darfur_benchmark_table():
    # Darfur bounds table for 1x, 2x, 3x "female" (Cinelli & Hazlett 2020, Sec. 6; from memory):
    #   k  R2dz    R2yz    adj. est.  adj. se  adj. t  lower    upper
    #   1  0.0092  0.1246  0.0752     0.0219   3.4389  0.0323   0.1182
    #   2  0.0183  0.2493  0.0529     0.0204   2.6002  0.0130   0.0929
    #   3  0.0275  0.3741  0.0304     0.0187   1.6215  -0.0064  0.0672
    # The inputs carry 2-3 significant figures, so 2x and 3x are checked to the resulting
    # precision (propagated: about 1.5e-4 on R² and 5e-4 on estimates).
    r2dxj, r2yxj = _darfur_benchmark_inputs()
    table = benchmark_bounds(**DARFUR, r2dxj=[r2dxj], r2yxj=[r2yxj], names=["female"],
                             multipliers=[1, 2, 3])
    rows = table.rows()
    printed = [
        (0.0092, 0.1246, 0.0752, 0.0219, 3.4389, 0.0323, 0.1182),
        (0.0183, 0.2493, 0.0529, 0.0204, 2.6002, 0.0130, 0.0929),
        (0.0275, 0.3741, 0.0304, 0.0187, 1.6215, -0.0064, 0.0672),
    ]
    for row, (r2dz, r2yz, est, se, t, low, high) in zip(rows, printed):
        assert row["benchmark"] == "female" and row["feasible"] and not row["capped"]
        assert row["r2dz"] == pytest.approx(r2dz, abs=1.5e-4)
        assert row["r2yz"] == pytest.approx(r2yz, abs=3e-4)
        assert row["adjusted_estimate"] == pytest.approx(est, abs=5e-4)
        assert row["adjusted_std_error"] == pytest.approx(se, abs=1e-4)
        assert row["t"] == pytest.approx(t, abs=0.02)
        assert row["ci_low"] == pytest.approx(low, abs=6e-4)
        assert row["ci_high"] == pytest.approx(high, abs=6e-4)


def test_darfur_benchmark_single_row_to_printed_digits():
    # The 1x row (Cinelli & Hazlett 2020, Sec. 6; from memory) follows from its printed R²
    # values by the bias formulas: each printed number lies in the range the formulas give over
    # the rounding of the inputs (±0.00005), widened by its own rounding (±0.00005).
    printed = {"adjusted_estimate": 0.0752, "adjusted_std_error": 0.0219, "ci_low": 0.0323,
               "ci_high": 0.1182, "t": 3.4389}
    corners = [bounds(**DARFUR, r2dz=0.0092 + a, r2yz=0.1246 + b)
               for a in (-5e-5, 5e-5) for b in (-5e-5, 5e-5)]
    for key, value in printed.items():
        values = [float(getattr(c, key)) for c in corners]
        assert min(values) - 5e-5 <= value <= max(values) + 5e-5, key


def test_e_value_breastfeeding_example():
    # VanderWeele & Ding (2017), Ann. Intern. Med., worked example (from memory): RR 3.9
    # (95% CI 1.8 to 8.7) for infant respiratory death without breastfeeding; E-value 7.26 for
    # the estimate and 3.0 for the lower limit.
    ev = e_value(3.9, ci=(1.8, 8.7), measure="risk_ratio")
    assert ev.point == pytest.approx(7.26, abs=0.005)
    assert ev.ci == pytest.approx(3.0, abs=0.005)


def test_e_value_smoking_lung_cancer_example():
    # Ding & VanderWeele (2016) / VanderWeele & Ding (2017), smoking and lung cancer, Hammond &
    # Horn's risk ratio 10.73 (95% CI 8.02 to 14.36); E-values 20.9 and 15.5 (from memory).
    ev = e_value(10.73, ci=(8.02, 14.36))
    assert ev.point == pytest.approx(20.9, abs=0.05)
    assert ev.ci == pytest.approx(15.5, abs=0.05)


def test_e_value_protective_and_null_crossing():
    # A protective risk ratio is inverted first (VanderWeele & Ding 2017): RR 0.8 -> 1/0.8.
    ev = e_value(0.8, ci=(0.71, 0.91))
    assert ev.point == pytest.approx(1.25 + math.sqrt(1.25 * 0.25), rel=1e-12)
    assert ev.ci == pytest.approx(risk_ratio_e_value(1 / 0.91), rel=1e-12)
    crossing = e_value(1.3, ci=(0.9, 1.8))
    assert crossing.ci == 1.0
    assert e_value(1.0).point == 1.0


# --------------------------------------------------------------------------------------------
# E-value conversions and the bounding factor


def test_odds_ratio_common_outcome_square_root():
    # VanderWeele (2017, Epidemiology): for a common outcome RR ≈ sqrt(OR).
    assert to_risk_ratio(4.0, "odds_ratio", outcome_common=True) == pytest.approx(2.0)
    assert to_risk_ratio(4.0, "odds_ratio") == 4.0
    ev = e_value(4.0, ci=(2.25, 7.29), measure="odds_ratio", outcome_common=True)
    assert ev.risk_ratio == pytest.approx(2.0)
    assert ev.point == pytest.approx(2 + math.sqrt(2), rel=1e-12)
    assert ev.ci == pytest.approx(risk_ratio_e_value(1.5), rel=1e-12)


def test_hazard_ratio_common_outcome_conversion():
    # VanderWeele & Ding (2017), conversions table: RR ≈ (1 - 0.5^sqrt(HR))/(1 - 0.5^sqrt(1/HR)).
    hr = np.array([0.5, 0.8, 1.0, 1.25, 2.0, 4.0])
    rr = to_risk_ratio(hr, "hazard_ratio", outcome_common=True)
    expected = (1 - 0.5 ** np.sqrt(hr)) / (1 - 0.5 ** np.sqrt(1 / hr))
    expected[hr == 1] = 1.0
    np.testing.assert_allclose(rr, expected, rtol=1e-14)
    # the conversion is symmetric: RR(1/HR) = 1/RR(HR), and shrinks a ratio toward 1
    np.testing.assert_allclose(to_risk_ratio(1 / hr, "hazard_ratio", outcome_common=True),
                               1 / rr, rtol=1e-12)
    assert np.all(np.abs(np.log(rr)) <= np.abs(np.log(hr)) + 1e-15)
    assert to_risk_ratio(2.0, "hazard_ratio") == 2.0


def test_smd_conversion_matches_chinn():
    # Chinn (2000): ln(OR) = (π/√3) d; with the square root of the odds ratio (VanderWeele
    # 2017), ln(RR) = π/(2√3) d = 0.9069 d, printed as 0.91 d.
    assert math.pi / (2 * math.sqrt(3)) == pytest.approx(0.91, abs=0.005)
    assert smd_to_risk_ratio(0.5) == pytest.approx(math.exp(0.455), rel=1e-12)
    ev = e_value(5.0, ci=(2.0, 8.0), measure="difference", outcome_sd=10.0)
    assert ev.risk_ratio == pytest.approx(math.exp(0.91 * 0.5))
    assert ev.ci == pytest.approx(risk_ratio_e_value(math.exp(0.91 * 0.2)), rel=1e-12)


def _bounding_factor(rr_eu, rr_ud):
    # Ding & VanderWeele (2016), Epidemiology: B = RR_EU RR_UD / (RR_EU + RR_UD - 1)
    return rr_eu * rr_ud / (rr_eu + rr_ud - 1)


@pytest.mark.parametrize("rr", [1.05, 1.5, 2.0, 3.9, 10.73, 40.0])
def test_e_value_is_the_bounding_factor_threshold(rr):
    # Ding & VanderWeele (2016): a confounder with risk ratios RR_EU and RR_UD can explain away
    # an observed RR only if B(RR_EU, RR_UD) >= RR. The E-value is the common value at which
    # B = RR, so on a grid: both below E -> B < RR; both at least E -> B >= RR.
    e = risk_ratio_e_value(rr)
    assert _bounding_factor(e, e) == pytest.approx(rr, rel=1e-12)
    grid = np.linspace(1.0, 3 * e, 301)
    a, b = np.meshgrid(grid, grid)
    factor = _bounding_factor(a, b)
    below = (a < e) & (b < e)
    above = (a >= e) & (b >= e)
    assert np.all(factor[below] < rr * (1 + 1e-12))
    assert np.all(factor[above] >= rr * (1 - 1e-12))
    # the protective direction mirrors it
    assert risk_ratio_e_value(1 / rr) == pytest.approx(e, rel=1e-12)


def test_e_value_non_null_threshold():
    # VanderWeele & Ding (2017): the E-value for moving RR to a true value RR0 uses RR/RR0.
    ev = e_value(3.0, ci=(2.0, 4.5), null=1.5)
    assert ev.point == pytest.approx(risk_ratio_e_value(2.0), rel=1e-12)
    assert ev.ci == pytest.approx(risk_ratio_e_value(2.0 / 1.5), rel=1e-12)


# --------------------------------------------------------------------------------------------
# Exact identities: partial-R² bias on simulated data with a known confounder


def _simulate(seed, n=600, gamma=0.7, imbalance=0.6, tau=0.4):
    rng = np.random.default_rng(seed)
    x = rng.normal(size=(n, 2))
    u = rng.normal(size=n) + 0.3 * x[:, 0]
    d = x @ [0.5, -0.3] + imbalance * u + rng.normal(size=n)
    y = tau * d + x @ [0.2, 0.4] + gamma * u + rng.normal(size=n)
    return x, u, d, y


@pytest.mark.parametrize("seed,gamma,imbalance", [(1, 0.7, 0.6), (2, -0.5, 0.8),
                                                  (3, 0.9, -0.4), (4, 0.05, 0.1)])
def test_bound_at_true_partial_r2_equals_estimate_with_confounder(seed, gamma, imbalance):
    # Cinelli & Hazlett (2020), Sec. 3: the partial-R² bias formula is exact. Regress with and
    # without U (statsmodels OLS), compute U's partial R² with the outcome (given D and X) and
    # with the treatment (given X) from its t statistics, and recover the long estimate, its
    # SE and CI from the short regression alone.
    x, u, d, y = _simulate(seed, gamma=gamma, imbalance=imbalance)
    short = sm.OLS(y, sm.add_constant(np.column_stack([d, x]))).fit()
    long = sm.OLS(y, sm.add_constant(np.column_stack([d, x, u]))).fit()
    treat = sm.OLS(d, sm.add_constant(np.column_stack([x, u]))).fit()
    r2yz = partial_r2_from_t(long.tvalues[-1], long.df_resid)
    r2dz = partial_r2_from_t(treat.tvalues[-1], treat.df_resid)
    estimate, se, dof = short.params[1], short.bse[1], short.df_resid
    assert bias_bound(se, dof, r2yz, r2dz) == pytest.approx(abs(estimate - long.params[1]),
                                                            rel=1e-9)
    assert adjusted_std_error(se, dof, r2yz, r2dz) == pytest.approx(long.bse[1], rel=1e-9)
    # the sign: the bias is toward zero here exactly when gamma*imbalance has the estimate's sign
    direction = "toward" if abs(long.params[1]) < abs(estimate) and \
        np.sign(long.params[1]) == np.sign(estimate) else "away"
    b = bounds(estimate, se, dof, r2dz, r2yz, direction=direction)
    assert float(b.adjusted_estimate) == pytest.approx(long.params[1], rel=1e-9)
    assert b.dof == long.df_resid
    low, high = long.conf_int(alpha=0.05)[1]
    assert float(b.ci_low) == pytest.approx(low, rel=1e-9)
    assert float(b.ci_high) == pytest.approx(high, rel=1e-9)
    assert float(b.t) == pytest.approx(long.tvalues[1], rel=1e-9)


def test_partial_r2_from_t_matches_residual_definition():
    # statsmodels OLS: t²/(t² + dof) equals 1 - SSR_full/SSR_without_D (given the others).
    x, _u, d, y = _simulate(7)
    full = sm.OLS(y, sm.add_constant(np.column_stack([d, x]))).fit()
    reduced = sm.OLS(y, sm.add_constant(x)).fit()
    assert partial_r2_from_t(full.tvalues[1], full.df_resid) == pytest.approx(
        1 - full.ssr / reduced.ssr, rel=1e-10)
    # a group of columns (both x): F statistic route and R² route agree
    f_test = full.f_test(np.eye(4)[2:])
    group = group_partial_r2(float(np.squeeze(f_test.fvalue)), 2, full.df_resid)
    no_x = sm.OLS(y, sm.add_constant(d)).fit()
    assert group == pytest.approx(partial_r2_from_r2(full.rsquared, no_x.rsquared), rel=1e-10)


# --------------------------------------------------------------------------------------------
# Exact identities: robustness values land on the threshold


estimates = st.floats(-50, 50, allow_nan=False)
std_errors = st.floats(0.01, 10)
dofs = st.floats(3, 1e5)
thresholds = st.floats(-20, 20, allow_nan=False)


@settings(max_examples=200, deadline=None)
@given(estimates, std_errors, dofs, thresholds)
def test_bound_at_robustness_value_hits_threshold(estimate, se, dof, threshold):
    # Cinelli & Hazlett (2020), Sec. 4: at RV (both partial R² equal) the bias equals
    # |estimate - threshold|.
    rv = robustness_values(estimate, se, dof, threshold=threshold)
    b = bounds(estimate, se, dof, rv.point, rv.point, threshold=threshold)
    # The bias se*sqrt(dof)*r/sqrt(1-r) has condition number 1 + r/(2(1-r)) in r: an RV that is
    # exact to the last bit still moves the bound by that factor times rounding when r is near
    # 1 (t in the thousands on a few dof). Away from 1 the factor is ~1 and this is 1e-9.
    r = float(rv.point)
    condition = 1.0 + r / (2.0 * (1.0 - r)) if r < 1 else float("inf")
    assert float(b.adjusted_estimate) == pytest.approx(threshold, abs=1e-9 * condition * max(
        1.0, abs(estimate), abs(threshold)))


def test_bound_at_robustness_value_near_one_is_as_exact_as_its_conditioning():
    # the case that exposed the conditioning: t = 4,370 on 3 dof, RV = 1 - 3e-7
    estimate, se, dof, threshold = 43.70084316505046, 0.01, 3.0, -15.755343570059821
    rv = robustness_values(estimate, se, dof, threshold=threshold)
    b = bounds(estimate, se, dof, rv.point, rv.point, threshold=threshold)
    assert 1 - float(rv.point) < 1e-6
    assert float(b.adjusted_estimate) == pytest.approx(threshold, rel=1e-8)


@settings(max_examples=200, deadline=None)
@given(estimates, std_errors, st.floats(2.5, 1e5), thresholds, st.sampled_from([0.01, 0.05,
                                                                                0.1, 0.2]))
def test_ci_at_robustness_value_hits_threshold(estimate, se, dof, threshold, alpha):
    rv = robustness_values(estimate, se, dof, threshold=threshold, alpha=alpha)
    if rv.ci == 0:
        # the interval already contains the threshold
        b = bounds(estimate, se, dof, 0.0, 0.0, threshold=threshold, alpha=alpha)
        q = stats.t.ppf(1 - alpha / 2, dof - 1) / math.sqrt(dof - 1)
        assert rv.f <= q + 1e-12
        return
    b = bounds(estimate, se, dof, rv.ci, rv.ci_r2yz, threshold=threshold, alpha=alpha)
    limit = b.ci_low if estimate > threshold else b.ci_high
    assert float(limit) == pytest.approx(threshold, abs=1e-9 * max(1.0, abs(estimate),
                                                                   abs(threshold)))


@pytest.mark.parametrize("estimate,se,dof", [
    (0.0973, 0.0232, 783),      # both partial R² at RV (f f* < 1)
    (2.0, 0.1, 5),              # a huge t on few dof: the worst confounder has R²_Y < R²_D
    (1.0, 0.05, 3),
    (0.5, 0.2, 40),
])
def test_ci_robustness_value_is_the_minimax_strength(estimate, se, dof):
    # Independent check by brute force (scipy): the CI reaches 0 for some confounder with both
    # partial R² at most r exactly when r >= RV_alpha. Maximise |b| + t* se_adj over
    # R²_Y in [0, r] with R²_D = r, then find the root in r with brentq.
    alpha = 0.05
    critical = stats.t.ppf(1 - alpha / 2, dof - 1)

    def reach(r):
        yz = np.linspace(0, r, 20001)
        worst = np.max(bias_bound(se, dof, yz, r) + critical *
                       adjusted_std_error(se, dof, yz, r))
        return worst - abs(estimate)

    expected = optimize.brentq(reach, 1e-12, 1 - 1e-9, xtol=1e-12)
    assert robustness_value(estimate, se, dof, alpha=alpha) == pytest.approx(expected,
                                                                               abs=1e-6)


def test_robustness_value_formula_against_root_finding():
    # The point RV solves r/sqrt(1-r) = f (scipy brentq on the bias formula itself).
    for estimate, se, dof in [(0.0973, 0.0232, 783), (5.0, 1.0, 20), (-3.0, 2.0, 10000)]:
        def gap(r, se=se, dof=dof, estimate=estimate):
            return bias_bound(se, dof, r, r) - abs(estimate)

        root = optimize.brentq(gap, 0, 1 - 1e-12, xtol=1e-14)
        assert robustness_value(estimate, se, dof) == pytest.approx(root, abs=1e-10)


def test_threshold_generalisation():
    # With a threshold θ the relevant t is (estimate - θ)/se: RV(est, θ) = RV(est - θ, 0).
    a = robustness_values(0.5, 0.1, 200, threshold=0.2)
    b = robustness_values(0.3, 0.1, 200)
    assert a.point == pytest.approx(b.point, rel=1e-14)
    assert a.ci == pytest.approx(b.ci, rel=1e-14)
    # a threshold above the estimate: the confounder pushes the estimate up
    c = robustness_values(0.5, 0.1, 200, threshold=0.8)
    up = bounds(0.5, 0.1, 200, c.point, c.point, threshold=0.8)
    assert float(up.adjusted_estimate) == pytest.approx(0.8, abs=1e-12)
    assert robustness_values(0.2, 0.1, 200, threshold=0.2).point == 0.0


def test_bounds_grid_and_tipping_curve():
    grid = bounds_grid(**DARFUR, r2dz=np.linspace(0, 0.3, 31), r2yz=np.linspace(0, 1, 51))
    assert grid.bounds.adjusted_estimate.shape == (31, 51)
    tip = grid.tipping_r2yz()
    assert np.isnan(tip[0])
    for r2dz, r2yz in zip(grid.r2dz, tip):
        if np.isfinite(r2yz):
            at = bounds(**DARFUR, r2dz=r2dz, r2yz=r2yz)
            assert float(at.adjusted_estimate) == pytest.approx(0, abs=1e-12)
    # below the extreme-case strength no confounder can reach zero
    rv = robustness_values(**DARFUR)
    assert np.all(np.isnan(tip[grid.r2dz < rv.extreme_r2dz]))
    assert grid.to_dict()["adjusted_estimate"][0][0] == pytest.approx(DARFUR["estimate"])


def test_critical_t_against_scipy():
    assert critical_t(0.05, 783) == pytest.approx(stats.t.ppf(0.975, 783))
    assert critical_t(0.1, None) == pytest.approx(stats.norm.ppf(0.95))


# --------------------------------------------------------------------------------------------
# Benchmarks on population covariance matrices


def _conditional_variance(cov, target, given):
    # Var(A | S) = Σ_AA - Σ_AS Σ_SS^{-1} Σ_SA  (Gaussian / linear-projection algebra)
    target, given = list(target), list(given)
    s_aa = cov[np.ix_(target, target)]
    if not given:
        return s_aa
    s_as = cov[np.ix_(target, given)]
    s_ss = cov[np.ix_(given, given)]
    return s_aa - s_as @ np.linalg.solve(s_ss, s_as.T)


def _partial_r2(cov, y, x, given):
    # R²_{Y~X|S} = 1 - Var(Y | X, S) / Var(Y | S); x may be a group of columns
    x = [x] if isinstance(x, int) else list(x)
    return 1 - _conditional_variance(cov, [y], x + list(given))[0, 0] / \
        _conditional_variance(cov, [y], given)[0, 0]


def _sem_covariance(coef_d, coef_y, n_exog):
    # exogenous independent unit-variance variables, then D, then Y: Σ = A Aᵀ for
    # [exog..., D, Y] = A [exog..., e_D, e_Y]
    p = n_exog + 2
    a = np.zeros((p, p))
    a[:n_exog, :n_exog] = np.eye(n_exog)
    a[n_exog] = np.r_[coef_d, 1.0, 0.0]
    a[n_exog + 1] = coef_y[0] * a[n_exog] + np.r_[coef_y[1:], 0.0, 1.0]
    return a @ a.T


@pytest.mark.parametrize("group_size", [1, 2])
def test_benchmark_formulas_on_population_covariances(group_size):
    # Cinelli & Hazlett (2020), Sec. 6.1-6.2: with Z orthogonal to X_j given X_{-j},
    # R²_{D~Z|X} = kD R²_{D~Xj|X-j}/(1 - R²_{D~Xj|X-j}) exactly, and R²_{Y~Z|D,X} is at most
    # the η² bound, with equality when the collider-induced association adds to Z's own
    # (signs aligned). Checked on random linear SEMs, partial R² from the covariance matrix.
    rng = np.random.default_rng(11 + group_size)
    equal_cases = 0
    for _ in range(300):
        # exogenous: W (the other covariate), X_j (group_size columns), Z
        n_exog = 2 + group_size
        coef_d = rng.normal(scale=0.7, size=n_exog)
        coef_y = np.r_[rng.normal(scale=0.5), rng.normal(scale=0.7, size=n_exog)]
        cov = _sem_covariance(coef_d, coef_y, n_exog)
        w, xj, z = 0, list(range(1, 1 + group_size)), 1 + group_size
        d, y = n_exog, n_exog + 1
        r2dxj = _partial_r2(cov, d, xj, [w])
        r2yxj = _partial_r2(cov, y, xj, [w, d])
        kd = _partial_r2(cov, d, z, [w]) / r2dxj
        ky = _partial_r2(cov, y, z, [w, d]) / r2yxj
        r2dz, r2yz = benchmark_partial_r2(r2dxj, r2yxj, kd, ky)
        if not np.isfinite(r2dz):
            continue
        true_dz = _partial_r2(cov, d, z, [w, *xj])
        true_yz = _partial_r2(cov, y, z, [w, *xj, d])
        assert float(r2dz) == pytest.approx(true_dz, rel=1e-9)
        assert true_yz <= float(r2yz) * (1 + 1e-9) + 1e-12
        # partial correlations given (W, D): equality of the bound iff the two terms align
        cond = _conditional_variance(cov, [y, z, *xj], [w, d])
        if group_size == 1:
            corr = cond / np.sqrt(np.outer(np.diag(cond), np.diag(cond)))
            r_yz, r_yx, r_zx = corr[0, 1], corr[0, 2], corr[1, 2]
            if r_yz * (-r_yx * r_zx) > 0 and float(r2yz) < 1:
                equal_cases += 1
                assert true_yz == pytest.approx(float(r2yz), rel=1e-9)
    if group_size == 1:
        assert equal_cases > 20


def test_benchmark_infeasible_and_capped():
    # kd * r2dxj >= 1: no such confounder (nan, not feasible); a huge outcome bound is capped.
    table = benchmark_bounds(**DARFUR, r2dxj=[0.4, 0.01], r2yxj=[0.1, 0.6],
                             names=["strong", "outcome_heavy"], multipliers=[1, 3])
    rows = table.rows()
    by = {(r["benchmark"], r["kd"]): r for r in rows}
    assert not by[("strong", 3.0)]["feasible"]
    assert math.isnan(by[("strong", 3.0)]["adjusted_estimate"])
    assert by[("strong", 1.0)]["feasible"]
    assert by[("outcome_heavy", 3.0)]["capped"] and by[("outcome_heavy", 3.0)]["r2yz"] == 1.0
    assert table.to_dict()["rows"][0]["benchmark"] == "strong"


def test_benchmark_separate_multipliers():
    r2dz, r2yz = benchmark_partial_r2(0.05, 0.1, kd=[1, 1], ky=[1, 4])
    assert r2dz[0] == r2dz[1]
    assert r2yz[1] > r2yz[0]


# --------------------------------------------------------------------------------------------
# The two-number sweep


def test_sweep_is_exact_omitted_variable_bias():
    # Angrist & Pischke (2009), Sec. 3.2: short - long = γ δ, γ the coefficient of U in the long
    # regression, δ the slope of U on T (given X). statsmodels OLS on simulated data.
    x, u, d, y = _simulate(5)
    design_short = sm.add_constant(np.column_stack([d, x]))
    short = sm.OLS(y, design_short).fit()
    long = sm.OLS(y, sm.add_constant(np.column_stack([d, x, u]))).fit()
    delta = sm.OLS(u, design_short).fit().params[1]
    gamma = long.params[-1]
    sweep = bias_sweep(short.params[1], [0.0, gamma], [delta, 1.0])
    assert sweep.adjusted_estimate[1, 0] == pytest.approx(long.params[1], rel=1e-10)
    assert sweep.adjusted_estimate[0, 0] == short.params[1]


def test_sweep_binary_confounder_difference_in_prevalence():
    # Binary treatment and binary U: δ = P(U=1|T=1) - P(U=1|T=0) is the slope of U on T, so
    # the sweep with that δ recovers the regression that includes U (statsmodels OLS).
    rng = np.random.default_rng(9)
    n = 5000
    t = rng.integers(0, 2, n)
    u = (rng.random(n) < np.where(t == 1, 0.6, 0.3)).astype(float)
    y = 1.0 * t + 2.0 * u + rng.normal(size=n)
    short = sm.OLS(y, sm.add_constant(t.astype(float))).fit()
    long = sm.OLS(y, sm.add_constant(np.column_stack([t, u]))).fit()
    prevalence_gap = u[t == 1].mean() - u[t == 0].mean()
    sweep = bias_sweep(short.params[1], [long.params[2]], [prevalence_gap])
    assert sweep.adjusted_estimate[0, 0] == pytest.approx(long.params[1], rel=1e-10)
    tip = sweep.tipping_gamma()
    assert tip[0] * prevalence_gap == pytest.approx(short.params[1])


def test_sweep_tipping_curve_and_zero_delta():
    s = bias_sweep(3.0, np.linspace(0, 10, 11), [0.0, 0.5, 1.5], threshold=1.0)
    tip = s.tipping_gamma()
    assert math.isnan(tip[0])
    assert tip[1] == pytest.approx(4.0) and tip[2] == pytest.approx(4.0 / 3)
    assert s.adjusted_estimate.shape == (11, 3)
    assert s.to_dict()["tipping_gamma"][0] is None or math.isnan(s.to_dict()["tipping_gamma"][0])


# --------------------------------------------------------------------------------------------
# Coefficient stability (Oster 2019) on simulated data satisfying the model exactly


def _residualise(v, design):
    return v - design @ np.linalg.lstsq(design, v, rcond=None)[0]


def _ols(y, columns):
    design = np.column_stack([np.ones(len(y)), *columns])
    coef = np.linalg.lstsq(design, y, rcond=None)[0]
    resid = y - design @ coef
    return coef, 1 - resid @ resid / np.sum((y - y.mean()) ** 2)


def _oster_world(seed, *, n, beta, controls, kappa, extra, x_on_w2, w2_scale=1.0):
    # Y = β X + W1 + W2 + ε with W1 = Wω the observed index, W2 the unobserved index orthogonal
    # to the observed controls, ε orthogonal to everything: Oster (2019), Sec. 3. The treatment
    # X = κ W1 + (another combination of W) + c W2 + noise. Orthogonality holds exactly in the
    # sample (residualised with numpy lstsq), so every identity is exact.
    rng = np.random.default_rng(seed)
    ones = np.ones((n, 1))
    w = rng.normal(size=(n, controls))
    w = w - w.mean(axis=0)
    w1 = w @ rng.normal(size=controls)
    w2 = w2_scale * _residualise(rng.normal(size=n), np.column_stack([ones, w]))
    x = kappa * w1 + w @ (extra * rng.normal(size=controls)) + x_on_w2 * w2 + rng.normal(size=n)
    eps = _residualise(rng.normal(size=n), np.column_stack([ones, x, w, w2]))
    y = beta * x + w1 + w2 + eps
    def cov(a, b):
        return np.cov(a, b)[0, 1]

    # proportional selection δ = (σ_2X / σ_2²) / (σ_1X / σ_1²), in the sample
    delta = (cov(w2, x) / np.var(w2, ddof=1)) / (cov(w1, x) / np.var(w1, ddof=1))
    coef0, r0 = _ols(y, [x])
    coef1, r1 = _ols(y, [x, *w.T])
    r_max = _ols(y, [x, *w.T, w2])[1]
    r2_xw = _ols(x, list(w.T))[1]
    inputs = {"naive_estimate": coef0[1], "naive_r2": r0, "adjusted_estimate": coef1[1],
                  "adjusted_r2": r1, "outcome_variance": np.var(y, ddof=1),
                  "treatment_variance": np.var(x, ddof=1), "treatment_r2_controls": r2_xw,
                  "r2_max": r_max}
    return inputs, delta


@pytest.mark.parametrize("seed,beta,controls,kappa,extra,x_on_w2", [
    (1, 0.5, 1, 0.6, 0.0, 0.6),     # one control (W1 is the only direction): δ about 1
    (2, 1.5, 3, 0.5, 0.4, 0.25),    # several controls, δ about 0.5
    (3, -0.3, 2, 0.8, 0.3, 1.6),    # δ about 2
    (4, 0.0, 2, 0.4, 0.2, 0.4),     # true effect zero
    (5, 0.8, 3, 0.3, 0.5, -0.3),    # selection on unobservables of the opposite sign
])
def test_oster_exact_solution_recovers_the_true_beta(seed, beta, controls, kappa, extra,
                                                      x_on_w2):
    # Computed independently: in a world built to satisfy Oster's (2019, Sec. 3) model exactly,
    # with R²max the R² of the full regression and δ the sample's proportional selection, the
    # exact solution has the true β among its roots, and the δ for threshold β is the sample δ.
    inputs, delta = _oster_world(seed, n=800, beta=beta, controls=controls, kappa=kappa,
                                 extra=extra, x_on_w2=x_on_w2)
    result = coefficient_stability(**inputs, delta=delta, threshold=beta)
    assert result.delta_for_threshold == pytest.approx(delta, rel=1e-8)
    assert any(r == pytest.approx(beta, abs=1e-8) for r in result.roots)
    # the reported β* is the root nearest Oster's approximation (documented choice)
    assert result.adjusted_estimate == min(result.roots,
                                           key=lambda r: abs(r - result.approximate_adjusted))
    if len(result.roots) > 1:
        assert any("real solutions" in note for note in result.notes)


def test_oster_reported_root_is_the_true_one_in_most_worlds():
    # The cubic can have three real roots, and the observables cannot tell them apart, so no
    # rule always picks the truth; over random worlds with δ in (0, 2] the root nearest the
    # approximation is the true β in most of them (81 of these 100 worlds when written).
    rng = np.random.default_rng(0)
    hits = 0
    for i in range(100):
        kappa = rng.uniform(0.2, 1.0)
        beta = rng.normal()
        inputs, delta = _oster_world(100 + i, n=400, beta=beta,
                                     controls=int(rng.integers(1, 4)), kappa=kappa,
                                     extra=rng.uniform(0, 0.5),
                                     x_on_w2=kappa * rng.uniform(0.2, 2.0),
                                     w2_scale=rng.uniform(0.3, 1.5))
        result = coefficient_stability(**inputs, delta=delta)
        assert any(r == pytest.approx(beta, abs=1e-7) for r in result.roots)
        hits += result.adjusted_estimate == pytest.approx(beta, abs=1e-7)
    assert hits >= 75


def test_oster_zero_threshold_delta_and_round_trip():
    inputs, _ = _oster_world(5, n=600, beta=0.8, controls=2, kappa=0.6, extra=0.3,
                             x_on_w2=0.5)
    r = coefficient_stability(**inputs)
    assert r.delta_for_threshold is not None
    back = coefficient_stability(**inputs, delta=r.delta_for_threshold)
    assert any(v == pytest.approx(0.0, abs=1e-8) for v in back.roots)
    # and the other direction: every root of β*(δ) gives back δ
    for delta in (0.5, 1.0, 2.0):
        b = coefficient_stability(**inputs, delta=delta)
        for root in b.roots:
            again = coefficient_stability(**inputs, threshold=root)
            assert again.delta_for_threshold == pytest.approx(delta, rel=1e-7)


def test_oster_approximation_agrees_when_controls_barely_predict_treatment():
    # Oster (2019), Prop. 1: β* ≈ β̃ - δ(β̊ - β̃)(Rmax - R̃)/(R̃ - R̊) holds when the treatment's
    # variance explained by the controls is negligible (the remaining terms vanish).
    base = {"naive_estimate": 1.0, "naive_r2": 0.2, "adjusted_estimate": 0.9, "adjusted_r2": 0.35,
                "outcome_variance": 1.0, "treatment_variance": 0.5, "r2_max": 0.45}
    r = coefficient_stability(**base, treatment_r2_controls=1e-7)
    assert r.adjusted_estimate == pytest.approx(r.approximate_adjusted, rel=0.05)
    assert r.approximate_adjusted == pytest.approx(0.9 - 0.1 * 0.10 / 0.15, rel=1e-12)
    assert r.approximate_delta == pytest.approx(0.9 * 0.15 / (0.1 * 0.10), rel=1e-12)


def test_oster_default_r2_max():
    r = coefficient_stability(0.5, 0.1, 0.4, 0.3, outcome_variance=1.0, treatment_variance=1.0,
                              treatment_r2_controls=0.1)
    assert r.r2_max == pytest.approx(0.39)
    r = coefficient_stability(0.5, 0.1, 0.4, 0.9, outcome_variance=1.0, treatment_variance=1.0,
                              treatment_r2_controls=0.1)
    assert r.r2_max == 1.0
    assert r.to_dict()["r2_max"] == 1.0


# --------------------------------------------------------------------------------------------
# Bad input


def test_error_negative_standard_error():
    with pytest.raises(NumericsError, match=r"std_error must be positive; got -0\.1"):
        robustness_values(0.1, -0.1, 100)


def test_error_dof_too_small():
    with pytest.raises(NumericsError, match=r"dof .* must be above 1 .* got 1\.0"):
        bounds(0.1, 0.1, 1, 0.1, 0.1)


def test_error_partial_r2_out_of_range():
    with pytest.raises(NumericsError,
                       match=r"r2dz must be partial R² values in \[0, 1\); got 1\.0"):
        bias_bound(0.1, 100, 0.5, 1.0)
    with pytest.raises(NumericsError,
                       match=r"r2yz must be partial R² values in \[0, 1\]; got -0\.2"):
        bounds(0.1, 0.1, 100, 0.1, [0.1, -0.2])


def test_error_not_a_number():
    with pytest.raises(NumericsError, match=r"estimate must be a number; got '0\.1'"):
        robustness_values("0.1", 0.1, 100)
    with pytest.raises(NumericsError, match=r"threshold must be a finite number; got inf"):
        robustness_values(0.1, 0.1, 100, threshold=float("inf"))


def test_error_direction_and_alpha():
    with pytest.raises(NumericsError, match=r"direction must be 'toward' or 'away'.*'up'"):
        bounds(0.1, 0.1, 100, 0.1, 0.1, direction="up")
    with pytest.raises(NumericsError, match=r"alpha must lie strictly between 0 and 1.*1\.5"):
        robustness_values(0.1, 0.1, 100, alpha=1.5)


def test_error_e_value_inputs():
    with pytest.raises(NumericsError, match=r"risk ratio must be a positive finite number"):
        risk_ratio_e_value(-2.0)
    with pytest.raises(NumericsError, match=r"needs the outcome's standard deviation"):
        e_value(2.0, measure="difference")
    with pytest.raises(NumericsError, match=r"measure must be one of .*'rate_ratio'"):
        e_value(2.0, measure="rate_ratio")
    with pytest.raises(NumericsError, match=r"odds ratio must be a positive finite number"):
        to_risk_ratio(0.0, "odds_ratio")


def test_error_oster_r2_max_below_adjusted_r2():
    with pytest.raises(NumericsError, match=r"r2_max must lie above the adjusted R² \(0\.3\)"):
        coefficient_stability(0.5, 0.1, 0.4, 0.3, outcome_variance=1.0, treatment_variance=1.0,
                              treatment_r2_controls=0.1, r2_max=0.2)
    with pytest.raises(NumericsError, match=r"naive_r2 must be an R² in \[0, 1\); got 1\.2"):
        coefficient_stability(0.5, 1.2, 0.4, 0.3, outcome_variance=1.0, treatment_variance=1.0,
                              treatment_r2_controls=0.1)


def test_error_benchmark_shapes():
    with pytest.raises(NumericsError, match=r"one value per benchmark; got 2 and 1"):
        benchmark_bounds(**DARFUR, r2dxj=[0.1, 0.2], r2yxj=[0.1])
    with pytest.raises(NumericsError, match=r"multipliers must be finite numbers of 0 or more"):
        benchmark_partial_r2(0.1, 0.1, -1.0)
