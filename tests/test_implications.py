"""Tests of causalcheck.implications: Fisher z, Wilks/Rao F, Holm, calibration."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from statsmodels.multivariate.manova import MANOVA
from statsmodels.stats.multitest import multipletests

from causalcheck.implications import (
    check_implication,
    check_implications,
    holm_adjust,
    partial_correlation,
)
from causalcheck.moments import moments_from_array


@dataclass(frozen=True)
class _Implication:
    left: str
    right: str
    given: tuple[str, ...]


def _chain(n: int, seed: int, *, leak: float = 0.0) -> pd.DataFrame:
    # a -> s -> b: a ⊥ b | s holds unless leak (a direct a -> b edge) is nonzero
    rng = np.random.default_rng(seed)
    a = rng.normal(size=n)
    s = a + rng.normal(size=n)
    b = s + leak * a + rng.normal(size=n)
    return pd.DataFrame({"a": a, "b": b, "s": s})


def test_partial_correlation_equals_residual_correlation():
    frame = _chain(500, 1, leak=0.3)
    moments = moments_from_array(frame.to_numpy(), list(frame.columns))
    # Frisch–Waugh: correlate the residuals of a and b on (1, s), statsmodels OLS
    exog = sm.add_constant(frame[["s"]])
    ra = sm.OLS(frame["a"], exog).fit().resid
    rb = sm.OLS(frame["b"], exog).fit().resid
    assert partial_correlation(moments, "a", "b", ["s"]) == pytest.approx(
        np.corrcoef(ra, rb)[0, 1], rel=1e-10)


def test_fisher_z_statistic_and_p_value():
    frame = _chain(400, 2, leak=0.2)
    moments = moments_from_array(frame.to_numpy(), list(frame.columns))
    result = check_implication(moments, "a", "b", ["s"])
    r = partial_correlation(moments, "a", "b", ["s"])
    # Fisher (1924): z = atanh(r) sqrt(n - |S| - 3); p two-sided normal, scipy-free check
    z = math.atanh(r) * math.sqrt(400 - 1 - 3)
    assert result.test == "fisher_z"
    assert result.statistic == pytest.approx(z, rel=1e-12)
    assert result.p_value == pytest.approx(math.erfc(abs(z) / math.sqrt(2)), rel=1e-9)


def test_block_test_matches_statsmodels_manova_wilks():
    rng = np.random.default_rng(0)
    n = 300
    s1 = rng.normal(size=n)
    a = rng.normal(size=(n, 3)) + 0.5 * s1[:, None]
    b = rng.normal(size=(n, 2)) + 0.1 * a[:, :2]
    frame = pd.DataFrame(np.column_stack([a, b, s1]),
                         columns=["a1", "a2", "a3", "b1", "b2", "s1"])
    groups = {"A": ("a1", "a2", "a3"), "B": ("b1", "b2"), "s1": ("s1",)}
    moments = moments_from_array(frame.to_numpy(), list(frame.columns), groups=groups)
    result = check_implication(moments, "A", "B", ["s1"])
    # reference: statsmodels MANOVA, Wilks' lambda with Rao's F, hypothesis B = 0
    test = MANOVA.from_formula("a1 + a2 + a3 ~ b1 + b2 + s1", data=frame).mv_test(
        hypotheses=[("B", np.array([[0, 1, 0, 0], [0, 0, 1, 0]]))])
    row = test.results["B"]["stat"].loc["Wilks' lambda"]
    assert result.test == "wilks_rao_f"
    assert result.wilks_lambda == pytest.approx(float(row["Value"]), rel=1e-9)
    assert result.statistic == pytest.approx(float(row["F Value"]), rel=1e-9)
    assert result.dof == (float(row["Num DF"]), float(row["Den DF"]))
    assert result.p_value == pytest.approx(float(row["Pr > F"]), rel=1e-7)
    # symmetric in the two blocks
    swapped = check_implication(moments, "B", "A", ["s1"])
    assert swapped.statistic == pytest.approx(result.statistic, rel=1e-10)


def test_one_column_against_a_block_is_the_partial_f_test():
    rng = np.random.default_rng(4)
    n = 250
    frame = pd.DataFrame(rng.normal(size=(n, 4)), columns=["a", "b1", "b2", "s"])
    frame["a"] += 0.2 * frame["b1"] + frame["s"]
    moments = moments_from_array(frame.to_numpy(), list(frame.columns),
                                 groups={"a": ("a",), "B": ("b1", "b2"), "s": ("s",)})
    result = check_implication(moments, "a", "B", ["s"])
    # reference: statsmodels OLS F test of b1 = b2 = 0 in a ~ b1 + b2 + s
    reference = sm.OLS(frame["a"], sm.add_constant(frame[["b1", "b2", "s"]])).fit().f_test(
        "b1 = 0, b2 = 0")
    assert result.statistic == pytest.approx(float(reference.fvalue), rel=1e-9)
    assert result.p_value == pytest.approx(float(reference.pvalue), rel=1e-7)
    assert result.dof == (2.0, float(reference.df_denom))


def test_holm_matches_statsmodels_multipletests():
    rng = np.random.default_rng(5)
    p_values = list(rng.uniform(0, 0.2, size=12)) + [1e-20]
    _, adjusted, *_ = multipletests(p_values, alpha=0.05, method="holm")
    np.testing.assert_allclose(holm_adjust(p_values), adjusted, rtol=1e-12)
    assert math.isnan(holm_adjust([0.2, math.nan, 0.01])[1])
    assert holm_adjust([0.2, math.nan, 0.01])[2] == pytest.approx(0.02)


def test_true_implication_rejected_at_about_the_nominal_rate():
    # Under a true independence the p-values are uniform: about 5% below 0.05 (binomial SD
    # over 400 draws is 1.1 points, so 1%-10% is a loose, seed-fixed band).
    rejections = 0
    for seed in range(400):
        frame = _chain(60, 1000 + seed)
        moments = moments_from_array(frame.to_numpy(), list(frame.columns))
        rejections += check_implication(moments, "a", "b", ["s"]).p_value < 0.05
    assert 4 <= rejections <= 40


def test_violated_implication_is_rejected_after_holm():
    frame = _chain(2000, 7, leak=0.3)
    frame["c"] = np.random.default_rng(8).normal(size=2000)
    moments = moments_from_array(frame.to_numpy(), list(frame.columns))
    implications = [_Implication("a", "b", ("s",)), _Implication("c", "a", ()),
                    _Implication("c", "b", ("s",))]
    results = check_implications(moments, implications)
    assert [r.rejected for r in results] == [True, False, False]
    assert results[0].holm_p_value == pytest.approx(min(1.0, 3 * results[0].p_value))
    assert results[0].to_dict()["given"] == ["s"]
