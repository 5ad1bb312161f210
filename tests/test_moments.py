"""Tests of causalcheck.moments: encoding, missing rows, stable moments, exact merging, errors."""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from causalcheck.errors import DataError
from causalcheck.moments import (
    EmptyLevelWarning,
    design_from_frame,
    merge_moments,
    moments_from_array,
    moments_from_covariance,
    moments_from_frame,
    read_frame,
)
from causalcheck.regress import fit
from causalcheck.study import DataSpec, parse_study

STUDY = parse_study("""
[study]
treatment = "t"
outcome = "y"
[variables]
region = { kind = "categorical", levels = ["north", "south", "east"] }
owner = { kind = "binary" }
[graph]
edges = ["z -> t", "z -> y", "t -> y", "region -> t", "region -> y", "owner -> y"]
""")


def _frame(n: int = 400, seed: int = 0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    z = rng.normal(size=n)
    region = rng.choice(["north", "south", "east"], size=n)
    owner = rng.choice(["yes", "no"], size=n)
    t = 0.5 * z + (region == "south") + rng.normal(size=n)
    y = 2.0 * t + z - (region == "east") + rng.normal(size=n)
    return pd.DataFrame({"t": t, "y": y, "z": z, "region": region, "owner": owner})


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


# -- moments against direct numpy computations ------------------------------------------------


def test_moments_match_numpy_mean_and_covariance():
    rng = np.random.default_rng(1)
    values = rng.normal(size=(1000, 4)) @ rng.normal(size=(4, 4)) + 3.0
    moments = moments_from_array(values, ["a", "b", "c", "d"], chunk_rows=97)
    # reference: numpy's mean and np.cov on the same array
    assert np.allclose(moments.means, values.mean(axis=0), rtol=1e-13, atol=1e-13)
    assert np.allclose(moments.covariance(), np.cov(values, rowvar=False), rtol=1e-12)
    assert moments.n == 1000


def test_chunked_moments_equal_single_chunk():
    rng = np.random.default_rng(2)
    values = rng.normal(size=(777, 3)) * [1.0, 10.0, 0.1] + [5.0, -2.0, 100.0]
    whole = moments_from_array(values, ["a", "b", "c"], chunk_rows=10_000)
    chunked = moments_from_array(values, ["a", "b", "c"], chunk_rows=13)
    assert np.allclose(whole.means, chunked.means, rtol=1e-14)
    assert np.allclose(whole.cross, chunked.cross, rtol=1e-12)


@settings(max_examples=40, deadline=None)
@given(rows=st.integers(4, 200), split=st.floats(0.05, 0.95), seed=st.integers(0, 10_000),
       offset=st.floats(-1e6, 1e6))
def test_merge_moments_is_exact_for_any_split(rows, split, seed, offset):
    rng = np.random.default_rng(seed)
    values = rng.normal(size=(rows, 3)) + offset
    cut = min(rows - 1, max(1, int(rows * split)))
    left = moments_from_array(values[:cut], ["a", "b", "c"])
    right = moments_from_array(values[cut:], ["a", "b", "c"])
    merged = merge_moments(left, right)
    whole = moments_from_array(values, ["a", "b", "c"])
    assert merged.n == rows
    assert np.allclose(merged.means, whole.means, rtol=1e-12, atol=1e-9)
    assert np.allclose(merged.cross, whole.cross, rtol=1e-9, atol=1e-7)


def test_large_offset_keeps_slopes_accurate_to_1e_8():
    # Columns around 1e9 with unit spread: raw sums of squares would lose every digit.
    # Reference: the same stored values shifted by exactly 1e9 (Sterbenz: the subtraction is
    # exact), fitted with statsmodels-free plain numpy least squares.
    rng = np.random.default_rng(3)
    n = 200_000
    x = 1e9 + rng.normal(size=n)
    w = 1e9 + 0.5 * (x - 1e9) + rng.normal(size=n)
    y = 1e9 + 3.0 * (x - 1e9) - 2.0 * (w - 1e9) + rng.normal(size=n)
    moments = moments_from_array(np.column_stack([x, w, y]), ["x", "w", "y"])
    result = fit(moments, "y", ["x", "w"])
    shifted = np.column_stack([np.ones(n), x - 1e9, w - 1e9])
    reference, *_ = np.linalg.lstsq(shifted, y - 1e9, rcond=None)
    assert np.allclose(result.coef, reference[1:], rtol=1e-8, atol=0)
    # and the naive uncentred normal equations really do fail here (the test can fail)
    raw = np.column_stack([np.ones(n), x, w])
    naive = np.linalg.solve(raw.T @ raw, raw.T @ y)
    assert not np.allclose(naive[1:], reference[1:], rtol=1e-8, atol=0)


def test_moments_from_covariance():
    cov = np.array([[2.0, 0.6], [0.6, 1.0]])
    moments = moments_from_covariance(cov, columns=["t", "y"], n=51, means=[1.0, 2.0])
    assert np.allclose(moments.cross, cov * 50)        # cross = cov * (n - 1)
    assert np.allclose(moments.covariance(), cov)
    assert moments.groups == {"t": ("t",), "y": ("y",)}
    # slope of y on t from the covariance: 0.6 / 2.0
    assert fit(moments, "y", ["t"]).coefficient("t") == pytest.approx(0.3, rel=1e-14)


# -- encoding -----------------------------------------------------------------------------------


def test_categorical_dummies_use_declared_levels_with_first_as_reference():
    frame = _frame()
    design = design_from_frame(frame, ["t", "y", "z", "region", "owner"], study=STUDY)
    assert design.groups["region"] == ("region[south]", "region[east]")
    assert design.columns == ("t", "y", "z", "region[south]", "region[east]", "owner")
    south = design.column("region[south]")
    assert np.array_equal(south, (frame["region"] == "south").to_numpy(dtype=float))
    owner = design.column("owner")
    assert np.array_equal(owner, (frame["owner"] == "yes").to_numpy(dtype=float))
    moments, rows = moments_from_frame(frame, ["t", "y", "region"], study=STUDY)
    assert moments.select(["region", "t"]) == ("region[south]", "region[east]", "t")
    assert rows.used == rows.read == len(frame)


def test_categorical_without_declared_levels_sorts_observed_levels_numerically():
    study = parse_study("""
[study]
treatment = "t"
outcome = "y"
[variables]
grade = { kind = "categorical" }
[graph]
edges = ["grade -> t", "t -> y"]
""")
    frame = pd.DataFrame({"t": [0.0, 1.0, 2.0, 3.0, 4.0, 5.0], "y": [1.0, 0, 3, 2, 5, 4],
                          "grade": [10, 2, 2, 10, 1, None]})
    design = design_from_frame(frame, ["t", "y", "grade"], study=study)
    # levels 1 < 2 < 10 numerically (not "1" < "10" < "2"); 1 is the reference
    assert design.groups["grade"] == ("grade[2]", "grade[10]")
    assert design.rows.dropped_missing == 1
    assert design.levels["grade"] == ("1", "2", "10")


def test_declared_level_without_rows_is_left_out_with_a_warning():
    frame = _frame()
    frame = frame[frame["region"] != "north"].reset_index(drop=True)
    with pytest.warns(EmptyLevelWarning, match="'north'"):
        design = design_from_frame(frame, ["t", "region"], study=STUDY)
    # the first level that has rows becomes the reference: dummies stay independent
    assert design.groups["region"] == ("region[east]",)


def test_missing_rows_dropped_and_counted_per_column():
    frame = _frame(50)
    frame.loc[[1, 2, 3], "z"] = np.nan
    frame.loc[[3, 4], "region"] = None
    moments, rows = moments_from_frame(frame, ["t", "y", "z", "region"], study=STUDY)
    # rows 1, 2, 3 lack z and rows 3, 4 lack region: four rows dropped, row 3 counted once
    assert rows.read == 50 and rows.used == 46 and rows.dropped_missing == 4
    assert rows.missing == {"t": 0, "y": 0, "z": 3, "region": 2}
    kept = frame.drop(index=[1, 2, 3, 4])
    assert np.allclose(moments.means[0], kept["t"].mean(), rtol=1e-14)
    assert rows.to_dict()["missing_by_column"]["z"] == 3


def test_bool_and_numeric_columns_become_float():
    frame = pd.DataFrame({"t": [True, False, True, False], "y": [1, 2, 3, 5]})
    moments, _ = moments_from_frame(frame, ["t", "y"])
    assert moments.means.tolist() == [0.5, 2.75]


# -- files ----------------------------------------------------------------------------------------


def test_csv_and_parquet_give_the_same_moments(tmp_path):
    frame = _frame()
    frame.loc[5, "z"] = np.nan
    csv = tmp_path / "d.csv"
    frame.to_csv(csv, index=False)
    parquet = tmp_path / "d.parquet"
    frame.to_parquet(parquet)
    names = ["t", "y", "z", "region", "owner"]
    from_csv, rows_csv = moments_from_frame(read_frame(DataSpec(path=csv), names), names,
                                            study=STUDY)
    from_pq, rows_pq = moments_from_frame(read_frame(DataSpec(path=parquet), names), names,
                                          study=STUDY)
    assert rows_csv == rows_pq
    assert from_csv.columns == from_pq.columns
    assert np.allclose(from_csv.cross, from_pq.cross, rtol=1e-12)


def test_csv_with_text_after_many_numbers_reports_the_value(tmp_path):
    # pyarrow infers the type from the first block; the fallback must still find the value
    n = 200_000
    frame = pd.DataFrame({"t": np.arange(n, dtype=float), "y": np.ones(n)})
    frame["y"] = frame["y"].astype(object)
    frame.loc[n - 3, "y"] = "n/a?"
    path = tmp_path / "late.csv"
    frame.to_csv(path, index=False)
    before = _digest(path)
    data = read_frame(DataSpec(path=path), ["t", "y"])
    with pytest.raises(DataError, match=r"column 'y' .* not numeric: data row 199998 .*'n/a\?'"):
        moments_from_frame(data, ["t", "y"], source=f"data file {str(path)!r}")
    assert _digest(path) == before


# -- errors ---------------------------------------------------------------------------------------


def test_error_missing_column_lists_near_matches(tmp_path):
    path = tmp_path / "d.csv"
    _frame().rename(columns={"z": "income"}).to_csv(path, index=False)
    before = _digest(path)
    with pytest.raises(DataError) as info:
        read_frame(DataSpec(path=path), ["t", "y", "incme"])
    message = str(info.value)
    assert "has no column 'incme' (did you mean 'income'?)" in message
    assert "measured = false" in message
    assert _digest(path) == before


def test_error_missing_column_in_a_frame():
    with pytest.raises(DataError, match=r"no column 'Z' \(did you mean 'z'\?\)"):
        moments_from_frame(_frame(), ["t", "Z"])


def test_error_non_numeric_column_shows_value_and_row():
    frame = _frame(10)
    frame["z"] = frame["z"].astype(object)
    frame.loc[6, "z"] = "twelve"
    with pytest.raises(DataError) as info:
        moments_from_frame(frame, ["t", "z"], source="data file 'survey.csv'")
    message = str(info.value)
    assert "column 'z' in data file 'survey.csv' is not numeric: data row 7" in message
    assert "'twelve'" in message and 'kind = "categorical"' in message


def test_error_binary_column_with_other_values():
    frame = pd.DataFrame({"t": [0.0, 1.0, 2.0], "y": [1.0, 2.0, 3.0], "owner": [0, 1, 2]})
    with pytest.raises(DataError, match=r"'owner' .* declared binary but data row 3 .* holds 2\.0"):
        moments_from_frame(frame, ["t", "y", "owner"], study=STUDY)


def test_error_undeclared_category_level():
    frame = _frame(20)
    frame.loc[4, "region"] = "west"
    with pytest.raises(DataError, match=r"holds 'west' at data row 5 .*, which is not one of "
                                        r"the levels declared in \[variables\]\.region\.levels"):
        moments_from_frame(frame, ["t", "region"], study=STUDY)


def test_error_constant_treatment():
    frame = _frame(30)
    frame["t"] = 1.0
    with pytest.raises(DataError, match=r"the treatment 't' is constant .*every one of the 30 "
                                        r"rows used holds 1\.0"):
        moments_from_frame(frame, ["t", "y"], study=STUDY)


def test_error_all_rows_dropped_names_the_most_missing_columns():
    frame = _frame(12)
    frame.loc[:, "z"] = np.nan
    frame.loc[:5, "t"] = np.nan
    with pytest.raises(DataError) as info:
        moments_from_frame(frame, ["t", "y", "z"], study=STUDY)
    message = str(info.value)
    assert "no row is left ('z' missing in 12 of 12 rows, 't' missing in 6 of 12 rows)" in message


def test_error_fewer_rows_than_parameters():
    frame = _frame(4)
    with pytest.raises(DataError, match=r"has 4 usable rows .* all 6 design columns together needs at least 7"):
        moments_from_frame(frame, ["t", "y", "z", "region", "owner"], study=STUDY)


def test_error_file_not_found(tmp_path):
    with pytest.raises(DataError, match=r"data file '.*nothere\.csv' does not exist; "
                                        r"\[data\]\.path is relative to the study file"):
        read_frame(DataSpec(path=tmp_path / "nothere.csv"), ["t"])


def test_error_folder_instead_of_file(tmp_path):
    with pytest.raises(DataError, match="is a folder, not a file"):
        read_frame(DataSpec(path=tmp_path), ["t"])


def test_error_unreadable_parquet(tmp_path):
    path = tmp_path / "broken.parquet"
    path.write_bytes(b"PAR1 this is not really parquet")
    before = _digest(path)
    with pytest.raises(DataError, match=r"'.*broken\.parquet' cannot be read as parquet"):
        read_frame(DataSpec(path=path), ["t"])
    assert _digest(path) == before


def test_error_empty_csv(tmp_path):
    path = tmp_path / "empty.csv"
    path.write_text("")
    with pytest.raises(DataError, match="is empty; it needs a header row"):
        read_frame(DataSpec(path=path), ["t"])


def test_error_not_utf8_csv(tmp_path):
    path = tmp_path / "latin.csv"
    path.write_bytes("t,y\n1,caf\xe9\n".encode("latin-1"))
    with pytest.raises(DataError, match="is not UTF-8 text"):
        read_frame(DataSpec(path=path), ["t", "y"])


def test_error_unknown_suffix(tmp_path):
    path = tmp_path / "data.xlsx"
    path.write_bytes(b"x")
    with pytest.raises(DataError, match=r"suffix '\.xlsx', which causalcheck does not read"):
        read_frame(DataSpec(path=path), ["t"])


def test_error_infinite_value():
    frame = pd.DataFrame({"t": [0.0, 1.0, np.inf], "y": [1.0, 2.0, 3.0]})
    with pytest.raises(DataError, match=r"'t' .* infinite value at data row 3"):
        moments_from_frame(frame, ["t", "y"])
