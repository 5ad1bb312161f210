"""Benchmark: listing minimal adjustment sets (ListMinSep) on random sparse DAGs.

Two measurements, both in one run (``pytest -m benchmark -s tests/benchmarks/test_bench_graph.py``):

1. time to the first set and to the first 1,000 minimal sets (or all, when fewer exist) on
   random DAGs of 50, 100 and 200 nodes with mean degree 3;
2. the engine against brute force over subsets (every subset of the allowed variables checked
   with networkx ``is_d_separator`` in the proper back-door graph, then filtered for
   minimality) on 14-node DAGs, as a ratio; both must give the same sets.

The figures go into docs/performance.md.
"""

from __future__ import annotations

import itertools
import random
import statistics
import time

import networkx as nx
import pytest

from causalcheck import graph as G
from causalcheck.study import Study, Variable

pytestmark = pytest.mark.benchmark

SIZES = (50, 100, 200)
GRAPHS_PER_SIZE = 5
PAIRS_SAMPLED = 100
TARGET = 1000


def sparse_dag(rng: random.Random, n: int, mean_degree: float = 3.0) -> nx.DiGraph:
    """n nodes, n·mean_degree/2 edges; each edge picks a child uniformly and a parent uniformly
    among the nodes before it in a hidden order (so every node can have ancestors)."""
    names = [f"v{i:03d}" for i in range(n)]
    order = names[:]
    rng.shuffle(order)
    g = nx.DiGraph()
    g.add_nodes_from(names)
    edges = round(n * mean_degree / 2)
    while g.number_of_edges() < edges:
        child = rng.randrange(1, n)
        parent = rng.randrange(child)
        g.add_edge(order[parent], order[child])
    return g


def richest_pair(g: nx.DiGraph, rng: random.Random) -> tuple[str, str, int]:
    """Among sampled (T, Y) pairs with a causal path, the one with the most minimal sets (at
    most TARGET counted). Chosen before timing, so the timed listing is a demanding one."""
    pairs = [(t, y) for t in sorted(g) for y in sorted(nx.descendants(g, t))]
    best = (0, pairs[0])
    for t, y in rng.sample(pairs, min(PAIRS_SAMPLED, len(pairs))):
        count = sum(1 for _ in itertools.islice(
            G.iter_minimal_adjustment_sets(g, t, y, allowed=set(g) - {t, y}), TARGET))
        if count > best[0]:
            best = (count, (t, y))
    return best[1][0], best[1][1], best[0]


def time_listing(g: nx.DiGraph, t: str, y: str) -> tuple[float, float, int]:
    start = time.perf_counter()
    listing = G.iter_minimal_adjustment_sets(g, t, y, allowed=set(g) - {t, y})
    next(listing)
    first_time = time.perf_counter() - start
    rest = list(itertools.islice(listing, TARGET - 1))
    total = time.perf_counter() - start
    return first_time, total, 1 + len(rest)


def brute_force_minimal(g: nx.DiGraph, t: str, y: str, allowed: set[str]) -> set[frozenset]:
    """Every subset checked against the adjustment criterion, then the inclusion-minimal ones."""
    causal = set()
    for path in nx.all_simple_paths(g, t, y):
        causal.update(path[1:])
    forbidden = {t} | causal
    for c in causal:
        forbidden |= nx.descendants(g, c)
    pbd = g.copy()
    pbd.remove_edges_from([(t, c) for c in list(g.successors(t)) if c in causal])
    candidates = sorted(allowed - {t, y})
    minimal: list[frozenset] = []
    for size in range(len(candidates) + 1):
        for subset in itertools.combinations(candidates, size):
            z = frozenset(subset)
            if z & forbidden or any(m <= z for m in minimal):
                continue
            if nx.is_d_separator(pbd, {t}, {y}, set(z)):
                minimal.append(z)
    return set(minimal)


def test_bench_listing_and_brute_force_ratio():
    rng = random.Random(20240601)
    rows = []
    for n in SIZES:
        firsts, totals, counts = [], [], []
        for _ in range(GRAPHS_PER_SIZE):
            g = sparse_dag(rng, n)
            t, y, _ = richest_pair(g, rng)
            first, total, count = time_listing(g, t, y)
            firsts.append(first)
            totals.append(total)
            counts.append(count)
        rows.append((n, counts, firsts, totals))

    # a ladder with 2^12 minimal sets: x <- a_i -> b_i -> y for i < 12, plus a 200-node tail
    ladder = nx.DiGraph([("x", "y")])
    for i in range(12):
        ladder.add_edges_from([(f"a{i}", "x"), (f"a{i}", f"b{i}"), (f"b{i}", "y")])
    ladder.add_edges_from((f"w{i}", f"w{i + 1}") for i in range(174))
    ladder.add_edge("w174", "a0")
    ladder_first, ladder_total, ladder_count = time_listing(ladder, "x", "y")

    # identify(): the whole controls computation on the 200-node graphs' last pair
    study = Study(treatment=t, outcome=y, edges=tuple(sorted(g.edges)),
                  variables={v: Variable(name=v, label=v) for v in g})
    start = time.perf_counter()
    result = G.identify(study, max_sets=TARGET, max_paths=200, max_implications=500)
    identify_time = time.perf_counter() - start

    # brute force against the engine on 14-node graphs
    brute_time = engine_time = 0.0
    sets_found = 0
    graphs = 0
    while graphs < 20:
        g = sparse_dag(rng, 14)
        if g.number_of_edges() == 0:
            continue
        t, y, _ = richest_pair(g, rng)
        allowed = set(g) - {t, y}
        start = time.perf_counter()
        expected = brute_force_minimal(g, t, y, allowed)
        brute_time += time.perf_counter() - start
        start = time.perf_counter()
        got = set(G.iter_minimal_adjustment_sets(g, t, y, allowed=allowed))
        engine_time += time.perf_counter() - start
        assert got == expected
        sets_found += len(got)
        graphs += 1

    print()
    print("| nodes | graphs | sets listed (min-median-max) | first set, ms (median) | "
          "first 1,000 or all, s (median / max) | µs per set (median) |")
    print("|---:|---:|---|---:|---:|---:|")
    for n, counts, firsts, totals in rows:
        per_set = statistics.median(total / count * 1e6 for total, count in zip(totals, counts))
        print(f"| {n} | {len(counts)} | {min(counts)}-{int(statistics.median(counts))}-"
              f"{max(counts)} | {statistics.median(firsts) * 1e3:.2f} | "
              f"{statistics.median(totals):.3f} / {max(totals):.3f} | {per_set:.0f} |")
    print(f"ladder ({ladder.number_of_nodes()} nodes, 4,096 minimal sets): first set "
          f"{ladder_first * 1e3:.2f} ms, first {ladder_count} in {ladder_total:.3f} s")
    print(f"identify() on a 200-node study: {identify_time:.2f} s "
          f"({len(result.minimal_sets)} sets, {len(result.biasing_paths)} paths, "
          f"{len(result.implications)} implications)")
    print(f"14-node graphs: brute force {brute_time:.3f} s, engine {engine_time * 1e3:.1f} ms, "
          f"ratio {brute_time / engine_time:.0f}x ({sets_found} sets over {graphs} graphs)")

    big = rows[-1]
    assert max(big[3]) < 2.0          # target: the first 1,000 sets at 200 nodes under 2 s
    assert brute_time > engine_time
