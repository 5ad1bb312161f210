"""Benchmark: simulated planning studies per second, Wishart shortcut against row simulation.

A planning study of p = 10 variables (an invented school-meals scenario: four confounders, two
of them not yet measured, a mediator, an instrument and two outcome predictors) at n = 2,000.
Each simulated study draws one sample covariance matrix and fits every option of the plan on
it. The Wishart shortcut draws the matrix directly; the peer simulates 2,000 rows and takes
their covariance (numpy), then fits the same options with the same batched solver, so the
ratio measures the sampling shortcut alone. Both run in the same process, one after the other.

Run with ``python -m pytest -m benchmark tests/benchmarks/test_bench_plan.py -s``.
Target: at least 100,000 simulated studies a minute with the shortcut.
"""

from __future__ import annotations

import time

import pytest

from causalcheck.plan import plan_study, simulate_plan
from causalcheck.study import parse_study

STUDY = """
[study]
title = "Free school meals and reading scores (benchmark)"
treatment = "meals"
outcome = "reading"

[variables]
parent_income = { measured = false, cost = 30 }
home_books    = { measured = false, cost = 12 }

[graph]
edges = ["family_size -> meals", "family_size -> reading", "parent_income -> meals",
         "parent_income -> reading", "home_books -> meals", "home_books -> reading",
         "district -> meals", "district -> reading", "meals -> attendance",
         "attendance -> reading", "meals -> reading", "eligibility_rule -> meals",
         "teacher_quality -> reading", "class_size -> reading"]

[strengths]
"family_size -> meals" = 0.2
"family_size -> reading" = -0.1
"parent_income -> meals" = -0.35
"parent_income -> reading" = 0.3
"home_books -> meals" = -0.15
"home_books -> reading" = 0.25
"district -> meals" = 0.2
"district -> reading" = 0.1
"meals -> attendance" = 0.3
"attendance -> reading" = 0.2
"meals -> reading" = 0.1
"eligibility_rule -> meals" = 0.4
"teacher_quality -> reading" = 0.3
"class_size -> reading" = -0.2

[plan]
n = 2000
"""


@pytest.mark.benchmark
def test_bench_wishart_against_rows():
    result = plan_study(parse_study(STUDY))
    assert len(result.model.variables) == 10 and result.n == 2000
    options = len(result.options)

    # warm-up (imports, first allocation) outside the timings
    simulate_plan(result, replications=200, seed=1)
    simulate_plan(result, replications=5, seed=1, method="rows")

    wishart_runs = 200_000
    started = time.perf_counter()
    fast = simulate_plan(result, replications=wishart_runs, seed=2)
    wishart_seconds = time.perf_counter() - started

    row_runs = 3_000
    started = time.perf_counter()
    slow = simulate_plan(result, replications=row_runs, seed=3, method="rows")
    row_seconds = time.perf_counter() - started

    wishart_rate = wishart_runs / wishart_seconds
    row_rate = row_runs / row_seconds
    print(f"\nplanning Monte Carlo, p = 10, n = 2,000, {options} options fitted per study")
    print(f"  Wishart shortcut: {wishart_runs:,} studies in {wishart_seconds:.2f} s = "
          f"{wishart_rate:,.0f} studies/s ({wishart_rate * 60:,.0f} a minute)")
    print(f"  row simulation:   {row_runs:,} studies in {row_seconds:.2f} s = "
          f"{row_rate:,.0f} studies/s ({row_rate * 60:,.0f} a minute)")
    print(f"  ratio: {wishart_rate / row_rate:.1f}x")
    # the two agree on the recommended plan's spread (a sanity check, not the benchmark)
    key = result.recommended.key
    spread = {m: next(o.sd_estimate for o in r.options if (o.measure, o.adjust_for) == key)
              for m, r in (("wishart", fast), ("rows", slow))}
    assert abs(spread["wishart"] - spread["rows"]) < 0.1 * spread["rows"]
    assert wishart_rate * 60 >= 100_000
    assert wishart_rate > row_rate
