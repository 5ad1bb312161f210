"""Properties that must hold for every study and every data set (Hypothesis).

- the decomposition's terms sum to the naive-minus-adjusted gap, and both slopes agree with a
  least-squares fit done independently with numpy;
- a confounder at the robustness value brings the estimate exactly to the threshold (and one
  at the robustness value of the interval brings the interval's limit there);
- permuting the rows, or rescaling and shifting a covariate, changes no slope of the
  treatment; rescaling the treatment scales its slope;
- an unrelated independent column changes the treatment's slope only by the product the
  omitted-variable identity gives, within sampling noise (tolerance stated in the test), and
  not at all when it only sits in the data file;
- the minimal adjustment sets ``identify`` lists are exactly the minimal valid sets of a
  brute-force oracle (networkx ``is_d_separator`` on the proper back-door graph, with the
  forbidden nodes of the adjustment criterion), and the optimal and cheapest sets are valid,
  the cheapest of least cost.

Data are drawn from a seed Hypothesis chooses (so failures shrink to a seed and a size);
the statistical property uses ``derandomize=True``, so its rare-event tolerance cannot flake.
"""

from __future__ import annotations

import itertools
import math

import networkx as nx
import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from causalcheck import sensitivity
from causalcheck.decompose import decompose
from causalcheck.moments import moments_from_array
from causalcheck.regress import fit
from causalcheck.study import parse_study

SETTINGS = settings(max_examples=60, deadline=None,
                    suppress_health_check=[HealthCheck.too_slow])


# --------------------------------------------------------------------------------------------
# Random data sets: treatment t, outcome y, covariates z0..z{k-1}


@st.composite
def data_sets(draw, *, min_rows: int = 40, max_rows: int = 400):
    seed = draw(st.integers(0, 2**32 - 1))
    n = draw(st.integers(min_rows, max_rows))
    k = draw(st.integers(1, 4))
    into_t = draw(st.lists(st.floats(-1.5, 1.5), min_size=k, max_size=k))
    into_y = draw(st.lists(st.floats(-1.5, 1.5), min_size=k, max_size=k))
    effect = draw(st.floats(-2, 2))
    scales = draw(st.lists(st.floats(0.1, 10), min_size=k, max_size=k))
    rng = np.random.default_rng(seed)
    standard = rng.normal(size=(n, k))
    z = standard * np.asarray(scales)              # covariates in units of their own
    t = standard @ np.asarray(into_t) + rng.normal(size=n)
    y = effect * t + standard @ np.asarray(into_y) + rng.normal(size=n)
    columns = ["t", "y", *[f"z{j}" for j in range(k)]]
    return np.column_stack([t, y, z]), columns


def treatment_slope(values: np.ndarray, columns: list[str], regressors: list[str]) -> float:
    moments = moments_from_array(values, columns)
    return fit(moments, "y", ["t", *regressors]).coefficient("t")


def numpy_slope(values: np.ndarray, columns: list[str], regressors: list[str]) -> float:
    """The treatment's OLS slope by numpy's least squares on the rows (an outside check)."""
    picked = [columns.index(c) for c in ["t", *regressors]]
    design = np.column_stack([np.ones(len(values)), values[:, picked]])
    coef, *_ = np.linalg.lstsq(design, values[:, columns.index("y")], rcond=None)
    return float(coef[1])


@SETTINGS
@given(data=data_sets())
def test_decomposition_sums_to_the_gap(data):
    values, columns = data
    covariates = columns[2:]
    moments = moments_from_array(values, columns)
    parts = decompose(moments, "t", "y", covariates)
    scale = max(abs(parts.base_estimate), abs(parts.full_estimate), 1.0)
    # Gelbach (2016): naive - adjusted = sum_k gamma_k delta_k, an exact identity of OLS
    assert sum(term.contribution for term in parts.terms) == pytest.approx(parts.gap,
                                                                             abs=1e-9 * scale)
    for term in parts.terms:
        assert term.contribution == pytest.approx(term.gamma * term.delta, abs=1e-12 * scale)
    # both slopes against numpy.linalg.lstsq on the rows (relative 1e-8: the moments route
    # and the QR route agree to about that for these condition numbers)
    assert parts.base_estimate == pytest.approx(numpy_slope(values, columns, []), rel=1e-8)
    assert parts.full_estimate == pytest.approx(numpy_slope(values, columns, covariates),
                                                rel=1e-8, abs=1e-10)


@SETTINGS
@given(data=data_sets(), order_seed=st.integers(0, 2**32 - 1))
def test_permuting_rows_changes_no_slope(data, order_seed):
    values, columns = data
    permuted = values[np.random.default_rng(order_seed).permutation(len(values))]
    for regressors in ([], columns[2:], columns[2:3]):
        before = treatment_slope(values, columns, regressors)
        after = treatment_slope(permuted, columns, regressors)
        assert after == pytest.approx(before, rel=1e-9, abs=1e-12)


@SETTINGS
@given(data=data_sets(), factor=st.floats(1e-3, 1e3), shift=st.floats(-1e3, 1e3),
       which=st.integers(0, 3))
def test_rescaling_a_covariate_changes_no_slope_of_the_treatment(data, factor, shift, which):
    values, columns = data
    covariates = columns[2:]
    j = 2 + which % len(covariates)
    rescaled = values.copy()
    rescaled[:, j] = rescaled[:, j] * factor + shift
    before = treatment_slope(values, columns, covariates)
    after = treatment_slope(rescaled, columns, covariates)
    # an affine change of a regressor leaves the others' OLS slopes unchanged (FWL theorem)
    assert after == pytest.approx(before, rel=1e-8, abs=1e-10)
    # and rescaling the treatment by c divides its slope by c
    scaled_t = values.copy()
    scaled_t[:, 0] *= factor
    assert treatment_slope(scaled_t, columns, covariates) == pytest.approx(before / factor,
                                                                           rel=1e-8, abs=1e-10)


@settings(max_examples=40, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow])
@given(data=data_sets(min_rows=60), noise_seed=st.integers(0, 2**32 - 1))
def test_an_unrelated_column_moves_the_slope_only_by_sampling_noise(data, noise_seed):
    values, columns = data
    covariates = columns[2:]
    # a stream of its own (a seed equal to the data seed must not give the same numbers)
    unrelated = np.random.default_rng([noise_seed, 99]).normal(size=len(values))
    wider = np.column_stack([values, unrelated])
    names = [*columns, "w"]
    moments = moments_from_array(wider, names)
    short = fit(moments, "y", ["t", *covariates])
    long = fit(moments, "y", ["t", *covariates, "w"])
    on_t = fit(moments, "w", ["t", *covariates])
    change = short.coefficient("t") - long.coefficient("t")
    # omitted-variable algebra (Angrist & Pischke 2009, Sec. 3.2): the change is exactly
    # gamma * delta, gamma = w's slope in the long model, delta = t's slope for w
    gamma, delta = long.coefficient("w"), on_t.coefficient("t")
    assert change == pytest.approx(gamma * delta, rel=1e-7, abs=1e-12)
    # with w independent of everything, gamma/se and delta/se are each t-distributed with
    # at least 54 dof, so |each| < 6 except with probability about 1e-7 (Student t tail):
    # the tolerance is |change| <= 36 se(gamma) se(delta), of order 1/n, against the
    # treatment's own standard error of order 1/sqrt(n)
    assert abs(change) <= 36 * long.se("w") * on_t.se("t")
    # the same in the treatment's SE: se(gamma) se(delta) = se(t) / sqrt(n) up to
    # degrees-of-freedom factors (w's residual SD given t and Z appears in both and cancels),
    # so the move is at most about 36 / sqrt(n) of the SE; the factor 2 covers those factors
    assert abs(change) <= 2 * 36 / math.sqrt(len(values)) * short.se("t")


def test_an_unrelated_column_in_the_data_file_changes_no_number(tmp_path, capsys):
    """A column the graph does not name is not read: the audit is identical to the digit."""
    from causalcheck.cli import main

    rng = np.random.default_rng(5)
    n = 300
    z = rng.normal(size=n)
    t = 0.7 * z + rng.normal(size=n)
    y = 0.4 * t + z + rng.normal(size=n)
    frame = pd.DataFrame({"t": t, "y": y, "z": z})
    study = ('[study]\ntreatment = "t"\noutcome = "y"\n[data]\npath = "{name}"\n'
             '[graph]\nedges = ["z -> t", "z -> y", "t -> y"]\n')
    outputs = []
    for name, table in (("plain.csv", frame),
                        ("wider.csv", frame.assign(unrelated=rng.normal(size=n)))):
        table.to_csv(tmp_path / name, index=False)
        path = tmp_path / f"{name}.toml"
        path.write_text(study.replace("{name}", name), encoding="utf-8")
        assert main(["audit", str(path), "--format", "json"]) == 0
        text = capsys.readouterr().out
        outputs.append(text.replace(str(path), "STUDY").replace(name, "DATA"))
    assert outputs[0] == outputs[1]


# --------------------------------------------------------------------------------------------
# Sensitivity: the bound at the robustness value lands on the threshold


reported = st.tuples(
    st.floats(-100, 100).filter(lambda e: abs(e) > 1e-6),      # estimate
    st.floats(1e-3, 50),                                          # standard error
    st.floats(3, 1e6),                                            # dof
    st.floats(-3, 3),                                             # threshold, in SEs away
    st.sampled_from([0.01, 0.05, 0.1, 0.2]),                      # alpha
)


@settings(max_examples=200, deadline=None)
@given(numbers=reported)
def test_bound_at_the_robustness_value_lands_on_the_threshold(numbers):
    estimate, se, dof, shift, alpha = numbers
    threshold = estimate + shift * se
    rv = sensitivity.robustness_values(estimate, se, dof, threshold=threshold, alpha=alpha)
    scale = max(abs(estimate), abs(threshold), se)
    if rv.point < 1 - 1e-9:
        at = sensitivity.bounds(estimate, se, dof, rv.point, rv.point, threshold=threshold,
                                alpha=alpha)
        # Cinelli & Hazlett (2020), Sec. 4: RV is where |bias| = |estimate - threshold|
        assert float(at.adjusted_estimate) == pytest.approx(threshold, abs=1e-8 * scale)
        below = sensitivity.bounds(estimate, se, dof, 0.9 * rv.point, 0.9 * rv.point,
                                   threshold=threshold, alpha=alpha)
        # (when the threshold equals the estimate to rounding, 'below' is decided by rounding)
        assert not bool(below.reaches_threshold()) or abs(estimate - threshold) <= 1e-12 * scale
    if 0 < rv.ci < 1 - 1e-9:
        at = sensitivity.bounds(estimate, se, dof, rv.ci, rv.ci_r2yz, threshold=threshold,
                                alpha=alpha)
        limit = float(at.ci_low) if estimate > threshold else float(at.ci_high)
        # the robustness value of the interval: the (1 - alpha) limit just reaches it
        assert limit == pytest.approx(threshold, abs=1e-7 * scale)
    extreme = sensitivity.extreme_bound(estimate, se, dof, [rv.extreme_r2dz],
                                        threshold=threshold)
    if rv.extreme_r2dz < 1 - 1e-9:
        assert float(extreme.adjusted_estimate[0]) == pytest.approx(threshold,
                                                                    abs=1e-7 * scale)
    assert 0 <= rv.ci <= rv.point <= 1


# --------------------------------------------------------------------------------------------
# Adjustment sets against a brute-force oracle


@st.composite
def random_studies(draw):
    """A random DAG on v0..v{n-1} in a random order, a treatment before the outcome, some
    nodes unmeasured, integer costs; returned as study-file text with the parts."""
    n = draw(st.integers(3, 8))
    order = draw(st.permutations(list(range(n))))
    names = [f"v{i}" for i in order]
    density = draw(st.sampled_from([0.25, 0.5, 0.75]))
    edges = [(names[i], names[j]) for i in range(n) for j in range(i + 1, n)
             if draw(st.floats(0, 1)) < density]
    # the treatment mostly in the middle of the order, so that confounders can precede it
    x_index = draw(st.integers(0, n - 2))
    y_index = draw(st.integers(x_index + 1, n - 1))
    treatment, outcome = names[x_index], names[y_index]
    if draw(st.booleans()):
        edges.append((treatment, outcome))
    edges = list(dict.fromkeys(edges))
    # every node must appear in an edge: tie loose ones to the outcome's side of the order
    used = {v for e in edges for v in e}
    for i, name in enumerate(names):
        if name not in used:
            other = names[i + 1] if i + 1 < n else names[i - 1]
            edges.append((name, other) if i + 1 < n else (other, name))
            used |= {name, other}
    edges = list(dict.fromkeys(edges))
    # about one node in four unmeasured; the treatment and the outcome always measured
    measured = {v: v in (treatment, outcome) or draw(st.integers(0, 3)) > 0 for v in names}
    costs = {v: draw(st.integers(0, 5)) for v in names}
    lines = ["[study]", f'treatment = "{treatment}"', f'outcome = "{outcome}"', "",
             "[variables]"]
    for v in names:
        lines.append(f"{v} = {{ measured = {'true' if measured[v] else 'false'}, "
                     f"cost = {costs[v]} }}")
    lines += ["", "[graph]", "edges = [" + ", ".join(f'"{a} -> {b}"' for a, b in edges)
              + "]"]
    return "\n".join(lines) + "\n", edges, treatment, outcome, measured, costs


def oracle_valid(graph: nx.DiGraph, x: str, y: str, z: frozenset[str]) -> bool:
    """The adjustment criterion (Shpitser, VanderWeele & Robins 2010; Perković et al. 2018,
    Def. 3.3 and Thm. 3.4), checked with networkx d-separation (networkx 3.x
    ``is_d_separator``): Z holds no node of forb(X, Y) and d-separates X and Y in the proper
    back-door graph."""
    below_x = nx.descendants(graph, x)
    above_y = nx.ancestors(graph, y) | {y}
    causal = (below_x & above_y) if y in below_x else set()
    forbidden = {x} | set().union(*(nx.descendants(graph, c) | {c} for c in causal))
    if z & forbidden:
        return False
    backdoor = graph.copy()
    backdoor.remove_edges_from([(x, c) for c in causal if graph.has_edge(x, c)])
    return nx.is_d_separator(backdoor, {x}, {y}, set(z))


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(case=random_studies())
def test_adjustment_sets_match_a_brute_force_oracle(case):
    from causalcheck.graph import identify

    text, edges, x, y, measured, costs = case
    study = parse_study(text)
    result = identify(study)
    graph = nx.DiGraph(edges)
    allowed = sorted(v for v in graph.nodes if measured[v] and v not in (x, y))
    valid = [frozenset(s) for r in range(len(allowed) + 1)
             for s in itertools.combinations(allowed, r)
             if oracle_valid(graph, x, y, frozenset(s))]
    minimal = {s for s in valid if not any(other < s for other in valid)}
    assert result.minimal_sets_complete
    assert {frozenset(s) for s in result.minimal_sets} == minimal, text
    assert result.identifiable == bool(valid)
    for listed in result.minimal_sets:
        assert list(listed) == sorted(listed)
    if result.optimal_set is not None:
        assert oracle_valid(graph, x, y, frozenset(result.optimal_set))
    if valid:
        assert result.cheapest_set is not None
        assert oracle_valid(graph, x, y, frozenset(result.cheapest_set))
        cheapest = min(sum(costs[v] for v in s) for s in valid)
        assert result.cheapest_cost == pytest.approx(cheapest)
    else:
        assert result.cheapest_set is None and not result.minimal_sets


def test_the_oracle_agrees_with_the_textbook_back_door_example():
    """The oracle itself, on the M-graph (Pearl 2009, Sec. 11.3 — from memory): with
    x <- a -> m <- b -> y and a confounder c, {c} is valid, {c, m} is not, {c, m, a} is."""
    graph = nx.DiGraph([("a", "x"), ("a", "m"), ("b", "m"), ("b", "y"), ("c", "x"),
                        ("c", "y"), ("x", "y")])
    assert oracle_valid(graph, "x", "y", frozenset({"c"}))
    assert not oracle_valid(graph, "x", "y", frozenset({"c", "m"}))
    assert oracle_valid(graph, "x", "y", frozenset({"c", "m", "a"}))
    assert not oracle_valid(graph, "x", "y", frozenset())
    # a mediator is forbidden even though it would not open a path
    graph.add_edges_from([("x", "d"), ("d", "y")])
    assert not oracle_valid(graph, "x", "y", frozenset({"c", "d"}))
