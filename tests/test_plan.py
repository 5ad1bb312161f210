"""Tests of causalcheck.plan: population truth, measurement plans, strength ranges.

Reference checks: the omitted-variable-bias identity (Angrist & Pischke 2009, Sec. 3.2;
Gelbach 2016) computed from the implied covariance in this file with numpy; the standard
error against statsmodels OLS on rows whose sample covariance equals the implied one; total
effects against Wright's (1934) sum over directed paths; the t-test power against statsmodels'
TTestPower.
"""

from __future__ import annotations

import importlib
import itertools
import math

import numpy as np
import pytest
import statsmodels.api as sm
from scipy.stats import qmc
from statsmodels.stats.power import TTestPower

from causalcheck.design import build_structural_model
from causalcheck.errors import PlanError, StudyFileError
from causalcheck.plan import plan, plan_study, power_of_t_test, random_streams
from causalcheck.study import parse_study

plan_module = importlib.import_module("causalcheck.plan")  # the name `plan` is the function


def make_study(edges: dict, *, unmeasured: dict[str, float] | None = None,
               plan_lines: str = "n = 1000", treatment: str = "t", outcome: str = "y",
               extra: str = "") -> object:
    """A planning study: ``edges`` maps "a -> b" to a strength, a [low, high] list or None."""
    listed = ", ".join(f'"{e}"' for e in edges)
    strengths = "\n".join(f'"{e}" = {v}' for e, v in edges.items() if v is not None)
    variables = "\n".join(f"{name} = {{ measured = false, cost = {cost} }}"
                          for name, cost in (unmeasured or {}).items())
    text = (f'[study]\ntreatment = "{treatment}"\noutcome = "{outcome}"\n{extra}\n'
            f'[graph]\nedges = [{listed}]\n[variables]\n{variables}\n'
            f'[strengths]\n{strengths}\n[plan]\n{plan_lines}\n')
    return parse_study(text, path="planning.toml")


def ols_slope(sigma: np.ndarray, names: tuple[str, ...], outcome: str,
              regressors: list[str]) -> np.ndarray:
    """Population regression coefficients Sigma_XX^{-1} Sigma_Xy, by numpy (independent)."""
    ix = [names.index(r) for r in regressors]
    iy = names.index(outcome)
    return np.linalg.solve(sigma[np.ix_(ix, ix)], sigma[ix, iy])


CONFOUNDED = {
    "z -> t": 0.3, "z -> y": 0.2, "u1 -> t": 0.4, "u1 -> y": 0.3, "u1 -> z": 0.3,
    "u2 -> t": -0.2, "u2 -> y": 0.25, "t -> y": 0.2,
}


def test_bias_is_sum_of_gamma_delta_of_left_out_confounders():
    study = make_study(CONFOUNDED, unmeasured={"u1": 10, "u2": 20})
    result = plan_study(study)
    model = build_structural_model(study)
    sigma, names = model.covariance(), model.variables
    long = ["z", "u1", "u2"]                     # a valid set: every back-door path blocked
    for option in result.options:
        kept = sorted(option.adjust_for)
        omitted = [v for v in long if v not in kept]
        # gamma_j: coefficient of omitted U_j in the long regression y ~ t + all of `long`
        long_coef = ols_slope(sigma, names, "y", ["t", *long])
        gamma = {v: long_coef[1 + long.index(v)] for v in omitted}
        # delta_j: coefficient of t in the auxiliary regression U_j ~ t + kept
        delta = {v: ols_slope(sigma, names, v, ["t", *kept])[0] for v in omitted}
        # Angrist & Pischke (2009), Sec. 3.2: short - long = sum_j gamma_j delta_j
        expected_bias = sum(gamma[v] * delta[v] for v in omitted)
        assert option.bias == pytest.approx(expected_bias, abs=1e-10), option.adjust_for
        assert option.valid == (not omitted)
    # the true effect has a single directed path t -> y (Wright 1934)
    assert result.true_effect == pytest.approx(0.2, abs=1e-12)


def test_standard_error_matches_statsmodels_on_rows_with_that_covariance():
    study = make_study(CONFOUNDED, unmeasured={"u1": 10, "u2": 20}, plan_lines="n = 300")
    result = plan_study(study)
    model = build_structural_model(study)
    sigma, names = model.covariance(), model.variables
    rng = np.random.default_rng(11)
    rows = rng.standard_normal((300, len(names)))
    rows -= rows.mean(axis=0)
    # whiten so the sample covariance is exactly I, then colour it to exactly Sigma
    rows = rows @ np.linalg.inv(np.linalg.cholesky(np.cov(rows, rowvar=False))).T
    rows = rows @ np.linalg.cholesky(sigma).T
    np.testing.assert_allclose(np.cov(rows, rowvar=False), sigma, atol=1e-12)
    for option in result.options:
        columns = ["t", *option.adjust_for]
        design = sm.add_constant(rows[:, [names.index(c) for c in columns]])
        fitted = sm.OLS(rows[:, names.index("y")], design).fit()
        # statsmodels OLS, classical standard errors, on the same moments
        assert option.std_error == pytest.approx(fitted.bse[1], rel=1e-9)
        assert option.estimate == pytest.approx(fitted.params[1], rel=1e-9)
        assert option.dof == int(fitted.df_resid)
        # SE^2 = sigma^2(y|t,Z) / ((n - |Z| - 2) Var(t|Z)), from Sigma by numpy
        ix = [names.index(c) for c in columns]
        iy = names.index("y")
        residual = sigma[iy, iy] - sigma[iy, ix] @ np.linalg.solve(
            sigma[np.ix_(ix, ix)], sigma[ix, iy])
        z = ix[1:]
        var_t = sigma[ix[0], ix[0]] - (sigma[ix[0], z] @ np.linalg.solve(
            sigma[np.ix_(z, z)], sigma[z, ix[0]]) if z else 0.0)
        assert option.std_error == pytest.approx(
            math.sqrt(residual / ((300 - len(z) - 2) * var_t)), rel=1e-10)
        assert option.rmse == pytest.approx(math.hypot(option.bias, option.std_error))


def test_total_effect_through_a_mediator_and_mediator_never_adjusted():
    edges = {"t -> m": 0.5, "m -> y": 0.4, "t -> y": 0.1, "c -> t": 0.3, "c -> y": 0.3}
    result = plan_study(make_study(edges))
    # Wright (1934): directed paths t -> y (0.1) and t -> m -> y (0.5 * 0.4)
    assert result.true_effect == pytest.approx(0.1 + 0.5 * 0.4, abs=1e-12)
    assert result.recommended.adjust_for == ("c",)
    assert result.recommended.bias == pytest.approx(0.0, abs=1e-12)
    assert all("m" not in o.adjust_for for o in result.options)


HEAT = {
    "income -> grant": 0.3, "income -> bill": 0.25, "attitude -> grant": 0.3,
    "attitude -> bill": 0.25, "grant -> thermostat": 0.3, "thermostat -> bill": -0.2,
    "grant -> bill": -0.15, "age -> insulation": 0.3, "insulation -> grant": 0.2,
    "insulation -> bill": -0.3, "age -> bill": 0.2, "region -> bill": 0.4,
}


def heat_study(plan_lines: str = "n = 2000\nbudget = 30", **kwargs):
    return make_study(HEAT, treatment="grant", outcome="bill",
                      unmeasured={"attitude": 40, "insulation": 15, "age": 5, "region": 3},
                      plan_lines=plan_lines, **kwargs)


def test_pareto_front_budget_and_recommendation():
    result = plan_study(heat_study())
    options = result.options
    # Pareto flags by brute force: no other option at most as costly and at most as bad
    for a in options:
        dominated = any(b.cost <= a.cost and b.rmse <= a.rmse and
                        (b.cost < a.cost or b.rmse < a.rmse) for b in options if b is not a)
        assert a.pareto == (not dominated), a.key
    affordable = [o for o in options if o.cost <= 30]
    assert result.recommended.cost <= 30
    assert result.recommended.rmse == pytest.approx(min(o.rmse for o in affordable))
    assert all(o.within_budget == (o.cost <= 30) for o in options)
    # measure nothing more: adjusts for what is measured already, biased (attitude left out)
    assert result.baseline.measure == () and result.baseline.baseline
    assert not result.baseline.valid and abs(result.baseline.bias) > 0.01
    # costs are sums of the measured variables' costs
    cost = {"attitude": 40, "insulation": 15, "age": 5, "region": 3}
    for option in options:
        assert option.cost == pytest.approx(sum(cost[v] for v in option.measure))
        assert set(option.measure) <= set(option.adjust_for)   # a plan measures what it uses
    # without a budget, the best of all options
    unlimited = plan_study(heat_study(plan_lines="n = 2000"))
    assert unlimited.recommended.rmse == pytest.approx(min(o.rmse for o in unlimited.options))
    assert unlimited.recommended.valid


def test_valid_plan_uses_lowest_standard_error_set():
    study = heat_study(plan_lines="n = 2000")
    result = plan_study(study)
    best = result.best_valid
    assert best is not None
    # brute force over every set of non-descendants of the treatment: with generic strengths
    # the unbiased sets are the valid ones, and among them the optimal set O has the smallest
    # asymptotic variance (Henckel, Perkovic & Maathuis 2022, Thm. 3.10)
    model = build_structural_model(study)
    sigma, names = model.covariance(), model.variables
    pool = ["age", "attitude", "income", "insulation", "region"]
    smallest = math.inf
    for size in range(len(pool) + 1):
        for subset in itertools.combinations(pool, size):
            columns = ["grant", *subset]
            slope = ols_slope(sigma, names, "bill", columns)[0]
            if abs(slope - result.true_effect) > 1e-12:
                continue
            ix = [names.index(c) for c in columns]
            iy = names.index("bill")
            residual = sigma[iy, iy] - sigma[iy, ix] @ np.linalg.solve(
                sigma[np.ix_(ix, ix)], sigma[ix, iy])
            precision = np.linalg.inv(sigma[np.ix_(ix, ix)])[0, 0]   # 1 / Var(t | Z)
            smallest = min(smallest, math.sqrt(residual * precision / (2000 - size - 2)))
    assert best.std_error == pytest.approx(smallest, rel=1e-10)
    # region only predicts the outcome: the best valid plan measures it although validity
    # does not need it
    assert "region" in best.adjust_for


def test_biased_plan_can_beat_unbiased_one_in_rmse():
    # a weak confounder that strongly predicts the treatment: adjusting removes a small bias
    # at the price of a much larger standard error (Var(t | u) = 1 - 0.9^2)
    edges = {"u -> t": 0.9, "u -> y": 0.02, "t -> y": 0.1}
    result = plan_study(make_study(edges, unmeasured={"u": 0}, plan_lines="n = 200"))
    assert result.biased_beats_unbiased
    assert not result.recommended.valid and result.recommended.measure == ()
    assert result.best_valid is not None and result.best_valid.measure == ("u",)
    assert result.recommended.rmse < result.best_valid.rmse
    assert any("depends on the assumed strengths" in note for note in result.notes)
    # at a much larger n the unbiased plan wins: the bias does not shrink, the SE does
    large = plan_study(make_study(edges, unmeasured={"u": 0}, plan_lines="n = 200000"))
    assert large.recommended.valid and not large.biased_beats_unbiased


def test_pruned_search_finds_the_exhaustive_answer(monkeypatch):
    exhaustive = plan_study(heat_study(plan_lines="n = 2000"))
    assert exhaustive.search.method == "exhaustive"
    assert exhaustive.search.plans_examined == 2 ** 4
    monkeypatch.setattr(plan_module, "EXHAUSTIVE_PLANS", 2)
    pruned = plan_study(heat_study(plan_lines="n = 2000"))
    assert pruned.search.method == "pruned"
    assert pruned.search.plans_examined < 2 ** 4
    assert pruned.recommended.key == exhaustive.recommended.key
    assert any("pruned search" in note for note in pruned.notes)
    # every pruned option is one of the exhaustive options, with the same numbers
    by_key = {o.key: o for o in exhaustive.options}
    for option in pruned.options:
        assert option.rmse == pytest.approx(by_key[option.key].rmse, rel=1e-12)


def test_many_unmeasured_confounders_use_pruned_search():
    edges = {f"u{k} -> t": 0.12 for k in range(14)}
    edges.update({f"u{k} -> y": 0.1 for k in range(14)})
    edges["t -> y"] = 0.3
    unmeasured = {f"u{k}": 1 + k for k in range(14)}
    result = plan_study(make_study(edges, unmeasured=unmeasured, plan_lines="n = 5000"))
    assert result.search.method == "pruned"
    best_valid = result.best_valid
    assert best_valid is not None
    assert best_valid.measure == tuple(sorted(unmeasured))
    assert best_valid.cost == pytest.approx(sum(unmeasured.values()))


def test_default_strengths_are_stated():
    edges = dict(CONFOUNDED)
    edges["u2 -> y"] = None
    result = plan_study(make_study(edges, plan_lines="n = 500\ndefault_strength = 0.1"))
    assert result.model.strengths.defaulted == (("u2", "y"),)
    assert any("default_strength = 0.1: u2 -> y" in note for note in result.notes)
    assert result.to_dict()["strengths"]["defaulted"] == ["u2 -> y"]


# --------------------------------------------------------------------------------------------
# Strength ranges


def test_range_sweep_counts_impossible_draws_and_summarises():
    edges = {"a -> y": [0.1, 0.95], "b -> y": [0.1, 0.95], "a -> t": 0.4, "t -> y": 0.05}
    study = make_study(edges, unmeasured={"a": 5},
                       plan_lines="n = 400\nrange_draws = 50\nseed = 9")
    result = plan_study(study)
    sweep = result.sweep
    assert sweep is not None and sweep.requested == 50
    # the same Latin hypercube, counted by hand: y's parents explain
    # a^2 + b^2 + t^2 + 2 a t r_at (r_at = 0.4); impossible at >= 1
    unit = qmc.LatinHypercube(d=2, rng=random_streams(9)[0]).random(50)
    a = 0.1 + unit[:, 0] * 0.85
    b = 0.1 + unit[:, 1] * 0.85
    explained = a ** 2 + b ** 2 + 0.05 ** 2 + 2 * a * 0.05 * 0.4
    assert sweep.skipped_impossible == int(np.sum(explained >= 1))
    assert 0 < sweep.skipped_impossible < 50
    assert sweep.used == 50 - sweep.skipped_impossible
    # baseline (a not measured): bias = gamma * delta with gamma = a_y, delta = r_at = 0.4
    possible = explained < 1
    expected = np.abs(a[possible] * 0.4)
    over = result.baseline.over_range
    assert over is not None and over.draws == sweep.used
    assert over.bias_abs_median == pytest.approx(float(np.median(expected)), rel=1e-9)
    assert over.bias_abs_worst == pytest.approx(float(expected.max()), rel=1e-9)
    # a valid plan is unbiased over the whole range
    valid = [o for o in result.options if o.valid]
    assert valid and all(o.over_range.bias_abs_worst < 1e-12 for o in valid)


def test_range_sweep_is_reproducible_by_seed():
    edges = dict(CONFOUNDED)
    edges["u1 -> y"] = [0.1, 0.5]
    study = make_study(edges, unmeasured={"u1": 10, "u2": 20})
    first = plan_study(study).baseline.over_range
    again = plan_study(study).baseline.over_range
    other = plan_study(study, seed=5).baseline.over_range
    assert first == again
    assert first != other


# --------------------------------------------------------------------------------------------
# Power


def test_power_matches_statsmodels_t_test_power():
    # statsmodels TTestPower (one-sample t test): noncentral t with df = nobs - 1 and
    # noncentrality d * sqrt(nobs); ours with delta = estimate / se and the same df
    for nobs, d in ((50, 0.3), (200, 0.1), (30, 0.6)):
        delta = d * math.sqrt(nobs)
        ours = power_of_t_test(delta, 1.0, nobs - 1, alpha=0.05)
        theirs = TTestPower().power(effect_size=d, nobs=nobs, alpha=0.05,
                                    alternative="two-sided")
        assert ours == pytest.approx(theirs, abs=1e-8)


# --------------------------------------------------------------------------------------------
# Simulation through the plan


def test_simulation_is_attached_and_seeded():
    study = make_study(CONFOUNDED, unmeasured={"u1": 10, "u2": 20}, plan_lines="n = 300")
    result = plan(study, simulate=400, seed=4)
    again = plan(study, simulate=400, seed=4)
    assert result.simulation is not None
    assert result.to_dict()["simulation"]["replications"] == 400
    assert [o.mean_estimate for o in result.simulation.options] == \
        [o.mean_estimate for o in again.simulation.options]
    assert len(result.simulation.options) == len(result.options)
    assert plan(study).to_dict()["simulation"] is None


# --------------------------------------------------------------------------------------------
# Bad input


def test_error_no_plan_n():
    study = make_study(CONFOUNDED, plan_lines="budget = 10")
    with pytest.raises(StudyFileError) as caught:
        plan_study(study)
    message = str(caught.value)
    assert "study file 'planning.toml' has 1 problem" in message
    assert "[plan].n: is missing; planning needs the planned sample size" in message


def test_error_n_not_above_parameters():
    study = make_study(CONFOUNDED, plan_lines="n = 5")
    with pytest.raises(StudyFileError) as caught:
        plan_study(study)
    assert ("n = 5 is too small for this graph: the largest regression a plan may fit has 5 "
            "parameters (intercept, treatment and the 3 other variables), so n must be at "
            "least 6") in str(caught.value)


def test_error_impossible_strengths_in_plan():
    edges = {"a -> y": 0.8, "b -> y": 0.7, "t -> y": 0.3, "a -> t": 0.2}
    with pytest.raises(PlanError) as caught:
        plan_study(make_study(edges))
    assert "the strengths into 'y' are impossible" in str(caught.value)


def test_error_require_strengths():
    edges = dict(CONFOUNDED)
    edges["u2 -> y"] = None
    study = make_study(edges, plan_lines="n = 500\nrequire_strengths = true")
    with pytest.raises(StudyFileError) as caught:
        plan_study(study)
    assert 'but 1 edge has no strength: "u2 -> y"' in str(caught.value)


def test_error_negative_cost_and_budget():
    text = ('[study]\ntreatment = "t"\noutcome = "y"\n[graph]\nedges = ["u -> t", "u -> y", '
            '"t -> y"]\n[variables]\nu = { measured = false, cost = -3 }\n[plan]\nn = 100\n'
            'budget = -1\n')
    with pytest.raises(StudyFileError) as caught:
        parse_study(text)
    message = str(caught.value)
    assert "[variables].u.cost" in message and "must be a cost of zero or more; got -3" \
        in message
    assert "[plan].budget" in message and "must be a budget of zero or more; got -1" in message


def test_error_no_graph():
    study = parse_study('[reported]\nestimate = 1.0\nstd_error = 0.5\n[plan]\nn = 100\n',
                        path="vet_only.toml")
    with pytest.raises(StudyFileError) as caught:
        plan_study(study)
    assert "planning needs a causal graph with a treatment and an outcome" in str(caught.value)


def test_every_option_field_is_finite():
    result = plan_study(heat_study())
    for option in result.options:
        for value in (option.cost, option.bias, option.std_error, option.rmse,
                      option.estimate, option.power):
            assert math.isfinite(value)


@pytest.mark.parametrize("seed", range(3))
def test_random_graphs_valid_options_are_unbiased(seed):
    rng = np.random.default_rng(100 + seed)
    names = ["a", "b", "c", "d", "t", "y"]
    edges = {"t -> y": 0.2}
    for i, j in itertools.combinations(range(len(names)), 2):
        if names[i] in ("y",) or (names[i], names[j]) == ("t", "y"):
            continue
        if rng.random() < 0.5:
            edges[f"{names[i]} -> {names[j]}"] = round(float(rng.uniform(-0.3, 0.3)), 3)
    nodes = {n for e in edges for n in e.split(" -> ")}
    unmeasured = {v: k + 1 for k, v in enumerate(sorted(nodes - {"t", "y"})[:2])}
    study = make_study(edges, unmeasured=unmeasured, plan_lines="n = 800")
    result = plan_study(study)
    for option in result.options:
        if option.valid:
            assert abs(option.bias) < 1e-10, option.key
        assert option.std_error > 0


def test_range_sweep_matches_regress_fit_draw_by_draw():
    edges = dict(CONFOUNDED)
    edges["u1 -> y"] = [0.1, 0.5]
    edges["z -> t"] = [0.0, 0.4]
    study = make_study(edges, unmeasured={"u1": 10, "u2": 20},
                       plan_lines="n = 700\nrange_draws = 16\nseed = 2")
    result = plan_study(study)
    base = build_structural_model(study)
    unit = qmc.LatinHypercube(d=2, rng=random_streams(2)[0]).random(16)
    ranged = base.strengths.ranged
    for option in result.options:
        rmse = []
        for u in unit:
            values = {s.edge: s.low + x * (s.high - s.low) for s, x in zip(ranged, u)}
            model = base.with_strengths(values)
            moments = plan_module.moments_from_covariance(
                model.covariance(), columns=model.variables, n=700)
            found = plan_module.population_fit(moments, "t", "y", option.adjust_for,
                                               true_effect=model.total_effect("t", "y"))
            rmse.append(found.rmse)
        assert option.over_range.rmse_worst == pytest.approx(max(rmse), rel=1e-10)
        assert option.over_range.rmse_median == pytest.approx(float(np.median(rmse)),
                                                              rel=1e-10)
