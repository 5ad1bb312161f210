"""Tests of causalcheck.decompose: the exact split of the naive-adjusted gap (Gelbach 2016)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from hypothesis import given, settings
from hypothesis import strategies as st

from causalcheck.decompose import added_control_shifts, decompose
from causalcheck.moments import design_from_frame, moments_from_array, moments_from_design
from causalcheck.regress import fit
from causalcheck.study import parse_study


@settings(max_examples=60, deadline=None)
@given(seed=st.integers(0, 100_000), k=st.integers(1, 6), base=st.integers(0, 2),
       n=st.integers(30, 300))
def test_contributions_sum_to_the_gap_on_random_data(seed, k, base, n):
    # Gelbach (2016), eq. (5): beta_base - beta_full = sum_k gamma_k delta_k, an identity
    rng = np.random.default_rng(seed)
    mix = rng.normal(size=(k + base + 2, k + base + 2))
    values = rng.normal(size=(n, k + base + 2)) @ mix + rng.normal(size=k + base + 2) * 100
    names = ["t", "y"] + [f"z{i}" for i in range(k)] + [f"x{i}" for i in range(base)]
    moments = moments_from_array(values, names)
    parts = decompose(moments, "t", "y", names[2:2 + k], base=names[2 + k:])
    total = sum(term.contribution for term in parts.terms)
    assert total == pytest.approx(parts.gap, rel=1e-9, abs=1e-9 * abs(parts.base_estimate))
    shares = [term.share for term in parts.terms]
    if abs(parts.gap) > 1e-6 * abs(parts.base_estimate):
        assert sum(shares) == pytest.approx(1.0, rel=1e-7)


def test_one_confounder_is_the_textbook_omitted_variable_bias():
    # Angrist & Pischke (2009), Sec. 3.2.2: short - long = gamma * Cov(T, Z) / Var(T)
    rng = np.random.default_rng(1)
    z = rng.normal(size=1000)
    t = 0.8 * z + rng.normal(size=1000)
    y = 1.0 * t + 1.5 * z + rng.normal(size=1000)
    frame = pd.DataFrame({"t": t, "y": y, "z": z})
    short = sm.OLS(y, sm.add_constant(frame[["t"]])).fit().params["t"]
    long = sm.OLS(y, sm.add_constant(frame[["t", "z"]])).fit().params
    delta = np.cov(t, z)[0, 1] / np.var(t, ddof=1)
    moments = moments_from_array(frame.to_numpy(), ["t", "y", "z"])
    parts = decompose(moments, "t", "y", ["z"])
    term = parts.term("z")
    assert parts.base_estimate == pytest.approx(short, rel=1e-10)
    assert parts.full_estimate == pytest.approx(long["t"], rel=1e-10)
    assert term.gamma == pytest.approx(long["z"], rel=1e-10)
    assert term.delta == pytest.approx(delta, rel=1e-10)
    assert term.contribution == pytest.approx(short - long["t"], rel=1e-10)
    assert term.share == pytest.approx(1.0, rel=1e-10)


def test_stackloss_gap_split_between_water_and_acid():
    # Brownlee's stack-loss data (statsmodels.datasets.stackloss): naive slope on air flow
    # 1.0203, adjusted 0.7156 (Draper & Smith 1998, Ch. 17 — from memory, four decimals), so the
    # gap is 0.3047; statsmodels gives each gamma_k and delta_k on the same rows.
    data = sm.datasets.stackloss.load_pandas().data
    columns = ["AIRFLOW", "STACKLOSS", "WATERTEMP", "ACIDCONC"]
    moments = moments_from_array(data[columns].to_numpy(), columns)
    parts = decompose(moments, "AIRFLOW", "STACKLOSS", ["WATERTEMP", "ACIDCONC"])
    assert parts.gap == pytest.approx(1.0203 - 0.7156, abs=1e-4)
    long = sm.OLS(data.STACKLOSS, sm.add_constant(data[columns[::2] + ["ACIDCONC"]])).fit()
    for name in ("WATERTEMP", "ACIDCONC"):
        delta = sm.OLS(data[name], sm.add_constant(data[["AIRFLOW"]])).fit().params["AIRFLOW"]
        assert parts.term(name).contribution == pytest.approx(long.params[name] * delta,
                                                              rel=1e-9)
    # water temperature carries almost all of the gap; acid concentration a little
    assert parts.leading()[0].variable == "WATERTEMP"


STUDY = parse_study("""
[study]
treatment = "t"
outcome = "y"
[variables]
region = { kind = "categorical" }
[graph]
edges = ["region -> t", "region -> y", "t -> y", "z -> t", "z -> y"]
""")


def _regional(seed: int = 2, n: int = 800) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    region = rng.choice(["a", "b", "c"], size=n)
    z = rng.normal(size=n)
    t = (region == "b") * 1.0 - (region == "c") * 0.5 + 0.3 * z + rng.normal(size=n)
    y = 2.0 * t + (region == "b") * 3.0 + (region == "c") * 1.0 + z + rng.normal(size=n)
    return pd.DataFrame({"t": t, "y": y, "z": z, "region": region})


def test_categorical_dummies_are_summed_and_do_not_depend_on_the_reference():
    frame = _regional()
    moments = moments_from_design(design_from_frame(frame, ["t", "y", "z", "region"],
                                                    study=STUDY))
    parts = decompose(moments, "t", "y", ["z", "region"])
    term = parts.term("region")
    assert term.gamma is None and term.delta is None and len(term.columns) == 2
    assert term.contribution == pytest.approx(sum(c["contribution"] for c in term.columns))
    # same data with another reference level: the region's total is unchanged
    other = parse_study(STUDY_TEXT_WITH_LEVELS)
    moments_c = moments_from_design(design_from_frame(frame, ["t", "y", "z", "region"],
                                                      study=other))
    assert moments_c.groups["region"] == ("region[a]", "region[b]")
    parts_c = decompose(moments_c, "t", "y", ["z", "region"])
    assert parts_c.term("region").contribution == pytest.approx(term.contribution, rel=1e-9)
    assert parts_c.term("z").contribution == pytest.approx(parts.term("z").contribution,
                                                           rel=1e-9)


STUDY_TEXT_WITH_LEVELS = """
[study]
treatment = "t"
outcome = "y"
[variables]
region = { kind = "categorical", levels = ["c", "a", "b"] }
[graph]
edges = ["region -> t", "region -> y", "t -> y", "z -> t", "z -> y"]
"""


def test_added_bad_control_shift_matches_refit_and_minus_gamma_delta():
    # a mediator m: adding it to the valid set {z} removes the part of the effect through m
    rng = np.random.default_rng(3)
    n = 2000
    z = rng.normal(size=n)
    t = z + rng.normal(size=n)
    m = 0.8 * t + rng.normal(size=n)
    y = 0.5 * t + 1.0 * m + z + rng.normal(size=n)
    moments = moments_from_array(np.column_stack([t, y, z, m]), ["t", "y", "z", "m"])
    (shift,) = added_control_shifts(moments, "t", "y", ["z"], ["m", "z"],
                                    problems={"m": ["mediator"]})
    with_m = fit(moments, "y", ["t", "z", "m"]).coefficient("t")
    without = fit(moments, "y", ["t", "z"]).coefficient("t")
    assert shift.estimate_with == pytest.approx(with_m, rel=1e-12)
    assert shift.shift == pytest.approx(with_m - without, rel=1e-9)
    assert shift.shift == pytest.approx(-shift.gamma * shift.delta, rel=1e-9)
    # total effect 0.5 + 0.8 * 1.0 = 1.3; with the mediator only the direct 0.5 remains
    assert without == pytest.approx(1.3, abs=0.1) and with_m == pytest.approx(0.5, abs=0.1)
    assert shift.problems == ("mediator",)
