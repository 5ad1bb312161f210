"""Tests of causalcheck.engines and causalcheck.partition: every engine gives the in-memory result.

The data are invented (a household-heating scenario of our own): a numeric treatment and
outcome, a confounder near 1e9 with unit spread, a binary column written as yes/no, a
categorical whose fourth level appears only in the last rows (so only in the last batch), a
numeric-coded categorical with declared levels, and missing values in several columns. Batches
are small and uneven so that levels, missing rows and row groups are split across them.
"""

from __future__ import annotations

import math
import os
import pickle
import subprocess
import sys
import tempfile
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from causalcheck import engines, partition
from causalcheck.audit import audit
from causalcheck.engines import choose_engine, compute_moments
from causalcheck.errors import DataError
from causalcheck.moments import _FALSE, _TRUE, EmptyLevelWarning
from causalcheck.regress import fit
from causalcheck.study import parse_study

STUDY_TEXT = """
[study]
treatment = "heat"
outcome = "bill"
[variables]
region = { kind = "categorical" }
band = { kind = "categorical", levels = ["1", "2", "3"] }
owner = { kind = "binary" }
[graph]
edges = ["meter -> heat", "meter -> bill", "heat -> bill", "region -> heat",
         "region -> bill", "owner -> bill", "band -> heat", "band -> bill", "heat -> vent"]
[controls]
used = ["meter", "region", "owner", "band"]
[sensitivity]
benchmarks = ["meter"]
"""
STUDY = parse_study(STUDY_TEXT)
VARIABLES = ["heat", "bill", "band", "meter", "owner", "region", "vent"]
ROWS = 6000
BATCH = 1100          # six batches, the last one short


def _frame(rows: int = ROWS, seed: int = 7) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    meter = rng.normal(size=rows)
    region = rng.choice(["north", "south", "east"], size=rows).astype(object)
    region[-40:] = "west"                       # a level found only in the last batch
    band = rng.choice([1, 2, 3], size=rows)
    owner = rng.choice(["yes", "no"], size=rows)
    heat = 0.6 * meter + (region == "south") + 0.3 * band + rng.normal(size=rows)
    # heteroskedastic noise, so that HC1 and classical errors differ
    bill = (1.5 * heat + meter - (region == "east") + 0.5 * (region == "west") - 0.2 * band
            + (owner == "yes") + rng.normal(size=rows) * (1.0 + 0.5 * np.abs(heat)))
    vent = 0.4 * heat + rng.normal(size=rows)
    frame = pd.DataFrame({"heat": heat, "bill": bill, "meter": meter + 1e9, "owner": owner,
                          "region": region, "band": band, "vent": vent})
    # missing values spread over the batches (rows 5, 12, 30%, 42%, 55% and 73% of the way)
    frame.loc[[5, int(0.3 * rows), int(0.73 * rows)], "meter"] = np.nan
    frame.loc[[12, int(0.55 * rows)], "region"] = None
    frame.loc[[int(0.42 * rows)], "owner"] = None
    return frame


@pytest.fixture(scope="module")
def files(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    folder = tmp_path_factory.mktemp("engines")
    frame = _frame()
    csv = folder / "homes.csv"
    frame.to_csv(csv, index=False)
    parquet = folder / "homes.parquet"
    frame.to_parquet(parquet, row_group_size=1700)     # row groups cut across the batches
    return {"csv": csv, "parquet": parquet}


def _relative(a: np.ndarray, b: np.ndarray) -> float:
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    scale = np.max(np.abs(b)) if b.size else 1.0
    return float(np.max(np.abs(a - b)) / scale) if b.size else 0.0


def _summary(data, engine: str, **options):
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        result = compute_moments(STUDY, data, engine=engine, variables=VARIABLES, **options)
    moments, rows, source = result
    fits = [fit(moments, "bill", ["heat"]),
            fit(moments, "bill", ["heat", "meter", "region", "owner", "band"])]
    with source:
        robust = source.robust_std_errors(fits)
        robust_heat = source.robust_std_errors(fits, column="heat") if engine != "pandas" \
            else None
    return moments, rows, fits, robust, robust_heat, result


def _assert_same(other, base, tolerance: float = 1e-9) -> None:
    moments, rows, fits, robust, robust_heat, _ = other
    base_moments, base_rows, base_fits, base_robust, _, _ = base
    assert moments.columns == base_moments.columns
    assert dict(moments.groups) == dict(base_moments.groups)
    assert (rows.read, rows.used, rows.dropped_missing) == (base_rows.read, base_rows.used,
                                                           base_rows.dropped_missing)
    assert dict(rows.missing) == dict(base_rows.missing)
    assert moments.n == base_moments.n
    assert _relative(moments.means, base_moments.means) < tolerance
    assert _relative(moments.cross, base_moments.cross) < tolerance
    for f, g in zip(fits, base_fits):
        assert _relative(f.coef, g.coef) < tolerance
        assert _relative(f.std_error, g.std_error) < tolerance
    for r, s in zip(robust, base_robust):
        assert _relative(r, s) < tolerance
    if robust_heat is not None:
        for r, s in zip(robust_heat, base_robust):
            assert abs(r[0] - s[0]) < tolerance * s[0]


@pytest.fixture(scope="module")
def in_memory(files):
    return {kind: _summary(path, "pandas") for kind, path in files.items()}


# -- equivalence --------------------------------------------------------------------------


@pytest.mark.parametrize("kind", ["csv", "parquet"])
@pytest.mark.parametrize("reader", ["duckdb", "pyarrow"])
def test_stream_equals_in_memory(files, in_memory, kind, reader, monkeypatch):
    monkeypatch.setitem(engines.READERS, kind, reader)
    streamed = _summary(files[kind], "stream", batch_rows=BATCH)
    _assert_same(streamed, in_memory[kind])
    assert streamed[1].engine == "stream"
    # the level seen only in the last batch is a dummy, as in memory
    assert "region[west]" in streamed[0].columns


@pytest.mark.parametrize("kind", ["csv", "parquet"])
def test_dask_equals_in_memory(files, in_memory, kind):
    result = _summary(files[kind], "dask")
    _assert_same(result, in_memory[kind])
    assert result[1].engine == "dask"
    assert "Dask's local threaded scheduler" in result[5].notes[-1]


def test_stream_and_dask_on_frames_equal_in_memory():
    frame = _frame(seed=11)
    base = _summary(frame, "pandas")
    _assert_same(_summary(frame, "stream", batch_rows=777), base)
    import dask.dataframe as dd

    _assert_same(_summary(dd.from_pandas(frame, npartitions=5), "dask"), base)


def test_large_offset_with_unit_spread_keeps_its_digits():
    # a column near 1e9 with unit spread, 120 batches merged: the moments stay exact to
    # rounding. Reference: numpy's float128 (long double) two-pass covariance of the same
    # float64 values.
    rng = np.random.default_rng(3)
    rows = 60_000
    x = rng.normal(size=rows) + 1e9
    y = 2.0 + 0.5 * (x - 1e9) + rng.normal(size=rows) + 5e8
    frame = pd.DataFrame({"x": x, "y": y})
    values = frame.to_numpy().astype(np.longdouble)
    centred = values - values.mean(axis=0)
    reference = (centred.T @ centred).astype(np.float64)
    streamed = compute_moments(None, frame, engine="stream", variables=["x", "y"],
                               batch_rows=500).moments
    assert _relative(streamed.cross, reference) < 1e-12
    slope = fit(streamed, "y", ["x"]).coefficient("x")
    assert slope == pytest.approx(reference[0, 1] / reference[0, 0], rel=1e-12)


def test_full_audit_is_the_same_on_every_engine(files, monkeypatch):
    study = parse_study(STUDY_TEXT)
    base = audit(study, files["csv"], engine="pandas").to_dict()
    for kind, engine in (("csv", "stream"), ("parquet", "stream"), ("csv", "dask")):
        monkeypatch.setattr(engines, "BATCH_BYTES", 8 * 1100 * 12)   # ~1100-row batches
        other = audit(study, files[kind], engine=engine).to_dict()
        assert other["rows"]["engine"] == engine
        _assert_documents_equal(other, base)
    # the decomposition and the robustness values are among the compared numbers
    assert base["decomposition"] and base["sensitivity"]["robustness_value"] is not None
    assert base["estimates"]["adjusted"]["robust_std_error"] > 0


def _flatten(value, path=""):
    if isinstance(value, dict):
        for key, item in value.items():
            yield from _flatten(item, f"{path}.{key}")
    elif isinstance(value, list):
        for i, item in enumerate(value):
            yield from _flatten(item, f"{path}[{i}]")
    else:
        yield path, value


def _assert_documents_equal(other: dict, base: dict) -> None:
    flat_other = dict(_flatten({k: v for k, v in other.items() if k != "notes"}))
    flat_base = dict(_flatten({k: v for k, v in base.items() if k != "notes"}))
    assert flat_other.keys() == flat_base.keys()
    for key, value in flat_base.items():
        if key == ".rows.engine":
            continue
        got = flat_other[key]
        if isinstance(value, float) and isinstance(got, float):
            assert got == pytest.approx(value, rel=1e-9, abs=1e-12, nan_ok=True), key
        else:
            assert got == value, key


def test_robust_errors_match_statsmodels_hc1():
    # reference: statsmodels OLS with cov_type="HC1" on the same rows (MacKinnon & White
    # 1985), through the stream and dask engines
    import statsmodels.api as sm

    frame = _frame(rows=3000, seed=5)
    frame["meter"] = frame["meter"] - 1e9          # statsmodels' X'X cannot take the 1e9
    frame = frame.dropna()
    x = pd.get_dummies(frame[["heat", "meter", "region"]], columns=["region"], drop_first=True,
                       dtype=float, prefix_sep="[")
    x.columns = [c + "]" if c.startswith("region[") else c for c in x.columns]
    reference = sm.OLS(frame["bill"], sm.add_constant(x)).fit(cov_type="HC1")
    for engine in ("stream", "dask"):
        result = compute_moments(None, frame, engine=engine,
                                 variables=["heat", "bill", "meter"], batch_rows=700)
        model = fit(result.moments, "bill", ["heat", "meter"])
        with_region = compute_moments(STUDY, frame, engine=engine,
                                      variables=["heat", "bill", "meter", "region"],
                                      batch_rows=700)
        model_region = fit(with_region.moments, "bill", ["heat", "meter", "region"])
        (robust,) = with_region.source.robust_std_errors([model_region])
        assert robust == pytest.approx(reference.bse[list(model_region.regressors)].to_numpy(),
                                       rel=1e-9)
        assert model_region.coef == pytest.approx(
            reference.params[list(model_region.regressors)].to_numpy(), rel=1e-9)
        assert model.n == len(frame)


# -- categorical levels and missing values at scale ----------------------------------------


def test_declared_level_without_rows_warns_as_in_memory():
    frame = _frame(rows=2000)
    frame["band"] = frame["band"].where(frame["band"] != 3, 2)   # no band 3 at all
    with pytest.warns(EmptyLevelWarning) as memory:
        compute_moments(STUDY, frame, engine="pandas", variables=VARIABLES)
    with pytest.warns(EmptyLevelWarning) as streamed:
        result = compute_moments(STUDY, frame, engine="stream", variables=VARIABLES,
                                 batch_rows=300)
    assert [str(w.message) for w in streamed] == [str(w.message) for w in memory]
    assert "'3'" in str(streamed[0].message)
    assert "band[3]" not in result.moments.columns


def test_level_only_in_rows_dropped_for_missing_values():
    frame = _frame(rows=2000)
    frame.loc[1990, "region"] = "islands"
    frame.loc[1990, "heat"] = np.nan             # its only row is dropped
    with pytest.warns(EmptyLevelWarning, match="'islands'"):
        memory = compute_moments(STUDY, frame, engine="pandas", variables=VARIABLES)
    with pytest.warns(EmptyLevelWarning, match="'islands'"):
        streamed = compute_moments(STUDY, frame, engine="stream", variables=VARIABLES,
                                   batch_rows=300)
    assert streamed.moments.columns == memory.moments.columns
    assert dict(streamed.rows.missing) == dict(memory.rows.missing) == {
        "heat": 1, "bill": 0, "band": 0, "meter": 3, "owner": 1, "region": 2, "vent": 0}


def test_missing_values_are_counted_per_column_across_batches(files):
    # counted by hand from _frame: meter 3, region 2, owner 1; six different rows dropped
    for kind in ("csv", "parquet"):
        result = compute_moments(STUDY, files[kind], engine="stream", variables=VARIABLES,
                                 batch_rows=BATCH)
        result.source.close()
        assert result.rows.missing == {"heat": 0, "bill": 0, "band": 0, "meter": 3,
                                       "owner": 1, "region": 2, "vent": 0}
        assert (result.rows.read, result.rows.used, result.rows.dropped_missing) == (
            ROWS, ROWS - 6, 6)
        assert result.rows.to_dict()["engine"] == "stream"


@pytest.mark.parametrize("reader", ["duckdb", "pyarrow"])
def test_missing_value_texts_are_read_as_in_memory(tmp_path, monkeypatch, reader):
    # NA, NULL, #N/A and nan in numeric columns are missing, as the in-memory reader has them
    # (the DuckDB reader first tries an empty field only, then reads the file again)
    monkeypatch.setitem(engines.READERS, "csv", reader)
    frame = _frame(rows=3000)[["heat", "bill", "meter", "vent"]].astype(object)
    frame.loc[100, "heat"] = "NA"
    frame.loc[2000, "bill"] = "NULL"
    frame.loc[2900, "vent"] = "#N/A"
    frame.loc[2950, "vent"] = "nan"
    path = tmp_path / "tokens.csv"
    frame.to_csv(path, index=False)
    names = ["heat", "bill", "meter", "vent"]
    memory = compute_moments(None, path, engine="pandas", variables=names)
    streamed = compute_moments(None, path, engine="stream", variables=names, batch_rows=500)
    streamed.source.close()
    assert dict(streamed.rows.missing) == dict(memory.rows.missing) == {
        "heat": 1, "bill": 1, "meter": 3, "vent": 2}
    assert _relative(streamed.moments.cross, memory.moments.cross) < 1e-12


def test_numeric_levels_print_as_in_memory(tmp_path):
    # a numeric categorical with a non-integer value prints every level as a float
    frame = pd.DataFrame({"heat": np.arange(40.0), "bill": np.arange(40.0) ** 1.5,
                          "region": [1.0, 2.0, 2.5, 3.0] * 10})
    path = tmp_path / "levels.csv"
    frame.to_csv(path, index=False)
    study = parse_study(STUDY_TEXT)
    memory = compute_moments(study, path, engine="pandas", variables=["heat", "bill", "region"])
    streamed = compute_moments(study, path, engine="stream", batch_rows=1000,
                               variables=["heat", "bill", "region"])
    assert streamed.moments.columns == memory.moments.columns == (
        "heat", "bill", "region[2.0]", "region[2.5]", "region[3.0]")


def test_partition_keeps_keys_of_every_batch_when_merging():
    plan = {"variables": [["g", "categorical"], ["x", "numeric"]]}
    first = partition.partition_moments(pd.DataFrame({"g": ["a", "b"], "x": [1.0, 2.0]}),
                                        plan, 0)
    second = partition.partition_moments(pd.DataFrame({"g": ["c", "a"], "x": [3.0, 5.0]}),
                                         plan, 1)
    merged = partition.merge_partials(first, second)
    assert merged["keys"]["g"] == ["a", "b", "c"]
    assert merged["key_counts"]["g"].tolist() == [2, 1, 1]
    # direct computation on the four rows: columns a, b, c, x
    rows = np.array([[1, 0, 0, 1.0], [0, 1, 0, 2.0], [0, 0, 1, 3.0], [1, 0, 0, 5.0]])
    means = merged["shift"] + merged["means"]
    assert means == pytest.approx(rows.mean(axis=0), rel=1e-15)
    assert merged["cross"] == pytest.approx(np.cov(rows, rowvar=False) * 3, rel=1e-13)


def test_binary_texts_are_the_in_memory_ones():
    assert partition.TRUE_TEXTS == _TRUE and partition.FALSE_TEXTS == _FALSE


# -- the kernel on a cluster ---------------------------------------------------------------


# distributed's own warning when a loaded machine is slow to make the workers' folders
@pytest.mark.filterwarnings("ignore:Creating scratch directories is taking a surprisingly "
                            "long time:UserWarning")
def test_dask_on_a_local_cluster_of_two_workers(files, in_memory):
    from distributed import Client, LocalCluster

    # processes=True: the kernel is pickled by value and run in two worker processes
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                      dashboard_address=None) as cluster, Client(cluster):
        result = _summary(files["parquet"], "dask")
        study = parse_study(STUDY_TEXT)
        document = audit(study, files["parquet"], engine="dask").to_dict()
    _assert_same(result, in_memory["parquet"])
    assert "Dask cluster at tcp://127.0.0.1" in result[5].notes[-1]
    assert "(2 workers)" in result[5].notes[-1]
    assert document["rows"]["engine"] == "dask"
    assert any("Dask cluster" in note for note in document["notes"])


def test_kernel_runs_where_causalcheck_is_not_installed():
    # the partition kernel, pickled by value, runs in a Python that cannot import causalcheck
    import cloudpickle

    cloudpickle.register_pickle_by_value(partition)
    try:
        payload = cloudpickle.dumps(partition.partition_moments)
    finally:
        cloudpickle.unregister_pickle_by_value(partition)
    script = (
        "import sys, pickle\n"
        "sys.modules['causalcheck'] = None\n"           # import causalcheck now fails
        "import pandas as pd\n"
        "kernel = pickle.loads(sys.stdin.buffer.read())\n"
        "part = kernel(pd.DataFrame({'x': [1.0, 2.0, 4.0]}), {'variables': [['x', 'numeric']]})\n"
        "print(part['n'], float(part['shift'][0] + part['means'][0]), float(part['cross'][0, 0]))\n")
    done = subprocess.run([sys.executable, "-c", script], input=payload, capture_output=True,
                          timeout=60, check=False)
    assert done.returncode == 0, done.stderr.decode()
    # mean 7/3 and sum of squares about it 14/3, by hand
    n, mean, cross = done.stdout.decode().split()
    assert int(n) == 3
    assert float(mean) == pytest.approx(7 / 3, rel=1e-15)
    assert float(cross) == pytest.approx(14 / 3, rel=1e-15)
    assert pickle.loads(payload) is not None


# -- auto, progress, temporary files -------------------------------------------------------


def test_auto_streams_above_the_threshold_and_says_so(files, monkeypatch):
    assert choose_engine(STUDY, files["csv"]).engine == "pandas"
    small = compute_moments(STUDY, files["csv"], variables=VARIABLES)
    assert small.rows.engine == "pandas" and small.notes == ()
    monkeypatch.setattr(engines, "AUTO_STREAM_BYTES", 100_000)
    choice = choose_engine(STUDY, files["csv"])
    assert choice.engine == "stream"
    big = compute_moments(STUDY, files["csv"], variables=VARIABLES)
    big.source.close()
    assert big.rows.engine == "stream"
    assert big.notes[0].startswith("engine auto chose stream: the file is")
    assert "over the 0 MB auto limit" in big.notes[0]


def test_auto_measures_decoded_parquet_columns(files, monkeypatch):
    size = files["parquet"].stat().st_size
    # between the file size and the decoded size of 7 columns x 6000 rows x 8 bytes
    monkeypatch.setattr(engines, "AUTO_STREAM_BYTES", size + 1)
    assert size + 1 < 7 * ROWS * 8
    choice = choose_engine(STUDY, files["parquet"], variables=VARIABLES)
    assert choice.engine == "stream"
    assert "7 used columns decode to about" in choice.reason


def test_progress_bar_only_on_a_terminal(monkeypatch, capsys):
    class Terminal:
        def __init__(self) -> None:
            self.text = []

        def isatty(self) -> bool:
            return True

        def write(self, text: str) -> int:
            self.text.append(text)
            return len(text)

        def flush(self) -> None:
            pass

    terminal = Terminal()
    monkeypatch.setattr(sys, "stderr", terminal)
    compute_moments(None, _frame(rows=3000), engine="stream", variables=["heat", "bill"],
                    batch_rows=1000)
    shown = "".join(terminal.text)
    assert "reading the data frame" in shown and "/3.00k" in shown and "rows/s" in shown
    terminal.text.clear()
    compute_moments(None, _frame(rows=3000), engine="stream", variables=["heat", "bill"],
                    batch_rows=1000, quiet=True)
    assert "".join(terminal.text) == ""
    monkeypatch.undo()
    compute_moments(None, _frame(rows=3000), engine="stream", variables=["heat", "bill"],
                    batch_rows=1000)
    assert capsys.readouterr().err == ""            # stderr is not a terminal under pytest


def test_temporary_rows_are_removed(files):
    before = set(Path(tempfile.gettempdir()).glob("causalcheck-rows-*"))
    result = compute_moments(STUDY, files["csv"], engine="stream", variables=VARIABLES,
                             batch_rows=BATCH)
    spill = result.source.spill
    assert spill is not None and os.path.exists(spill.path)
    result.source.robust_std_errors([fit(result.moments, "bill", ["heat"])])
    result.source.close()
    assert not os.path.exists(spill.path)
    assert set(Path(tempfile.gettempdir()).glob("causalcheck-rows-*")) == before


def test_second_pass_without_the_temporary_copy_gives_the_same_errors(files):
    with_copy = compute_moments(STUDY, files["csv"], engine="stream", variables=VARIABLES,
                                batch_rows=BATCH)
    without = compute_moments(STUDY, files["csv"], engine="stream", variables=VARIABLES,
                              batch_rows=BATCH, replay=["heat"])      # bill not kept
    fits = [fit(with_copy.moments, "bill", ["heat", "region", "meter"])]
    with with_copy.source, without.source:
        assert without.source.spill is not None
        a = with_copy.source.robust_std_errors(fits)
        b = without.source.robust_std_errors(fits)
    assert _relative(a[0], b[0]) < 1e-12


# -- bad input -----------------------------------------------------------------------------


def _late_text(tmp_path: Path) -> Path:
    # about 2.5 MB, so that the text is past the first block a CSV reader types columns from
    frame = pd.DataFrame({"heat": np.arange(100_000, dtype=float),
                          "bill": np.sin(np.arange(100_000))})
    frame["heat"] = frame["heat"].astype(object)
    frame.loc[99_990, "heat"] = "n.a."
    path = tmp_path / "late.csv"
    frame.to_csv(path, index=False)
    return path


def test_error_text_in_a_later_batch_names_column_value_and_row(tmp_path, monkeypatch):
    path = _late_text(tmp_path)
    monkeypatch.setitem(engines.READERS, "csv", "duckdb")
    with pytest.raises(DataError) as error:
        compute_moments(None, path, engine="stream", variables=["heat", "bill"],
                        batch_rows=20_000)
    message = str(error.value)
    assert message.startswith(f"column 'heat' in data file {str(path)!r} is not numeric: "
                              "data row 99991 (header not counted) holds 'n.a.'")
    assert "declare [variables].heat = { kind = \"categorical\" }" in message


def test_error_text_in_a_later_batch_with_the_pyarrow_reader(tmp_path, monkeypatch):
    path = _late_text(tmp_path)
    monkeypatch.setitem(engines.READERS, "csv", "pyarrow")
    with pytest.raises(DataError) as error:
        compute_moments(None, path, engine="stream", variables=["heat", "bill"],
                        batch_rows=20_000)
    message = str(error.value)
    assert f"column 'heat' in data file {str(path)!r} is not numeric: a row after data row" \
        in message
    assert "holds 'n.a.'" in message
    row = int(message.split("a row after data row ")[1].split()[0])
    assert 50_000 <= row < 99_991                  # approximate: the rows read before it


def test_error_text_in_a_later_partition_with_dask(tmp_path):
    path = _late_text(tmp_path)
    with pytest.raises(DataError) as error:
        compute_moments(None, path, engine="dask", variables=["heat", "bill"])
    message = str(error.value)
    assert "column 'heat'" in message and "'n.a.'" in message
    assert "data row 99991 (header not counted)" in message


def test_error_text_in_a_frame_batch_gives_the_exact_row():
    frame = pd.DataFrame({"heat": [1.0] * 50 + ["warm"] + [2.0] * 9, "bill": np.arange(60.0)})
    with pytest.raises(DataError, match=r"column 'heat' in the data frame is not numeric: data "
                                        r"row 51 \(header not counted\) holds 'warm' \(1 "
                                        r"non-numeric value in data rows 41–60"):
        compute_moments(None, frame, engine="stream", variables=["heat", "bill"],
                        batch_rows=20)


def test_error_file_that_is_not_csv_or_parquet(tmp_path):
    path = tmp_path / "homes.xlsx"
    path.write_bytes(b"PK\x03\x04 not a table")
    for engine in ("stream", "dask", "auto"):
        with pytest.raises(DataError, match=r"data file '.*homes\.xlsx' has the suffix "
                                            r"'\.xlsx', which causalcheck does not read; save "
                                            r"the data as CSV"):
            compute_moments(None, path, engine=engine, variables=["heat"])


def test_error_missing_file(tmp_path):
    for engine in ("stream", "dask"):
        with pytest.raises(DataError, match=r"data file '.*nothere\.parquet' does not exist; "
                                            r"\[data\]\.path is relative to the study file's "
                                            r"folder"):
            compute_moments(None, tmp_path / "nothere.parquet", engine=engine,
                            variables=["heat"])


def test_error_damaged_parquet(tmp_path):
    path = tmp_path / "broken.parquet"
    path.write_bytes(b"PAR1 this is not really parquet")
    with pytest.raises(DataError, match=r"data file '.*broken\.parquet' cannot be read as "
                                        r"parquet"):
        compute_moments(None, path, engine="stream", variables=["heat"])


def test_error_missing_column_lists_near_matches(files):
    with pytest.raises(DataError, match=r"has no column 'bil' \(did you mean 'bill'\?\)"):
        compute_moments(None, files["parquet"], engine="stream", variables=["heat", "bil"])


def test_error_undeclared_level_in_the_last_batch_names_its_row(tmp_path):
    frame = _frame(rows=3000)
    frame.loc[2950, "band"] = 4
    path = tmp_path / "bands.csv"
    frame.to_csv(path, index=False)
    with pytest.raises(DataError) as memory:
        compute_moments(STUDY, path, engine="pandas", variables=VARIABLES)
    with pytest.raises(DataError) as streamed:
        compute_moments(STUDY, path, engine="stream", variables=VARIABLES, batch_rows=500)
    assert str(streamed.value) == str(memory.value)
    assert "holds '4' at data row 2951 (header not counted), which is not one of the levels" \
        in str(streamed.value)


def test_error_constant_treatment_as_in_memory():
    frame = _frame(rows=1000)
    frame["heat"] = 0.1
    with pytest.raises(DataError) as memory:
        compute_moments(STUDY, frame, engine="pandas", variables=VARIABLES)
    with pytest.raises(DataError) as streamed:
        compute_moments(STUDY, frame, engine="stream", variables=VARIABLES, batch_rows=150)
    assert str(streamed.value) == str(memory.value)
    assert "the treatment 'heat' is constant" in str(streamed.value)


def test_error_every_row_missing_as_in_memory():
    frame = _frame(rows=500)
    frame["vent"] = np.nan
    with pytest.raises(DataError) as memory:
        compute_moments(STUDY, frame, engine="pandas", variables=VARIABLES)
    with pytest.raises(DataError) as streamed:
        compute_moments(STUDY, frame, engine="stream", variables=VARIABLES, batch_rows=100)
    assert str(streamed.value) == str(memory.value)
    assert "'vent' missing in 500 of 500 rows" in str(streamed.value)


def test_error_dask_not_installed(monkeypatch):
    monkeypatch.setitem(sys.modules, "dask.dataframe", None)     # import now fails
    with pytest.raises(DataError, match=r"engine dask needs the dask package with its dataframe "
                                        r"part .*pip install \"causalcheck\[dask\]\""):
        compute_moments(None, _frame(rows=100), engine="dask", variables=["heat"])


def test_error_unknown_engine():
    with pytest.raises(DataError, match="engine 'spark' is not one of auto, pandas, stream, "
                                        "dask"):
        compute_moments(None, _frame(rows=100), engine="spark", variables=["heat"])


def test_error_no_data():
    study = parse_study(STUDY_TEXT)
    with pytest.raises(DataError, match=r"has no \[data\] table"):
        compute_moments(study)


def test_values_are_finite_everywhere(files):
    result = compute_moments(STUDY, files["parquet"], engine="stream", variables=VARIABLES)
    assert all(math.isfinite(v) for v in result.moments.cross.ravel())
