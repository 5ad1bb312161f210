"""Tests of causalcheck.simulate: the Wishart shortcut against row-level simulation.

Tolerances are Monte Carlo errors: a mean is compared within 4 of its Monte Carlo standard
errors (sd / sqrt(R), Morris, White & Crowther 2019, Table 6), a standard deviation within 4
of sd / sqrt(2 (R - 1)) (the large-sample SE of a sample SD of near-Gaussian values), and a
share within 4 binomial standard errors sqrt(p (1 - p) / R). Four SEs keep the false-alarm
rate of each check below 1e-4 while still catching an error of a few percent.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from causalcheck.design import sample_covariances
from causalcheck.moments import moments_from_covariance
from causalcheck.plan import coverage_of_t_interval, power_of_t_test
from causalcheck.regress import fit
from causalcheck.simulate import fit_batch, simulate_plans

# z confounds t and y; w predicts y only; t -> y = 0.25   (order: z, w, t, y)
A, B, C, D = 0.5, 0.3, 0.25, 0.35      # z -> t, z -> y, t -> y, w -> y
NAMES = ("z", "w", "t", "y")


def population() -> np.ndarray:
    # correlations by path tracing (Wright 1934): r_zt = A, r_zy = B + A C, r_ty = C + A B,
    # r_wy = D, r_zw = r_wt = 0
    sigma = np.eye(4)
    pairs = {(0, 2): A, (0, 3): B + A * C, (2, 3): C + A * B, (1, 3): D}
    for (i, j), r in pairs.items():
        sigma[i, j] = sigma[j, i] = r
    return sigma


PLANS = [((), ()), (("z",), ("z",)), (("z", "w"), ("w", "z"))]


def row_level_estimates(sigma: np.ndarray, n: int, replications: int, adjust: list[str],
                        rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """Slope and classical SE of t from n simulated rows each, by numpy lstsq (independent)."""
    lower = np.linalg.cholesky(sigma)
    columns = [NAMES.index(c) for c in ["t", *adjust]]
    estimates, errors = np.empty(replications), np.empty(replications)
    for r in range(replications):
        rows = rng.standard_normal((n, 4)) @ lower.T
        design = np.column_stack([np.ones(n), rows[:, columns]])
        coef, residual, *_ = np.linalg.lstsq(design, rows[:, 3], rcond=None)
        sigma2 = residual[0] / (n - design.shape[1])
        errors[r] = math.sqrt(sigma2 * np.linalg.inv(design.T @ design)[1, 1])
        estimates[r] = coef[1]
    return estimates, errors


def test_fit_batch_equals_regress_fit_draw_by_draw():
    sigma = population()
    draws = sample_covariances(sigma, 60, 25, np.random.default_rng(5))
    for plan_measure, adjust in PLANS:
        regressors = [NAMES.index(c) for c in ["t", *sorted(adjust)]]
        estimate, error, dof = fit_batch(draws, 3, regressors, 60)
        for r in range(len(draws)):
            moments = moments_from_covariance(draws[r], columns=NAMES, n=60)
            reference = fit(moments, "y", ["t", *sorted(adjust)])
            assert estimate[r] == pytest.approx(reference.coefficient("t"), rel=1e-10)
            assert error[r] == pytest.approx(reference.se("t"), rel=1e-10)
            assert dof == reference.dof


def test_wishart_shortcut_matches_row_simulation():
    sigma = population()
    n = 120
    wishart = simulate_plans(sigma, NAMES, "t", "y", PLANS, n=n, replications=6000,
                             true_effect=C, rng=np.random.default_rng(1))
    rng = np.random.default_rng(2)
    for option, (_, adjust) in zip(wishart.options, PLANS):
        rows, rows_se = row_level_estimates(sigma, n, 1500, sorted(adjust), rng)
        # means within 4 Monte Carlo SEs of their difference
        se_difference = math.sqrt(option.sd_estimate ** 2 / 6000 + rows.var(ddof=1) / 1500)
        assert abs(option.mean_estimate - rows.mean()) < 4 * se_difference, adjust
        # spreads within 4 SEs of the difference of two sample SDs
        sd_rows = rows.std(ddof=1)
        se_sd = math.sqrt(option.sd_estimate ** 2 / (2 * 5999) + sd_rows ** 2 / (2 * 1499))
        assert abs(option.sd_estimate - sd_rows) < 4 * se_sd, adjust
        # the reported standard errors agree on average too
        se_mean_se = math.sqrt(rows_se.var(ddof=1) / 1500)
        assert abs(option.mean_std_error - rows_se.mean()) < 4 * se_mean_se + 1e-4, adjust


def test_rows_method_of_simulate_plans_agrees_with_wishart():
    sigma = population()
    common = {"n": 80, "true_effect": C}
    fast = simulate_plans(sigma, NAMES, "t", "y", PLANS[1:2], replications=4000,
                          rng=np.random.default_rng(3), **common)
    slow = simulate_plans(sigma, NAMES, "t", "y", PLANS[1:2], replications=800,
                          rng=np.random.default_rng(4), method="rows", **common)
    a, b = fast.options[0], slow.options[0]
    se = math.sqrt(a.sd_estimate ** 2 / 4000 + b.sd_estimate ** 2 / 800)
    assert abs(a.mean_estimate - b.mean_estimate) < 4 * se
    assert slow.method == "rows" and fast.method == "wishart"


def test_valid_plans_cover_at_nominal_rate_and_match_exact_spread():
    sigma = population()
    n, replications = 150, 20_000
    result = simulate_plans(sigma, NAMES, "t", "y", PLANS, n=n, replications=replications,
                            true_effect=C, alpha=0.05, rng=np.random.default_rng(8))
    naive, adjusted, efficient = result.options
    for option in (adjusted, efficient):                 # valid: z blocks the back door
        # coverage within 4 binomial SEs of 95%
        assert abs(option.coverage - 0.95) < 4 * math.sqrt(0.95 * 0.05 / replications)
        # mean within 4 MC SEs of the true effect: unbiased
        assert abs(option.mean_estimate - C) < 4 * option.mc_se_mean
    # the naive slope is biased by A * B (gamma * delta) and its intervals under-cover
    assert abs(naive.mean_estimate - (C + A * B)) < 4 * naive.mc_se_mean
    assert naive.coverage < 0.6                          # about 0.48: bias = 2 SE
    # exact sampling SD under Gaussian rows: sigma^2(y|t,Z) / ((n - |Z| - 3) Var(t|Z)), the
    # inverse-Wishart mean (Anderson 2003, Sec. 7.2)
    residual = 1 - (C ** 2 + B ** 2 + 2 * A * B * C)     # y on (t, z): 1 - R^2
    exact = math.sqrt(residual / ((n - 1 - 3) * (1 - A ** 2)))
    assert abs(adjusted.sd_estimate - exact) < 4 * exact / math.sqrt(2 * (replications - 1))
    # adding the outcome predictor w shrinks the spread (Henckel et al. 2022)
    assert efficient.sd_estimate < adjusted.sd_estimate


def test_simulated_power_matches_analytic_power():
    # a smaller effect so that power is near one half, where it is most informative
    sigma = population()
    n, replications = 60, 20_000
    result = simulate_plans(sigma, NAMES, "t", "y", PLANS[1:2], n=n,
                            replications=replications, true_effect=C,
                            rng=np.random.default_rng(12))
    moments = moments_from_covariance(sigma, columns=NAMES, n=n)
    reference = fit(moments, "y", ["t", "z"])
    analytic = power_of_t_test(reference.coefficient("t"), reference.se("t"), reference.dof,
                               alpha=0.05)
    assert 0.3 < analytic < 0.9
    simulated = result.options[0].power
    # 4 binomial SEs, plus 0.02 for the fixed-design approximation of the analytic power
    # (the standard error itself varies from sample to sample)
    assert abs(simulated - analytic) < 4 * math.sqrt(analytic * (1 - analytic) /
                                                     replications) + 0.02


def test_progress_bar_only_when_asked(capsys):
    sigma = population()
    simulate_plans(sigma, NAMES, "t", "y", PLANS, n=50, replications=300, true_effect=C,
                   rng=np.random.default_rng(0), progress=False)
    assert capsys.readouterr().err == ""
    simulate_plans(sigma, NAMES, "t", "y", PLANS, n=50, replications=300, true_effect=C,
                   rng=np.random.default_rng(0), progress=True)
    assert "simulating" in capsys.readouterr().err


def test_error_unknown_method():
    with pytest.raises(ValueError) as caught:
        simulate_plans(population(), NAMES, "t", "y", PLANS, n=50, replications=10,
                       true_effect=C, rng=np.random.default_rng(0), method="bootstrap")
    assert "method must be 'wishart' or 'rows'; got 'bootstrap'" in str(caught.value)


def test_simulated_coverage_of_a_biased_plan_matches_analytic_coverage():
    # the naive plan (no adjustment) is biased by A * B = 0.15 (gamma * delta)
    sigma = population()
    n, replications = 150, 20_000
    result = simulate_plans(sigma, NAMES, "t", "y", PLANS[:1], n=n,
                            replications=replications, true_effect=C,
                            rng=np.random.default_rng(21))
    reference = fit(moments_from_covariance(sigma, columns=NAMES, n=n), "y", ["t"])
    bias = reference.coefficient("t") - C
    assert bias == pytest.approx(A * B, abs=1e-12)
    analytic = coverage_of_t_interval(bias, reference.se("t"), reference.dof, alpha=0.05)
    assert 0.2 < analytic < 0.8
    # 4 binomial SEs plus 0.02 for the fixed-design approximation
    simulated = result.options[0].coverage
    assert abs(simulated - analytic) < 4 * math.sqrt(analytic * (1 - analytic) /
                                                     replications) + 0.02


def test_batch_summaries_merge_exactly(monkeypatch):
    import causalcheck.simulate as simulate_module

    sigma = population()
    monkeypatch.setattr(simulate_module, "_BATCH_ELEMENTS", 16 * 7)     # 7 draws a batch
    result = simulate_plans(sigma, NAMES, "t", "y", PLANS, n=40, replications=50,
                            true_effect=C, rng=np.random.default_rng(31))
    # the same draws, batch by batch, then summarised in one go
    rng = np.random.default_rng(31)
    draws = np.concatenate([sample_covariances(sigma, 40, size, rng)
                            for size in [7] * 7 + [1]])
    for option, (_, adjust) in zip(result.options, PLANS):
        estimate, error, dof = fit_batch(draws, 3, [2, *(NAMES.index(v)
                                                        for v in sorted(adjust))], 40)
        assert option.mean_estimate == pytest.approx(estimate.mean(), rel=1e-12)
        assert option.sd_estimate == pytest.approx(estimate.std(ddof=1), rel=1e-10)
        assert option.mean_std_error == pytest.approx(error.mean(), rel=1e-12)
        assert option.empirical_rmse == pytest.approx(
            math.sqrt(np.mean((estimate - C) ** 2)), rel=1e-12)
