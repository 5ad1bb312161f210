"""Benchmark: a 1,000 × 1,000 partial-R² sensitivity grid with benchmark bounds.

The vectorised path (:func:`causalcheck.sensitivity.bounds_grid` and
:func:`~causalcheck.sensitivity.benchmark_bounds`) is timed against a plain Python loop over
the same grid computing the same numbers with the ``math`` module, in the same run; the ratio
is what docs/performance.md reports. Run with ``pytest -m benchmark -s``.
"""

from __future__ import annotations

import math
import time

import numpy as np
import pytest
from scipy import stats

from causalcheck.sensitivity import benchmark_bounds, bounds_grid

pytestmark = pytest.mark.benchmark

# Darfur numbers (Cinelli & Hazlett 2020, from memory) as a realistic scale
ESTIMATE, SE, DOF = 0.09731582, 0.02325654, 783
POINTS = 1000
N_BENCHMARKS = 20
MULTIPLIERS = (1.0, 2.0, 3.0)


def _vectorised(r2dz, r2yz, r2dxj, r2yxj):
    grid = bounds_grid(ESTIMATE, SE, DOF, r2dz, r2yz)
    table = benchmark_bounds(ESTIMATE, SE, DOF, r2dxj, r2yxj, multipliers=MULTIPLIERS)
    return grid, table


def _python_loop(r2dz, r2yz, r2dxj, r2yxj):
    critical = float(stats.t.ppf(0.975, DOF - 1))
    root_dof = math.sqrt(DOF)
    se_factor = math.sqrt(DOF / (DOF - 1))
    estimate = [[0.0] * len(r2yz) for _ in r2dz]
    low = [[0.0] * len(r2yz) for _ in r2dz]
    high = [[0.0] * len(r2yz) for _ in r2dz]
    t = [[0.0] * len(r2yz) for _ in r2dz]
    for i, dz in enumerate(r2dz):
        for j, yz in enumerate(r2yz):
            bias = SE * root_dof * math.sqrt(yz * dz / (1 - dz))
            se = SE * math.sqrt((1 - yz) / (1 - dz)) * se_factor
            adjusted = ESTIMATE - bias
            estimate[i][j] = adjusted
            t[i][j] = adjusted / se if se > 0 else math.inf
            low[i][j] = adjusted - critical * se
            high[i][j] = adjusted + critical * se
    rows = []
    for dxj, yxj in zip(r2dxj, r2yxj):
        for k in MULTIPLIERS:
            dz = k * dxj / (1 - dxj)
            zxj = k * dxj**2 / ((1 - k * dxj) * (1 - dxj))
            eta = (math.sqrt(k) + math.sqrt(zxj)) / math.sqrt(1 - zxj)
            yz = min(1.0, eta**2 * yxj / (1 - yxj))
            bias = SE * root_dof * math.sqrt(yz * dz / (1 - dz))
            rows.append(ESTIMATE - bias)
    return estimate, t, low, high, rows


def test_bench_grid_with_benchmarks():
    r2dz = np.linspace(0.0, 0.5, POINTS)
    r2yz = np.linspace(0.0, 1.0, POINTS)
    rng = np.random.default_rng(0)
    r2dxj = rng.uniform(0.001, 0.05, N_BENCHMARKS)
    r2yxj = rng.uniform(0.001, 0.15, N_BENCHMARKS)

    _vectorised(r2dz, r2yz, r2dxj, r2yxj)          # warm-up (imports, caches)
    times = []
    for _ in range(5):
        start = time.perf_counter()
        grid, table = _vectorised(r2dz, r2yz, r2dxj, r2yxj)
        times.append(time.perf_counter() - start)
    fast = min(times)

    start = time.perf_counter()
    estimate, t, low, high, rows = _python_loop(r2dz.tolist(), r2yz.tolist(), r2dxj.tolist(),
                                                r2yxj.tolist())
    slow = time.perf_counter() - start

    # the same numbers
    b = grid.bounds
    for i, j in [(0, 0), (1, 999), (500, 500), (999, 998), (123, 456)]:
        assert b.adjusted_estimate[i, j] == pytest.approx(estimate[i][j], rel=1e-12, abs=1e-15)
        assert b.ci_low[i, j] == pytest.approx(low[i][j], rel=1e-12, abs=1e-15)
        assert b.ci_high[i, j] == pytest.approx(high[i][j], rel=1e-12, abs=1e-15)
        assert b.t[i, j] == pytest.approx(t[i][j], rel=1e-12, abs=1e-15)
    np.testing.assert_allclose(table.bounds.adjusted_estimate, rows, rtol=1e-12)

    print(f"\nsensitivity grid {POINTS}x{POINTS} + {N_BENCHMARKS} benchmarks x "
          f"{len(MULTIPLIERS)}: vectorised {fast * 1000:.1f} ms (best of 5), plain Python loop "
          f"{slow * 1000:.0f} ms, ratio {slow / fast:.1f}x")
    assert fast < 1.0
