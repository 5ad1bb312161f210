"""The long fuzzing run, on demand.

Run it with ``python -m pytest -q -m benchmark -s tests/benchmarks/test_bench_fuzz.py``.

The same checks as ``tests/test_fuzz_study.py`` (only ``CausalCheckError`` may escape the
parser or ``identify``; refusals name the file, a key path and a real line), about twenty
times longer and with other seeds: 200,000 mutated scenario files, 15,000 generated
documents and 5,000 random graphs. It prints how many files parsed and how many were refused,
and the rate; it makes no performance claim.
"""

from __future__ import annotations

import random
import sys
import time
import traceback
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import test_fuzz_study as fuzz

pytestmark = pytest.mark.benchmark


def test_long_mutation_run(tmp_path):
    started = time.perf_counter()
    totals = {"parsed": 0, "refused": 0}
    for seed in range(20):
        tally = fuzz.run_mutations(10_000, seed=1000 + seed, tmp_path=tmp_path)
        for key in totals:
            totals[key] += tally[key]
    seconds = time.perf_counter() - started
    count = sum(totals.values())
    print(f"\n{count:,} mutated files in {seconds:.1f} s ({count / seconds:,.0f} a second): "
          f"{totals['parsed']:,} parsed, {totals['refused']:,} refused")
    assert count == 200_000


@settings(max_examples=15_000, deadline=None, suppress_health_check=list(HealthCheck))
@given(text=fuzz.documents)
def test_long_generated_documents(text):
    fuzz.parse_or_refuse(text)


def test_long_identify_run():
    pytest.importorskip("causalcheck.graph")
    rng = random.Random(2024)
    started = time.perf_counter()
    for number in range(5_000):
        text = fuzz.random_graph_text(rng, nodes=rng.randint(2, 16),
                                      density=rng.choice([0.1, 0.2, 0.35, 0.5, 0.8]),
                                      cycles=True)
        try:
            fuzz.identify_or_refuse(text)
        except Exception:                      # noqa: BLE001
            pytest.fail(f"graph {number} raised a non-CausalCheckError:\n"
                        f"{traceback.format_exc()}\n--- input ---\n{text}")
    print(f"\n5,000 random graphs through identify in {time.perf_counter() - started:.1f} s")
