"""Tests of causalcheck.design: the standardised linear SEM, its covariance and the sampler.

Reference checks: implied correlations against Wright's (1934) path-tracing rules, computed in
this file by hand (and by an independent tracer over random DAGs); the Wishart sampler against
scipy.stats.wishart's moments.
"""

from __future__ import annotations

import itertools

import networkx as nx
import numpy as np
import pytest
from scipy import stats

from causalcheck.design import (
    build_structural_model,
    error_variances_batch,
    implied_covariance,
    resolve_strengths,
    sample_covariances,
)
from causalcheck.errors import GraphError, PlanError, StudyFileError
from causalcheck.study import parse_study


def make_study(edges: dict[str, float | list[float] | None], *, treatment: str, outcome: str,
               plan: str = "n = 1000") -> object:
    """A study file with the given edges; ``None`` leaves an edge without a strength."""
    edge_list = ", ".join(f'"{e}"' for e in edges)
    strengths = "\n".join(f'"{e}" = {v}' for e, v in edges.items() if v is not None)
    text = (f'[study]\ntreatment = "{treatment}"\noutcome = "{outcome}"\n'
            f'[graph]\nedges = [{edge_list}]\n[strengths]\n{strengths}\n[plan]\n{plan}\n')
    return parse_study(text, path="plan_test.toml")


# --------------------------------------------------------------------------------------------
# Path tracing (Wright 1934): with standardised variables and independent errors, the
# correlation of two variables is the sum, over every path that goes back against the arrows
# zero or more steps and then forward along them zero or more steps (never forward then back,
# never through a node twice), of the product of the path coefficients on it.


def test_chain_path_tracing():
    a, b = 0.6, -0.45
    model = build_structural_model(make_study({"u -> v": a, "v -> w": b},
                                              treatment="u", outcome="w"))
    # Wright (1934): r_uv = a, r_vw = b, r_uw = a*b (one traced path u -> v -> w)
    assert model.correlation("u", "v") == pytest.approx(a, abs=1e-12)
    assert model.correlation("v", "w") == pytest.approx(b, abs=1e-12)
    assert model.correlation("u", "w") == pytest.approx(a * b, abs=1e-12)
    np.testing.assert_allclose(np.diag(model.covariance()), 1.0, atol=1e-12)


def test_confounded_triangle_path_tracing():
    a, b, c = 0.5, 0.3, 0.4       # z -> x, x -> y, z -> y
    model = build_structural_model(make_study({"z -> x": a, "x -> y": b, "z -> y": c},
                                              treatment="x", outcome="y"))
    # traced by hand: x-y: x->y (b) and x<-z->y (a c); z-y: z->y (c) and z->x->y (a b)
    assert model.correlation("x", "y") == pytest.approx(b + a * c, abs=1e-12)
    assert model.correlation("z", "y") == pytest.approx(c + a * b, abs=1e-12)
    assert model.correlation("z", "x") == pytest.approx(a, abs=1e-12)
    # error variance of y: 1 - R^2, R^2 = sum_i p_i r_iy (Wright 1934)
    r2_y = b * (b + a * c) + c * (c + a * b)
    assert model.error_variances[model.index("y")] == pytest.approx(1 - r2_y, abs=1e-12)


def test_collider_path_tracing():
    a, b = 0.7, -0.2              # x -> k <- y, x and y independent
    model = build_structural_model(make_study({"x -> k": a, "y -> k": b},
                                              treatment="x", outcome="y"))
    # x-y: the only connection is x -> k <- y, forward then back: not a traced path, r = 0
    assert model.correlation("x", "y") == pytest.approx(0.0, abs=1e-12)
    assert model.correlation("x", "k") == pytest.approx(a, abs=1e-12)
    assert model.correlation("y", "k") == pytest.approx(b, abs=1e-12)
    assert model.error_variances[model.index("k")] == pytest.approx(1 - a * a - b * b)


def test_diamond_path_tracing():
    ab, ac, bd, cd, ad = 0.4, 0.5, 0.3, -0.25, 0.2
    model = build_structural_model(make_study(
        {"a -> b": ab, "a -> c": ac, "b -> d": bd, "c -> d": cd, "a -> d": ad},
        treatment="b", outcome="d"))
    # traced by hand
    expected = {
        ("b", "c"): ab * ac,                                  # b <- a -> c
        ("a", "d"): ad + ab * bd + ac * cd,                   # three forward paths
        ("b", "d"): bd + ab * ad + ab * ac * cd,              # b->d, b<-a->d, b<-a->c->d
        ("c", "d"): cd + ac * ad + ac * ab * bd,              # c->d, c<-a->d, c<-a->b->d
    }
    for (u, v), value in expected.items():
        assert model.correlation(u, v) == pytest.approx(value, abs=1e-12), (u, v)


def test_m_graph_path_tracing():
    # the M-structure: u1 -> x, u1 -> m, u2 -> m, u2 -> y, and x -> y
    p1, p2, p3, p4, p5 = 0.5, 0.4, 0.6, 0.3, 0.25
    model = build_structural_model(make_study(
        {"u1 -> x": p1, "u1 -> m": p2, "u2 -> m": p3, "u2 -> y": p4, "x -> y": p5},
        treatment="x", outcome="y"))
    assert model.correlation("x", "y") == pytest.approx(p5, abs=1e-12)        # m is a collider
    assert model.correlation("x", "m") == pytest.approx(p1 * p2, abs=1e-12)   # x <- u1 -> m
    assert model.correlation("m", "y") == pytest.approx(p3 * p4 + p2 * p1 * p5, abs=1e-12)


def _traced_correlation(graph: nx.DiGraph, coefficient: dict, i: str, j: str) -> float:
    """Wright's rules, mechanically: sum over treks i <-...<- top ->...-> j, no repeated node."""
    total = 0.0
    for top in graph.nodes:
        back = [[i]] if top == i else list(nx.all_simple_paths(graph, top, i))
        fore = [[j]] if top == j else list(nx.all_simple_paths(graph, top, j))
        for left in back:
            for right in fore:
                if set(left[1:]) & set(right[1:]) or (set(left) & set(right)) != {top}:
                    continue
                product = 1.0
                for path in (left, right):
                    for u, v in itertools.pairwise(path):
                        product *= coefficient[(u, v)]
                total += product
    return total


@pytest.mark.parametrize("seed", range(6))
def test_random_dags_match_path_tracing(seed):
    rng = np.random.default_rng(seed)
    names = [f"v{k}" for k in range(6)]
    edges = {}
    for u, v in itertools.combinations(range(6), 2):
        if rng.random() < 0.45:
            edges[f"{names[u]} -> {names[v]}"] = round(float(rng.uniform(-0.35, 0.35)), 3)
    edges.setdefault("v0 -> v5", 0.2)
    model = build_structural_model(make_study(edges, treatment="v0", outcome="v5"))
    graph = nx.DiGraph([tuple(e.split(" -> ")) for e in edges])
    coefficient = {tuple(e.split(" -> ")): w for e, w in edges.items()}
    for u, v in itertools.combinations(sorted(graph.nodes), 2):
        assert model.correlation(u, v) == pytest.approx(
            _traced_correlation(graph, coefficient, u, v), abs=1e-10), (u, v)


def test_total_effect_is_sum_over_directed_paths():
    ab, ac, bd, cd, ad = 0.4, 0.5, 0.3, -0.25, 0.2
    model = build_structural_model(make_study(
        {"a -> b": ab, "a -> c": ac, "b -> d": bd, "c -> d": cd, "a -> d": ad},
        treatment="a", outcome="d"))
    # directed paths a->d, a->b->d, a->c->d (Wright 1934)
    assert model.total_effect("a", "d") == pytest.approx(ad + ab * bd + ac * cd, abs=1e-12)
    assert model.total_effect("b", "d") == pytest.approx(bd, abs=1e-12)
    assert model.total_effect("d", "a") == pytest.approx(0.0, abs=1e-12)


def test_batched_error_variances_match_single():
    study = make_study({"z -> x": 0.5, "x -> y": 0.3, "z -> y": 0.4}, treatment="x",
                       outcome="y")
    model = build_structural_model(study)
    batch = np.stack([model.coefficients, model.coefficients * 2.0])
    omega, possible = error_variances_batch(batch)
    np.testing.assert_allclose(omega[0], model.error_variances, atol=1e-12)
    # doubled strengths: y's parents explain 0.36 + 0.64 + 2*0.6*0.8*1.0 = 1.96 -> impossible
    assert possible.tolist() == [True, False]
    assert np.isnan(omega[1]).all()
    covariance = implied_covariance(batch[:1], omega[:1])
    np.testing.assert_allclose(covariance[0], model.covariance(), atol=1e-12)


def test_defaults_and_ranges_are_recorded():
    study = make_study({"z -> x": [0.2, 0.6], "x -> y": 0.3, "z -> y": None},
                       treatment="x", outcome="y", plan="n = 100\ndefault_strength = 0.15")
    table = resolve_strengths(study)
    assert table.defaulted == (("z", "y"),)
    assert [s.edge for s in table.ranged] == [("z", "x")]
    values = table.values()
    assert values[("z", "x")] == pytest.approx(0.4)      # midpoint of the range
    assert values[("z", "y")] == pytest.approx(0.15)


# --------------------------------------------------------------------------------------------
# Wishart sampler


def test_wishart_moments_match_scipy():
    sigma = np.array([[1.0, 0.5, 0.2], [0.5, 1.0, 0.3], [0.2, 0.3, 1.0]])
    n, size = 40, 40_000
    draws = sample_covariances(sigma, n, size, np.random.default_rng(7)) * (n - 1)
    reference = stats.wishart(df=n - 1, scale=sigma)
    # scipy.stats.wishart mean m*Sigma and element variances m*(s_ij^2 + s_ii s_jj)
    mean, var = reference.mean(), reference.var()
    mc_se = np.sqrt(var / size)
    assert np.all(np.abs(draws.mean(axis=0) - mean) < 4 * mc_se)
    # SE of a sample variance ~ var * sqrt(2/size) for near-Gaussian elements; 4 SE, x1.5 for
    # the heavier-than-Gaussian tails of Wishart elements at m = 39
    assert np.all(np.abs(draws.var(axis=0) - var) < 6 * var * np.sqrt(2 / size))


def test_wishart_matches_scipy_distribution():
    sigma = np.array([[1.0, -0.4], [-0.4, 1.0]])
    n = 12
    ours = sample_covariances(sigma, n, 4000, np.random.default_rng(3))[:, 0, 1] * (n - 1)
    theirs = stats.wishart(df=n - 1, scale=sigma).rvs(size=4000, random_state=4)[:, 0, 1]
    # two-sample Kolmogorov-Smirnov test of the off-diagonal element
    assert stats.ks_2samp(ours, theirs).pvalue > 0.001


# --------------------------------------------------------------------------------------------
# Bad input


def test_error_parents_explain_all_variance():
    study = make_study({"a -> y": 0.8, "b -> y": 0.7, "a -> x": 0.3, "x -> y": 0.05},
                       treatment="x", outcome="y")
    with pytest.raises(PlanError) as caught:
        build_structural_model(study)
    message = str(caught.value)
    assert "'plan_test.toml'" in message
    assert "the strengths into 'y' are impossible" in message
    assert "a -> y = 0.8" in message and "b -> y = 0.7" in message
    # 0.64 + 0.49 + 0.0025 + 2*0.8*0.05*0.3 = 1.1565 explained
    assert "explain 1.157 of its variance" in message
    assert "Lower some of these strengths" in message


def test_error_correlated_parents_explain_too_much():
    study = make_study({"z -> x": 0.5, "z -> y": 0.6, "x -> y": 0.6}, treatment="x",
                       outcome="y")
    with pytest.raises(PlanError) as caught:
        build_structural_model(study)
    # 0.36 + 0.36 + 2*0.6*0.6*0.5 = 1.08; 0.72 squared, +0.36 from corr(z, x) = 0.5
    assert "explain 1.080 of its variance (0.720 from the squared strengths plus +0.360" \
        in str(caught.value)


def test_error_default_strengths_mentioned_when_impossible():
    edges = {f"c{k} -> y": None for k in range(6)}
    edges["c0 -> x"] = 0.2
    edges["x -> y"] = 0.2
    study = make_study(edges, treatment="x", outcome="y",
                       plan="n = 100\ndefault_strength = 0.45")
    with pytest.raises(PlanError) as caught:
        build_structural_model(study)
    message = str(caught.value)
    assert "c0 -> y = 0.45 (default), c1 -> y = 0.45 (default)" in message
    assert "strengths marked (default) are not in [strengths] and use " \
        "[plan].default_strength: give them a value or lower the default" in message


def test_error_strength_above_one_single_parent():
    with pytest.raises(StudyFileError) as caught:
        make_study({"x -> y": 1.2}, treatment="x", outcome="y")
    assert ("a standardised path coefficient must lie strictly between -1 and 1; got 1.2"
            in str(caught.value))


def test_error_strength_for_missing_edge():
    text = ('[study]\ntreatment = "x"\noutcome = "y"\n[graph]\nedges = ["x -> y"]\n'
            '[strengths]\n"y -> x" = 0.3\n')
    with pytest.raises(StudyFileError) as caught:
        parse_study(text)
    assert "the edge 'y -> x' is not in [graph].edges (the graph has x -> y; check the " \
        "direction)" in str(caught.value)


def test_error_require_strengths_lists_missing_edges():
    study = make_study({"z -> x": 0.3, "z -> y": None, "x -> y": None}, treatment="x",
                       outcome="y", plan="n = 100\nrequire_strengths = true")
    with pytest.raises(StudyFileError) as caught:
        resolve_strengths(study)
    message = str(caught.value)
    assert "[plan].require_strengths = true, but 2 edges have no strength" in message
    assert '"z -> y", "x -> y"' in message


def test_error_cycle_is_named():
    study = make_study({"x -> y": 0.2, "y -> z": 0.2, "z -> x": 0.2}, treatment="x",
                       outcome="y")
    with pytest.raises(GraphError) as caught:
        build_structural_model(study)
    assert "has a cycle x -> y -> z -> x" in str(caught.value)


def test_error_wishart_needs_enough_rows():
    with pytest.raises(PlanError) as caught:
        sample_covariances(np.eye(4), 4, 10, np.random.default_rng(0))
    assert "n = 4 rows cannot have a full-rank covariance of 4 variables" in str(caught.value)
