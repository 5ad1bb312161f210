"""Tests of causalcheck.graph: the identification engine.

Three kinds of checks:

- a reference oracle: hundreds of seeded random DAGs with unmeasured nodes, where every answer
  of the engine is recomputed by brute force from the published definitions, using only
  networkx primitives (``all_simple_paths``, ``descendants``, ``is_d_separator``);
- the catalogue of good, neutral and bad controls of Cinelli, Forney & Pearl (2022), each model
  with its published verdict;
- error paths, each asserting the message text.
"""

from __future__ import annotations

import itertools
import json
import random
from dataclasses import replace

import networkx as nx
import numpy as np
import pytest

from causalcheck import graph as G
from causalcheck.errors import GraphError
from causalcheck.report.jsonout import dumps
from causalcheck.study import Study, Variable, parse_study

# --------------------------------------------------------------------------------------------
# Brute-force definitions (independent of the engine's code)


def brute_causal_nodes(g, t, y):
    """cn(T, Y): nodes other than T on some directed path T -> ... -> Y."""
    nodes = set()
    for path in nx.all_simple_paths(g, t, y):
        nodes.update(path[1:])
    return nodes


def brute_forbidden(g, t, y):
    """forb(T, Y) = {T} ∪ cn ∪ de(cn) (Perković et al. 2018, Sec. 4 — from memory)."""
    causal = brute_causal_nodes(g, t, y)
    forbidden = {t} | causal
    for c in causal:
        forbidden |= nx.descendants(g, c)
    return forbidden


def brute_pbd(g, t, y):
    causal = brute_causal_nodes(g, t, y)
    pbd = g.copy()
    pbd.remove_edges_from([(t, c) for c in list(g.successors(t)) if c in causal])
    return pbd


def brute_valid(g, t, y, z):
    """The adjustment criterion (Shpitser, VanderWeele & Robins 2010)."""
    z = set(z)
    if z & brute_forbidden(g, t, y):
        return False
    return nx.is_d_separator(brute_pbd(g, t, y), {t}, {y}, z)


def brute_valid_sets(g, t, y, allowed):
    candidates = sorted(set(allowed) - {t, y})
    forbidden = brute_forbidden(g, t, y)
    pbd = brute_pbd(g, t, y)
    found = []
    for size in range(len(candidates) + 1):
        for subset in itertools.combinations(candidates, size):
            z = set(subset)
            if not z & forbidden and nx.is_d_separator(pbd, {t}, {y}, z):
                found.append(frozenset(z))
    return found


def brute_minimal(valid_sets):
    """Minimal by inclusion; the sets come in order of size, so a smaller valid set is seen first."""
    minimal = []
    for s in valid_sets:
        if not any(m <= s for m in minimal):
            minimal.append(s)
    return minimal


def brute_optimal(g, t, y):
    """O = pa(cn) \\ forb (Henckel, Perković & Maathuis 2022, Sec. 3 — from memory)."""
    causal = brute_causal_nodes(g, t, y)
    parents = set()
    for c in causal:
        parents |= set(g.predecessors(c))
    return parents - brute_forbidden(g, t, y)


def brute_biasing_paths(g, t, y):
    skeleton = g.to_undirected()
    return {tuple(p) for p in nx.all_simple_paths(skeleton, t, y)
            if not all(g.has_edge(a, b) for a, b in itertools.pairwise(p))}


def brute_roles(g, t, y):
    """The role definitions of the module docstring, written with d-separation calls."""
    de_t = nx.descendants(g, t)
    de_y = nx.descendants(g, y)
    causal = brute_causal_nodes(g, t, y)
    cut = g.copy()
    cut.remove_edges_from(list(g.out_edges(t)))
    common = {c for c in g if c not in (t, y) and nx.has_path(g, c, t) and nx.has_path(cut, c, y)}
    colliders = set()
    for p in brute_biasing_paths(g, t, y):
        for a, b, c in zip(p, p[1:], p[2:]):
            if g.has_edge(a, b) and g.has_edge(c, b):
                colliders.add(b)
    collider_like = set(colliders)
    for c in colliders:
        collider_like |= nx.descendants(g, c)
    roles = {}
    for v in g:
        if v == t:
            roles[v] = {"treatment"}
            continue
        if v == y:
            roles[v] = {"outcome"}
            continue
        found = set()
        outside = v not in de_t and v not in de_y
        tied_t = not nx.is_d_separator(g, {v}, {t}, set())
        tied_y = not nx.is_d_separator(cut, {v}, {y}, set())
        if outside and any(v == c or v in nx.descendants(g, c) for c in common):
            found.add("confounder")
        if v in causal:
            found.add("mediator")
        if v in collider_like:
            found.add("collider")
        if v in de_t and v not in causal and v not in de_y:
            found.add("descendant_of_treatment")
        if v in de_y:
            found.add("descendant_of_outcome")
        if outside and tied_t and not tied_y:
            found.add("instrument")
        if outside and not tied_t and tied_y:
            found.add("outcome_predictor")
        roles[v] = found or {"unrelated"}
    return roles


def random_dag(rng: random.Random, n: int, density: float) -> nx.DiGraph:
    names = [f"v{i}" for i in range(n)]
    g = nx.DiGraph()
    g.add_nodes_from(names)
    order = names[:]
    rng.shuffle(order)               # so that name order is not topological order
    for i in range(n):
        for j in range(i + 1, n):
            if rng.random() < density:
                g.add_edge(order[i], order[j])
    return g


def random_case(seed: int):
    """A seeded random DAG, a (T, Y) pair, measured nodes (some unmeasured) and costs."""
    rng = random.Random(seed)
    n = rng.randint(3, 9)
    g = random_dag(rng, n, rng.uniform(0.2, 0.65))
    nodes = sorted(g)
    t, y = rng.sample(nodes, 2)
    if nx.has_path(g, y, t) and rng.random() < 0.8:
        t, y = y, t                  # mostly ask about a possible effect
    measured = {v for v in nodes if rng.random() < 0.7} | {t, y}
    cost = {v: rng.choice([0, 1, 1, 2.5, 4]) for v in nodes}
    return g, t, y, measured, cost


SEEDS = range(400)


# --------------------------------------------------------------------------------------------
# The oracle over random DAGs


@pytest.mark.parametrize("block", range(8))
def test_minimal_sets_validity_and_optimal_agree_with_brute_force(block):
    """400 random DAGs (50 a block): minimal sets, validity, O-set, cheapest set, paths."""
    for seed in SEEDS[block * 50:(block + 1) * 50]:
        g, t, y, measured, cost = random_case(seed)
        allowed = measured - {t, y}
        valid = brute_valid_sets(g, t, y, allowed)
        minimal = brute_minimal(valid)

        listed = list(G.iter_minimal_adjustment_sets(g, t, y, allowed=allowed))
        assert len(listed) == len(set(listed)), f"seed {seed}: a set was listed twice"
        assert set(listed) == set(minimal), f"seed {seed}: {g.edges} t={t} y={y}"

        # validity of arbitrary subsets, valid or not
        rng = random.Random(seed)
        others = sorted(set(g) - {t, y})
        for _ in range(6):
            z = {v for v in others if rng.random() < 0.4}
            assert G.is_valid_adjustment_set(g, t, y, z) == brute_valid(g, t, y, z), \
                f"seed {seed}: Z={z}"

        # the optimal set: its definition, computed independently, and its validity whenever
        # some valid set exists among all variables (Henckel et al. 2022, Sec. 3 — from memory)
        any_valid = bool(brute_valid_sets(g, t, y, others)) if not valid else True
        optimal = G.optimal_adjustment_set(g, t, y)
        if brute_causal_nodes(g, t, y) and any_valid:
            assert optimal == frozenset(brute_optimal(g, t, y)), f"seed {seed}"
            assert brute_valid(g, t, y, optimal)
        else:
            assert optimal is None, f"seed {seed}"

        # cheapest: minimum cost, then fewest variables, then names
        cheapest = G.cheapest_adjustment_set(g, t, y, allowed=allowed, cost=cost)
        if not valid:
            assert cheapest is None
        else:
            best = min(valid, key=lambda s: (sum(cost[v] for v in s), len(s), sorted(s)))
            assert cheapest is not None
            assert cheapest[0] == best, f"seed {seed}: {cheapest} vs {best}"
            assert cheapest[1] == pytest.approx(sum(cost[v] for v in best), abs=1e-12)

        # non-causal paths: the same set as the skeleton's simple paths minus directed ones
        assert set(G.iter_biasing_paths(g, t, y)) == brute_biasing_paths(g, t, y)


@pytest.mark.parametrize("block", range(4))
def test_roles_agree_with_their_definitions(block):
    for seed in SEEDS[block * 100:(block + 1) * 100]:
        g, t, y, _, _ = random_case(seed)
        roles = G.variable_roles(g, t, y, max_paths=None)
        expected = brute_roles(g, t, y)
        for v in g:
            assert set(roles[v]) == expected[v], f"seed {seed}: {v} {roles[v]} {expected[v]}"
            assert list(roles[v]) == [r for r in G.ROLES if r in roles[v]]   # fixed order


@pytest.mark.parametrize("block", range(4))
def test_open_paths_match_the_criterion(block):
    """Shpitser, VanderWeele & Robins (2010), main theorem (from memory): with no forbidden member, Z is valid
    exactly when it leaves no non-causal path open. Path-by-path checks and d-separation in the
    proper back-door graph are different computations; they must agree."""
    for seed in SEEDS[block * 100:(block + 1) * 100]:
        g, t, y, _, _ = random_case(seed)
        forbidden = brute_forbidden(g, t, y)
        paths = brute_biasing_paths(g, t, y)
        rng = random.Random(seed + 1)
        candidates = sorted(set(g) - forbidden - {y})
        for _ in range(5):
            z = {v for v in candidates if rng.random() < 0.5}
            any_open = any(G.is_path_open(g, p, z) for p in paths)
            assert brute_valid(g, t, y, z) == (not any_open), f"seed {seed}: Z={z}"


@pytest.mark.parametrize("block", range(4))
def test_check_controls_explains_every_invalid_set(block):
    for seed in SEEDS[block * 100:(block + 1) * 100]:
        g, t, y, measured, _ = random_case(seed)
        is_measured = {v: v in measured for v in g}
        forbidden = brute_forbidden(g, t, y)
        causal = brute_causal_nodes(g, t, y)
        rng = random.Random(seed + 2)
        others = sorted(set(g) - {t, y})
        every_path = brute_biasing_paths(g, t, y)
        for trial in range(4):
            z = sorted(v for v in others if rng.random() < 0.4)
            # the paths found by the check itself, or handed to it (as identify does)
            given = None if trial % 2 else sorted(every_path)
            check = G.check_controls(g, t, y, z, measured=is_measured, paths=given)
            expected = brute_valid(g, t, y, z) and all(is_measured[v] for v in z)
            assert check.valid == expected, f"seed {seed}: Z={z}"
            assert bool(check.problems) == (not expected), f"seed {seed}: Z={z} {check}"
            kinds = {p.variable: p.kind for p in check.problems}
            assert len(kinds) == len(check.problems)            # one problem a variable
            for v in z:
                if v in causal:
                    assert kinds[v] == "mediator"
                elif v in forbidden:
                    assert kinds[v] in ("descendant_of_outcome", "descendant_of_treatment")
                elif not is_measured[v]:
                    assert kinds.get(v) in ("unmeasured", "collider_opened")
            for p in check.problems:
                assert p.detail.endswith(".") and len(p.detail.split()) > 8
                if p.kind == "path_left_open" and is_measured[p.variable] and p.variable != y:
                    # the suggested variable blocks at least one path that z leaves open
                    paths = [q for q in every_path if G.is_path_open(g, q, z)]
                    assert any(not G.is_path_open(g, q, set(z) | {p.variable}) for q in paths)


def test_measure_to_identify_agrees_with_brute_force():
    checked = 0
    for seed in SEEDS:
        g, t, y, measured, cost = random_case(seed)
        everyone = set(g) - {t, y}
        if brute_valid_sets(g, t, y, measured - {t, y}):
            assert G.list_measure_to_identify(g, t, y, measured=measured) == ()
            continue
        all_valid = brute_valid_sets(g, t, y, everyone)
        unmeasured = sorted(everyone - measured)
        groups = []
        for size in range(len(unmeasured) + 1):
            for extra in itertools.combinations(unmeasured, size):
                usable = measured | set(extra)
                if any(s <= usable for s in all_valid) and \
                        not any(set(h) <= set(extra) for h in groups):
                    groups.append(extra)
        groups.sort(key=lambda grp: (len(grp), sum(cost[v] for v in grp), sorted(grp)))
        got = G.list_measure_to_identify(g, t, y, measured=measured, cost=cost)
        assert got == tuple(tuple(sorted(grp)) for grp in groups[:5]), f"seed {seed}"
        checked += 1
    assert checked > 30          # the oracle met enough unidentifiable cases to mean something


def test_listed_sets_are_valid_and_minimal_on_larger_graphs():
    """Soundness where brute force is out of reach (30-60 nodes): networkx's own minimality test
    (``is_minimal_d_separator``) on the proper back-door graph, restricted to allowed nodes."""
    rng = random.Random(7)
    checked = 0
    for trial in range(8):
        n = rng.randint(30, 60)
        g = random_dag(rng, n, 5.0 / n)
        allowed = {v for v in g if rng.random() < 0.8}
        pairs = [(t, y) for t in sorted(g) for y in sorted(nx.descendants(g, t))]
        best: list = []
        for t, y in rng.sample(pairs, 20):        # keep the pair with the most sets
            sets = list(itertools.islice(G.iter_minimal_adjustment_sets(
                g, t, y, allowed=allowed - {t, y}), 100))
            if len(sets) > len(best):
                best, pair = sets, (t, y)
        t, y = pair
        pbd = brute_pbd(g, t, y)
        forbidden = brute_forbidden(g, t, y)
        assert len(best) == len(set(best))
        for s in best:
            assert s <= allowed and not s & forbidden
            assert nx.is_minimal_d_separator(pbd, t, y, set(s),
                                             restricted=allowed - forbidden - {t, y})
        checked += len(best)
    assert checked > 150


def _linear_sem_avar(g, t, y, rng):
    """Asymptotic variance (up to 1/n) of the OLS coefficient of T, for each adjustment set.

    Sigma = (I - B)^-1 Omega (I - B)^-T for a linear SEM; the asymptotic variance of the
    coefficient of T in the regression of Y on (T, Z) is Var(Y | T, Z) / Var(T | Z) (textbook
    OLS algebra, e.g. Henckel, Perković & Maathuis 2022, Sec. 2 — from memory).
    """
    nodes = sorted(g)
    index = {v: i for i, v in enumerate(nodes)}
    p = len(nodes)
    b = np.zeros((p, p))
    for u, v in g.edges:
        b[index[v], index[u]] = rng.uniform(0.3, 1.2) * rng.choice([-1, 1])
    omega = np.diag([rng.uniform(0.5, 2.0) for _ in nodes])
    inverse = np.linalg.inv(np.eye(p) - b)
    sigma = inverse @ omega @ inverse.T

    def conditional_variance(target, given):
        a = [index[target]]
        c = [index[v] for v in given]
        if not c:
            return sigma[a[0], a[0]]
        s_ac = sigma[np.ix_(a, c)]
        # Var(A | C) = S_AA - S_AC S_CC^-1 S_CA (Schur complement)
        return float((sigma[np.ix_(a, a)] - s_ac @ np.linalg.solve(sigma[np.ix_(c, c)],
                                                                    s_ac.T))[0, 0])

    def avar(z):
        z = sorted(z)
        return conditional_variance(y, [t] + z) / conditional_variance(t, z)

    return avar


def test_optimal_set_has_the_smallest_asymptotic_variance():
    """Henckel, Perković & Maathuis (2022), Sec. 3 (from memory): in a linear SEM the O-set
    gives the smallest asymptotic variance among all valid adjustment sets. Checked with
    population covariances of random linear SEMs, by numpy linear algebra."""
    compared = 0
    for seed in range(60):
        g, t, y, _, _ = random_case(1000 + seed)
        optimal = G.optimal_adjustment_set(g, t, y)
        if optimal is None:
            continue
        valid = brute_valid_sets(g, t, y, set(g) - {t, y})
        avar = _linear_sem_avar(g, t, y, random.Random(seed))
        best = avar(optimal)
        for z in valid:
            assert best <= avar(z) * (1 + 1e-9) + 1e-12, f"seed {seed}: {sorted(z)}"
        compared += len(valid)
    assert compared > 100


def test_implications_are_d_separations():
    """Every listed implication is a d-separation of the graph (networkx ``is_d_separator``);
    with every node measured there is one per non-adjacent pair; with unmeasured nodes each
    conditioning set is measured and minimal."""
    for seed in range(150):
        g, _t, _y, measured, _ = random_case(seed)
        for observed in (set(g), measured):
            implications = G.list_implications(g, observed)
            skeleton = g.to_undirected()
            pairs = {frozenset((i.left, i.right)) for i in implications}
            assert len(pairs) == len(implications)
            for i in implications:
                assert set(i.given) <= observed and i.left in observed and i.right in observed
                assert not skeleton.has_edge(i.left, i.right)
                assert nx.is_d_separator(g, {i.left}, {i.right}, set(i.given))
                assert list(i.given) == sorted(i.given)
                if observed != set(g):
                    assert nx.is_minimal_d_separator(
                        g, i.left, i.right, set(i.given),
                        restricted=observed - {i.left, i.right})
            non_adjacent = [(a, b) for a, b in itertools.combinations(sorted(observed), 2)
                            if not skeleton.has_edge(a, b)]
            if observed == set(g):
                assert len(implications) == len(non_adjacent)
            else:
                separable = [(a, b) for a, b in non_adjacent if nx.find_minimal_d_separator(
                    g, a, b, restricted=observed - {a, b}) is not None]
                assert len(implications) == len(separable)


def test_implications_local_markov_example():
    # a -> b -> c, a -> c is absent: c _||_ a | b (Pearl 2009, Sec. 1.2.3: each node is
    # independent of its non-descendants given its parents)
    g = nx.DiGraph([("a", "b"), ("b", "c"), ("d", "c")])
    assert [i.text() for i in G.list_implications(g, "abcd")] == [
        "c _||_ a | b, d", "d _||_ a | (nothing)", "d _||_ b | (nothing)"]


# --------------------------------------------------------------------------------------------
# Good, neutral and bad controls (Cinelli, Forney & Pearl 2022, Sociological Methods & Research)
#
# Each model is written with X the treatment, Y the outcome and Z the control under discussion,
# with its published verdict on adjusting for Z. All from memory: the numbering follows the
# paper as recalled (least sure for models 15-18, whose drawings may differ in detail from the
# paper's); each verdict is the paper's for that kind of graph. "u..." nodes are unmeasured.

CATALOGUE = {
    # model: (edges, verdict on Z, is {} valid, is {Z} valid, role of Z)
    1: (["z -> x", "z -> y", "x -> y"], "good", False, True, ("confounder",)),
    2: (["u -> z", "z -> x", "u -> y", "x -> y"], "good", False, True, ("confounder",)),
    3: (["u -> x", "u -> z", "z -> y", "x -> y"], "good", False, True, ("confounder",)),
    4: (["z -> x", "z -> m", "x -> m", "m -> y"], "good", False, True, ("confounder",)),
    5: (["u -> z", "z -> x", "u -> m", "x -> m", "m -> y"], "good", False, True,
        ("confounder",)),
    6: (["u -> x", "u -> z", "z -> m", "x -> m", "m -> y"], "good", False, True,
        ("confounder",)),
    7: (["u1 -> x", "u1 -> z", "u2 -> z", "u2 -> y", "x -> y"], "bad", True, False,
        ("collider",)),                                                    # M-bias
    8: (["z -> y", "x -> y"], "neutral", True, True, ("outcome_predictor",)),  # helps precision
    9: (["z -> x", "x -> y"], "neutral", True, True, ("instrument",)),         # hurts precision
    10: (["z -> x", "u -> x", "u -> y", "x -> y"], "bad", False, False,
         ("instrument",)),                                                 # bias amplification
    11: (["x -> z", "z -> y"], "bad", True, False, ("mediator",)),            # overcontrol
    12: (["x -> m", "m -> y", "m -> z"], "bad", True, False,
         ("descendant_of_treatment",)),                                    # child of mediator
    13: (["x -> m", "z -> m", "m -> y"], "neutral", True, True,
         ("outcome_predictor",)),                                          # helps precision
    14: (["x -> y", "x -> z"], "neutral", True, True,
         ("descendant_of_treatment",)),                                    # hurts precision
    15: (["x -> y", "x -> z", "w -> z", "w -> y"], "bad", True, False,
         ("collider", "descendant_of_treatment")),                         # selection bias
    16: (["x -> y", "x -> z", "u -> z", "u -> y"], "bad", True, False,
         ("collider", "descendant_of_treatment")),                         # selection bias
    17: (["x -> y", "y -> z"], "bad", True, False, ("descendant_of_outcome",)),  # case-control
    18: (["x -> w", "y -> z"], "neutral", True, True,
         ("descendant_of_outcome",)),                                      # X has no effect
}


def _catalogue_graph(edges):
    g = nx.DiGraph()
    g.add_edges_from(tuple(part.strip() for part in e.split("->")) for e in edges)
    return g


@pytest.mark.parametrize("model", sorted(CATALOGUE))
def test_cinelli_forney_pearl_catalogue(model):
    edges, verdict, empty_valid, z_valid, z_roles = CATALOGUE[model]
    g = _catalogue_graph(edges)
    assert G.is_valid_adjustment_set(g, "x", "y", set()) == empty_valid
    assert G.is_valid_adjustment_set(g, "x", "y", {"z"}) == z_valid
    assert G.variable_roles(g, "x", "y")["z"] == z_roles
    if verdict == "good":
        assert z_valid and not empty_valid
    elif verdict == "neutral":
        assert z_valid and empty_valid
    else:
        assert not z_valid


def test_cinelli_catalogue_through_a_study():
    """The same verdicts through study files, the declared-controls check and its problem kinds."""
    kinds = {7: "collider_opened", 11: "mediator", 12: "descendant_of_treatment",
             15: "collider_opened", 16: "collider_opened", 17: "descendant_of_outcome"}
    for model, (edges, verdict, empty_valid, z_valid, _) in CATALOGUE.items():
        unmeasured = sorted({n for e in edges for n in e.replace(" ", "").split("->")
                             if n.startswith("u")})
        variables = "\n".join(f"{u} = {{ measured = false }}" for u in unmeasured)
        edge_list = ", ".join(f'"{e}"' for e in edges)
        study = parse_study(f"""
[study]
treatment = "x"
outcome = "y"
[variables]
{variables}
[graph]
edges = [{edge_list}]
[controls]
used = ["z"]
""")
        result = G.identify(study)
        assert result.controls.valid == z_valid, model
        if model in kinds:
            assert next((p.variable, p.kind) for p in result.controls.problems) == \
                ("z", kinds[model]), model
        if model == 10:           # bias amplification: not identifiable, u must be measured
            assert not result.identifiable
            assert result.measure_to_identify == (("u",),)
            assert any("amplifies" in note for note in result.notes)
        if model == 9:
            assert any("inflates the standard error" in note for note in result.notes)
        if model == 18:
            assert not result.has_causal_path and result.optimal_set is None


# --------------------------------------------------------------------------------------------
# Hand-checked examples


def test_listing_many_sets_in_a_ladder():
    """k parallel back-door paths x <- a_i -> b_i -> y, each blockable at a_i or b_i, have
    exactly 2^k minimal sets (counted by hand)."""
    k = 6
    edges = [("x", "y")]
    for i in range(k):
        edges += [(f"a{i}", "x"), (f"a{i}", f"b{i}"), (f"b{i}", "y")]
    g = nx.DiGraph(edges)
    sets = list(G.iter_minimal_adjustment_sets(g, "x", "y", allowed=set(g)))
    assert len(sets) == 2 ** k == len(set(sets))
    assert all(len(s) == k for s in sets)


def test_cheapest_ties_go_to_fewer_variables_then_names():
    # x <- a -> y and x <- b -> c -> y: {a, b} and {a, c} cost the same; "b" < "c"
    g = nx.DiGraph([("a", "x"), ("a", "y"), ("b", "x"), ("b", "c"), ("c", "y"), ("x", "y")])
    assert G.cheapest_adjustment_set(g, "x", "y", allowed={"a", "b", "c"}, cost={}) == (
        frozenset({"a", "b"}), 0.0)
    # one costly variable beats two cheaper ones only when it is cheaper in total
    g = nx.DiGraph([("a", "x"), ("b", "x"), ("a", "p"), ("b", "p"), ("p", "y"), ("x", "y")])
    costs = {"a": 1, "b": 1, "p": 2}
    assert G.cheapest_adjustment_set(g, "x", "y", allowed={"a", "b", "p"}, cost=costs) == (
        frozenset({"p"}), 2.0)
    costs = {"a": 1, "b": 1, "p": 2.5}
    assert G.cheapest_adjustment_set(g, "x", "y", allowed={"a", "b", "p"}, cost=costs) == (
        frozenset({"a", "b"}), 2.0)


def test_fractional_costs_are_exact():
    # 0.1 + 0.2 is not 0.3 in floating point; the cut is computed on exact rationals
    g = nx.DiGraph([("a", "x"), ("b", "x"), ("a", "p"), ("b", "p"), ("p", "y"), ("x", "y")])
    costs = {"a": 0.1, "b": 0.2, "p": 0.3}
    chosen, cost = G.cheapest_adjustment_set(g, "x", "y", allowed=set(costs), cost=costs)
    assert chosen == frozenset({"p"})          # equal cost: fewer variables wins
    assert cost == pytest.approx(0.3, abs=1e-15)


DESIGN_STUDY = """
[study]
title = "Heat-pump grants and winter energy bills"
treatment = "grant"
outcome = "bill_change"

[variables]
income      = { label = "Household income", unit = "k/yr", cost = 0 }
attitude    = { measured = false, label = "Environmental attitude", cost = 40 }
thermostat  = { label = "Thermostat setting" }

[graph]
edges = ["income -> grant", "income -> bill_change", "attitude -> grant",
         "attitude -> bill_change", "grant -> thermostat", "thermostat -> bill_change",
         "grant -> bill_change"]

[controls]
used = ["income", "thermostat"]
"""


def test_identify_design_example():
    """The study of DESIGN.md (without its region, which is not in the graph), checked by hand: attitude confounds and is unmeasured, so nothing
    measured is valid; thermostat is a mediator; measuring attitude would identify the effect."""
    result = G.identify(parse_study(DESIGN_STUDY))
    assert not result.identifiable
    assert result.minimal_sets == ()
    assert result.optimal_set is None
    assert result.optimal_unmeasured == ("attitude",)
    assert result.optimal_if_all_measured == ("attitude", "income")
    assert result.cheapest_set is None and result.cheapest_cost is None
    assert result.measure_to_identify == (("attitude",),)
    assert result.roles["thermostat"] == ("mediator",)
    assert result.roles["income"] == ("confounder",)
    assert result.roles["attitude"] == ("confounder",)
    check = result.controls
    assert check is not None and not check.valid
    assert [(p.variable, p.kind) for p in check.problems] == [
        ("thermostat", "mediator"), ("attitude", "path_left_open")]
    assert "Thermostat setting is a mediator" in check.problems[0].detail
    assert "grant -> thermostat -> bill_change" in check.problems[0].detail
    assert "grant <- attitude -> bill_change" in check.problems[1].detail
    assert "Environmental attitude" in check.problems[1].detail
    paths = {p.text: (p.open_unadjusted, p.open_given_controls) for p in result.biasing_paths}
    assert paths == {"grant <- income -> bill_change": (True, False),
                     "grant <- attitude -> bill_change": (True, True)}


def test_identify_json_contract():
    document = G.identify(parse_study(DESIGN_STUDY)).to_dict()
    parsed = json.loads(dumps(document))
    for key in ("schema", "treatment", "outcome", "identifiable", "adjustment_sets",
                "controls", "variables", "biasing_paths"):
        assert key in parsed
    assert parsed["schema"] == "causalcheck/controls/1"
    assert set(parsed["adjustment_sets"]) >= {"minimal", "optimal", "cheapest"}
    assert set(parsed["controls"]) >= {"used", "valid", "problems"}
    for problem in parsed["controls"]["problems"]:
        assert set(problem) >= {"variable", "kind", "detail"}
        assert problem["kind"] in G.PROBLEM_KINDS
    for entry in parsed["variables"].values():
        assert isinstance(entry["role"], str) and isinstance(entry["measured"], bool)
        assert entry["role"] == "+".join(entry["roles"])
        assert all(r in G.ROLES for r in entry["roles"])
    assert parsed["variables"]["attitude"]["measured"] is False
    for p in parsed["biasing_paths"]:
        assert isinstance(p["path"], list) and isinstance(p["open_given_controls"], bool)


def test_controls_object_whenever_the_table_exists():
    base = DESIGN_STUDY.split("[controls]")[0]
    assert G.identify(parse_study(base)).to_dict()["controls"] is None
    paths = G.identify(parse_study(base)).to_dict()["biasing_paths"]
    # the contract fixes a bool: with no [controls] nothing is adjusted for
    assert all(p["open_given_controls"] is p["open_unadjusted"] for p in paths)
    assert all(isinstance(p["open_given_controls"], bool) for p in paths)
    empty = G.identify(parse_study(base + "[controls]\nused = []\n")).to_dict()["controls"]
    assert empty["used"] == [] and empty["valid"] is False


def test_minimal_sets_are_sorted_tuples_and_capped_with_a_note():
    edges = ", ".join(f'"a{i} -> x", "a{i} -> b{i}", "b{i} -> y"' for i in range(4))
    study = parse_study(f"""
[study]
treatment = "x"
outcome = "y"
[graph]
edges = ["x -> y", {edges}]
""")
    full = G.identify(study)
    assert len(full.minimal_sets) == 16 and full.minimal_sets_complete
    assert list(full.minimal_sets) == sorted(full.minimal_sets)
    assert all(list(s) == sorted(s) for s in full.minimal_sets)
    capped = G.identify(study, max_sets=5, max_paths=2)
    assert len(capped.minimal_sets) == 5 and not capped.minimal_sets_complete
    assert any("more than 5 minimal valid adjustment sets" in n for n in capped.notes)
    assert len(capped.biasing_paths) == 2 and not capped.biasing_paths_complete
    assert any("more than 2 non-causal paths" in n for n in capped.notes)


def test_identifiable_without_adjustment_and_optimal_precision_set():
    study = parse_study("""
[study]
treatment = "x"
outcome = "y"
[graph]
edges = ["x -> y", "w -> y", "z -> x"]
""")
    result = G.identify(study)
    assert result.minimal_sets == ((),)
    assert result.optimal_set == ("w",)            # pa(y) minus forb: a precision variable
    assert result.cheapest_set == () and result.cheapest_cost == 0.0
    assert result.to_dict()["adjustment_sets"]["minimal"] == [[]]


def test_outcome_causing_treatment_is_never_identifiable():
    g = nx.DiGraph([("y", "x"), ("c", "x"), ("c", "y")])
    assert list(G.iter_minimal_adjustment_sets(g, "x", "y", allowed={"c"})) == []
    assert G.cheapest_adjustment_set(g, "x", "y", allowed={"c"}, cost={}) is None
    assert G.list_measure_to_identify(g, "x", "y", measured={"x", "y"}) == ()
    check = G.check_controls(g, "x", "y", ["c"])
    assert [(p.variable, p.kind) for p in check.problems] == [("y", "path_left_open")]
    assert "y is a direct cause of x" in check.problems[0].detail


def test_collider_descendant_and_proxy_details():
    labels = {"z": "Referral", "d": "Referral letter", "s": "Test score", "a": "Ability"}
    g = nx.DiGraph([("u1", "x"), ("u1", "z"), ("u2", "z"), ("u2", "y"), ("z", "d"), ("x", "y"),
                    ("a", "x"), ("a", "y"), ("a", "s")])
    measured = {"u1": False, "u2": False, "a": False}
    check = G.check_controls(g, "x", "y", ["d", "s"], measured=measured, labels=labels)
    details = {p.variable: (p.kind, p.detail) for p in check.problems}
    assert details["d"][0] == "collider_opened"
    assert "Referral letter is a descendant of Referral, a collider on it" in details["d"][1]
    assert "x <- u1 -> z <- u2 -> y" in details["d"][1]
    assert details["a"][0] == "path_left_open"
    assert "measuring Ability would" in details["a"][1]
    assert "Adjusting for Test score, measured downstream of Ability, may reduce" in \
        details["a"][1]


def test_unmeasured_control_is_a_problem():
    g = nx.DiGraph([("c", "x"), ("c", "y"), ("x", "y")])
    check = G.check_controls(g, "x", "y", ["c"], measured={"c": False})
    assert not check.valid and check.avoids_forbidden and check.blocks_non_causal_paths
    assert [(p.variable, p.kind) for p in check.problems] == [("c", "unmeasured")]
    assert "marked measured = false" in check.problems[0].detail


def test_build_graph_carries_node_facts():
    study = parse_study(DESIGN_STUDY)
    g = G.build_graph(study)
    assert g.nodes["attitude"]["measured"] is False
    assert g.nodes["income"]["label"] == "Household income"
    assert g.nodes["attitude"]["cost"] == 40
    assert sorted(g.edges) == sorted(study.edges)


# --------------------------------------------------------------------------------------------
# Errors


def _study(edges, treatment="x", outcome="y"):
    nodes = sorted({n for e in edges for n in e})
    return Study(treatment=treatment, outcome=outcome, edges=tuple(edges),
                 variables={n: Variable(name=n, label=n) for n in nodes})


def test_error_cycle_names_one_cycle():
    study = replace(_study([("x", "b"), ("b", "c"), ("c", "x"), ("x", "y")]))
    with pytest.raises(GraphError) as info:
        G.build_graph(study)
    message = str(info.value)
    assert "contain a cycle: b -> c -> x -> b" in message
    assert "[graph].edges" in message
    assert "remove or reverse one of these edges" in message


def test_error_cycle_in_a_graph_passed_directly():
    g = nx.DiGraph([("x", "y"), ("y", "x")])
    with pytest.raises(GraphError, match=r"contain a cycle: x -> y -> x"):
        G.is_valid_adjustment_set(g, "x", "y", set())


def test_error_treatment_not_in_graph():
    g = nx.DiGraph([("income", "y")])
    with pytest.raises(GraphError) as info:
        G.iter_minimal_adjustment_sets(g, "incme", "y", allowed=set())
    assert str(info.value) == ("the treatment 'incme' is not a node of the graph (did you mean "
                               "'income'?); add it to [graph].edges or fix the name")


def test_error_outcome_not_in_graph():
    g = nx.DiGraph([("x", "y")])
    with pytest.raises(GraphError, match=r"the outcome 'z' is not a node of the graph"):
        G.optimal_adjustment_set(g, "x", "z")


def test_error_treatment_equals_outcome():
    g = nx.DiGraph([("x", "y")])
    with pytest.raises(GraphError, match=r"the treatment and the outcome are the same "
                                         r"variable \('x'\); they must differ"):
        G.causal_nodes(g, "x", "x")


def test_error_treatment_not_named():
    study = Study(treatment=None, outcome="y", edges=(("x", "y"),))
    with pytest.raises(GraphError, match=r"the treatment must be named \(got None\); set "
                                         r"\[study\]\.treatment"):
        G.build_graph(study)


def test_error_study_without_graph():
    study = parse_study("[reported]\nestimate = 1.0\nstd_error = 0.5\ndof = 10\n",
                        path="vet.toml")
    with pytest.raises(GraphError, match=r"study file 'vet.toml' has no \[graph\] table"):
        G.identify(study)


def test_error_unknown_names_in_allowed_and_controls():
    g = nx.DiGraph([("c", "x"), ("c", "y"), ("x", "y")])
    with pytest.raises(GraphError) as info:
        G.cheapest_adjustment_set(g, "x", "y", allowed={"cc"}, cost={})
    assert "allowed names 'cc', not node of the graph (did you mean 'c'?)" in str(info.value)
    with pytest.raises(GraphError, match=r"the declared controls names 'q', not node"):
        G.check_controls(g, "x", "y", ["q"])


def test_error_adjustment_set_with_treatment_or_outcome():
    g = nx.DiGraph([("c", "x"), ("c", "y"), ("x", "y")])
    with pytest.raises(GraphError, match=r"contains the treatment or the outcome"):
        G.is_valid_adjustment_set(g, "x", "y", {"x"})
    with pytest.raises(GraphError, match=r"contain the treatment or the outcome"):
        G.check_controls(g, "x", "y", ["y"])


def test_error_bad_cost():
    g = nx.DiGraph([("c", "x"), ("c", "y"), ("x", "y")])
    with pytest.raises(GraphError, match=r"the cost of 'c' must be a finite number of zero or "
                                         r"more; got -1"):
        G.cheapest_adjustment_set(g, "x", "y", allowed={"c"}, cost={"c": -1})
    with pytest.raises(GraphError, match=r"got nan"):
        G.cheapest_adjustment_set(g, "x", "y", allowed={"c"}, cost={"c": float("nan")})


def test_error_not_a_directed_graph():
    with pytest.raises(GraphError, match=r"the graph must be a networkx DiGraph; got Graph"):
        G.optimal_adjustment_set(nx.Graph([("x", "y")]), "x", "y")


def test_open_path_beyond_a_capped_list_is_still_named():
    # identify() hands check_controls only the shortest paths; an open path beyond them is
    # found by a bounded search of the proper back-door graph
    g = nx.DiGraph([("a", "x"), ("a", "y"), ("b", "x"), ("b", "d"), ("d", "y"), ("x", "y")])
    check = G.check_controls(g, "x", "y", ["a"], paths=[("x", "a", "y")])
    assert not check.valid
    assert [(p.variable, p.kind) for p in check.problems] == [("b", "path_left_open")]
    assert "x <- b -> d -> y" in check.problems[0].detail
    study = _study([("a", "x"), ("a", "y"), ("b", "x"), ("b", "d"), ("d", "y"), ("x", "y")])
    result = G.identify(replace(study, controls=("a",)), max_paths=1)
    assert not result.biasing_paths_complete
    assert result.optimal_set == ("a", "d")       # the blocker is taken from the optimal set
    assert [(p.variable, p.kind) for p in result.controls.problems] == [("d", "path_left_open")]


def test_notes_for_randomized_design_and_unmeasured_treatment():
    study = parse_study("""
[study]
treatment = "x"
outcome = "y"
design = "randomized"
[variables]
x = { measured = false }
[graph]
edges = ["c -> x", "c -> y", "x -> y"]
""")
    notes = G.identify(study).notes
    assert any("declared randomized, yet the graph gives x the cause c" in n for n in notes)
    assert any("the treatment x is marked measured = false" in n for n in notes)
