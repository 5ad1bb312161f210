"""Engines: where the rows are read and the moments taken — in memory, in batches, on a cluster.

Every analysis works from one :class:`~causalcheck.moments.Moments` object (n, means, centred
cross-products). This module computes it from data of any size, with ``[data].engine``:

``pandas``
    the whole file (or frame) in memory, :func:`causalcheck.moments.design_from_frame`;
    the default for small files.
``stream``
    a CSV or Parquet file read in batches of ``[data].batch_rows`` rows (DuckDB's reader for
    CSV, pyarrow's for Parquet — the faster of the two for each format, measured in
    docs/performance.md), each batch encoded and reduced to moments, batches merged exactly;
    memory is bounded by the batch, not the file.
``dask``
    the same moments as a reduction over the partitions of a ``dask.dataframe`` (Parquet or
    CSV on a shared path, or a frame passed in Python), on the cluster of the default
    ``distributed.Client`` when there is one, else on Dask's local threaded scheduler. The
    only code that runs on the workers is :mod:`causalcheck.partition`, a plain function of a
    pandas partition returning arrays.
``auto``
    ``stream`` for a file larger than :data:`AUTO_STREAM_BYTES` (200 MB on disk, or, for
    Parquet, 200 MB once the used columns are decoded: rows × columns × 8 bytes from the
    footer), ``pandas`` otherwise; a Dask frame goes to ``dask``, a pandas frame to ``pandas``.
    The choice is in ``rows.engine`` and, when it is not ``pandas``, in a note.

Each batch or partition is reduced on data shifted by a pilot mean (Chan, Golub & LeVeque
1983) and batches are merged with their pairwise update (1979), means kept as offsets from the
shift, so that a column near :math:`10^9` with unit spread keeps its digits. Categorical variables need no first pass: each batch keeps
a 0/1 column for every distinct value it holds, and the merge lays both sides on the union of
values (a value absent from a batch is exactly a column of zeros there); once every batch is
in, values become levels (the declared ``levels``, else the sorted observed ones — numbers
printed as the in-memory engine prints them), the first non-empty level is the reference, and
the moments of the dummies are a linear map of those of the value columns. A level seen only
in the last batch is therefore kept, and the result equals the in-memory one.

Row-level statistics (HC1 robust standard errors of the headline models) need one more look at
the rows: :meth:`RowSource.robust_std_errors` takes the fits and makes one pass for all of them,
accumulating the meat :math:`\\sum_i e_i^2 \\tilde x_i \\tilde x_i^\\top` batch by batch. The
``stream`` engine writes the rows of the variables that pass will need (``replay=``) to a
temporary binary file during the first pass when the file is CSV, so that the second pass does
not parse text again; the file is removed by :meth:`RowSource.close` (or at exit).

References
----------
Chan, T. F., Golub, G. H. & LeVeque, R. J. (1979). Updating formulae and a pairwise algorithm
for computing sample variances. Technical Report STAN-CS-79-773, Stanford University.

Chan, T. F., Golub, G. H. & LeVeque, R. J. (1983). Algorithms for computing the sample
variance: analysis and recommendations. The American Statistician 37(3), 242–247.

MacKinnon, J. G. & White, H. (1985). Some heteroskedasticity-consistent covariance matrix
estimators with improved finite sample properties. Journal of Econometrics 29, 305–325.

Examples
--------
>>> import pandas as pd
>>> frame = pd.DataFrame({"t": [1.0, 2.0, 3.0, 4.0, 5.0], "y": [2.0, 4.1, 5.9, 8.2, 9.9]})
>>> result = compute_moments(None, frame, engine="stream", variables=["t", "y"])
>>> result.engine, result.rows.used, round(float(result.moments.covariance()[0, 1]), 4)
('stream', 5, 4.975)
"""

from __future__ import annotations

import math
import os
import re
import shutil
import sys
import tempfile
import warnings
import weakref
from abc import ABC, abstractmethod
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import TYPE_CHECKING, Any, Self

import numpy as np
import pandas as pd

from . import partition as kernel
from .errors import DataError

# The file checks and the level-text rule are shared with the in-memory reader so that every
# engine refuses the same files with the same words and names levels the same way.
from .moments import (
    Design,
    EmptyLevelWarning,
    Moments,
    RowCount,
    _check_columns,
    _check_path,
    _csv_separator,
    _kind_of_file,
    _level_text,
    check_enough_rows,
    design_from_frame,
    dummy_column,
    file_columns,
    moments_from_design,
    read_frame,
)

if TYPE_CHECKING:  # pragma: no cover
    from .regress import LinearFit
    from .study import Study

__all__ = [
    "AUTO_STREAM_BYTES",
    "BATCH_BYTES",
    "CSV_NULL_VALUES",
    "ENGINES",
    "READERS",
    "SPILL",
    "DaskRows",
    "EngineChoice",
    "FileRows",
    "FrameRows",
    "InMemoryRows",
    "MomentsResult",
    "RowSource",
    "choose_engine",
    "compute_moments",
    "robust_std_errors",
]

ENGINES = ("auto", "pandas", "stream", "dask")
# auto: stream a file bigger than this on disk (or, Parquet, once its used columns are decoded)
AUTO_STREAM_BYTES = 200 * 1024 * 1024
# a batch holds about this many bytes of float64 design (rows = BATCH_BYTES / (8 * columns))
BATCH_BYTES = 64 * 1024 * 1024
# the reader used by the stream engine for each format (measured: docs/performance.md)
READERS = {"csv": "duckdb", "parquet": "pyarrow"}
# keep the encoded rows in a temporary file for the robust-SE pass, rather than read the file
# again (measured: docs/performance.md); only when the temporary folder has room for it
SPILL = {"csv": True, "parquet": False}
# the texts read as missing in a CSV file: pyarrow's defaults, which the in-memory reader uses
CSV_NULL_VALUES = ("", "#N/A", "#N/A N/A", "#NA", "-1.#IND", "-1.#QNAN", "-NaN", "-nan",
                   "1.#IND", "1.#QNAN", "N/A", "NA", "NULL", "NaN", "n/a", "nan", "null")
_CSV_TRUE = ("1", "True", "TRUE", "true")
_CSV_FALSE = ("0", "False", "FALSE", "false")
_INTEGER_TEXT = re.compile(r"^[+-]?\d+$")


# --------------------------------------------------------------------------------------------
# Results


@dataclass(frozen=True)
class EngineChoice:
    """Which engine reads the data, and why."""

    engine: str
    reason: str
    automatic: bool = False          # chosen by ``auto``

    def to_dict(self) -> dict[str, Any]:
        return {"engine": self.engine, "reason": self.reason, "automatic": self.automatic}


@dataclass(frozen=True, eq=False)
class MomentsResult:
    """The moments of the data, how many rows were used, and a way back to the rows.

    Unpacks as ``moments, rows, source = compute_moments(...)``.
    """

    moments: Moments
    rows: RowCount
    source: RowSource
    engine: str
    notes: tuple[str, ...] = ()

    def __iter__(self) -> Iterator[Any]:
        yield self.moments
        yield self.rows
        yield self.source

    def to_dict(self) -> dict[str, Any]:
        return {"engine": self.engine, "rows": self.rows.to_dict(),
                "moments": self.moments.to_dict(), "notes": list(self.notes)}


def _hc1(fit: LinearFit, sums: np.ndarray) -> np.ndarray:
    """HC1 standard errors from :math:`\\sum_i e_i^2 w_{ij}^2` (HC0 variances): times n/(n-k-1)."""
    # HC1: scale the HC0 sandwich by n / (n - k - 1)
    return np.sqrt(np.clip(np.asarray(sums, dtype=np.float64), 0.0, None) * fit.n / fit.dof)


class RowSource(ABC):
    """The rows behind a :class:`~causalcheck.moments.Moments`, for one more pass.

    ``engine`` names where they are. :meth:`robust_std_errors` makes that pass for several
    fits at once and returns their HC1 standard errors,

    .. math::

        \\widehat{\\mathrm{Var}}_{HC1}(\\hat\\beta) = \\frac{n}{n-k-1}\\,
        C_{XX}^{-1} \\Big(\\sum_i e_i^2 \\tilde x_i \\tilde x_i^\\top\\Big) C_{XX}^{-1},

    accumulated batch by batch (only the diagonal entries asked for are formed).

    References
    ----------
    MacKinnon, J. G. & White, H. (1985). Journal of Econometrics 29, 305–325 (HC1).
    """

    engine: str = ""

    def robust_std_errors(self, fits: Sequence[LinearFit], *, column: str | None = None,
                          quiet: bool = True) -> list[np.ndarray]:
        """HC1 standard errors of every fit in one pass: one array per fit.

        With ``column``, only that regressor's (an array of one value per fit); else every
        regressor's, in the order of ``fit.regressors``.
        """
        fits = list(fits)
        if not fits:
            return []
        wanted = [[f.regressors.index(column)] if column is not None else
                  list(range(len(f.regressors))) for f in fits]
        return self._robust(fits, wanted, quiet)

    @abstractmethod
    def _robust(self, fits: list[LinearFit], wanted: list[list[int]],
                quiet: bool) -> list[np.ndarray]:
        """HC1 standard errors of the ``wanted`` regressors (positions) of each fit."""

    def close(self) -> None:
        """Release what the source holds (a temporary file of rows)."""

    def __enter__(self) -> Self:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def robust_std_errors(source: RowSource, fits: Sequence[LinearFit], *,
                      column: str | None = None, quiet: bool = True) -> list[np.ndarray]:
    """HC1 standard errors of ``fits`` from ``source`` in one pass (see :class:`RowSource`)."""
    return source.robust_std_errors(fits, column=column, quiet=quiet)


class InMemoryRows(RowSource):
    """The encoded rows in memory (the ``pandas`` engine): :mod:`causalcheck.regress`'s pass."""

    engine = "pandas"

    def __init__(self, design: Design) -> None:
        self.design = design

    def robust_std_errors(self, fits: Sequence[LinearFit], *, column: str | None = None,
                          quiet: bool = True) -> list[np.ndarray]:
        from . import regress

        fits = list(fits)
        if column is not None:
            # exactly the audit's in-memory pass
            values = regress.robust_std_errors(self.design, fits, column)
            return [np.array([v]) for v in values]
        return [regress.robust_std_error(self.design, f) for f in fits]

    def _robust(self, fits: list[LinearFit], wanted: list[list[int]],
                quiet: bool) -> list[np.ndarray]:  # pragma: no cover - robust_std_errors above
        return [se[w] for se, w in zip(self.robust_std_errors(fits), wanted)]


# --------------------------------------------------------------------------------------------
# Levels: from the values found in the batches to the dummies of the in-memory engine


@dataclass(frozen=True)
class _Plan:
    """What the batches found, turned into the final design: columns, levels, the linear map."""

    moments: Moments
    rows: RowCount
    variables: tuple[tuple[str, str], ...]          # (name, kind) in design order
    levels: Mapping[str, dict[Any, int]]            # categorical -> {key: dummy index, -1 ref}
    widths: Mapping[str, int]                       # categorical -> number of dummies
    keys: Mapping[str, list]                        # categorical -> every key, batch order


def _typed_csv_keys(keys: Sequence[str]) -> list[Any]:
    """Raw CSV texts typed as a CSV reader types a whole column: int, float, bool or text."""
    if not keys:
        return []
    if all(_INTEGER_TEXT.match(k.strip()) for k in keys):
        return [int(k) for k in keys]
    try:
        return [float(k) for k in keys]
    except ValueError:
        pass
    if all(k in _CSV_TRUE or k in _CSV_FALSE for k in keys):
        return [k in _CSV_TRUE for k in keys]
    return list(keys)


def _key_texts(keys: Sequence[Any], csv_text: bool) -> tuple[list[str], bool]:
    typed = _typed_csv_keys(list(keys)) if csv_text else list(keys)
    if not typed:
        return [], False
    series = pd.Series(typed)
    if series.dtype == object and all(isinstance(k, bool) for k in typed):
        series = series.astype(bool)
    text, numeric = _level_text(series)
    return [str(t) for t in text.tolist()], numeric


def _row_of(first: tuple[int, int], reads: Mapping[int, int]) -> int:
    partition, position = first
    return sum(count for index, count in reads.items() if index < partition) + position


def _finish(total: dict, *, study: Study | None, source: str, csv_text: bool,
            engine: str) -> _Plan:
    """Turn the merged partial into the in-memory engine's Moments and RowCount."""
    variables = tuple((str(v[0]), str(v[1])) for v in total["plan"]["variables"])
    read, used = int(total["read"]), int(total["n"])
    missing = {name: int(c) for (name, _), c in zip(variables, total["missing"])}
    rows = RowCount(read=read, used=used, dropped_missing=read - used, missing=missing,
                    engine=engine)
    if read == 0:
        raise DataError(f"{source} has no rows; it needs one row per unit below the header")
    if used == 0:
        worst = sorted(missing.items(), key=lambda kv: -kv[1])
        listed = ", ".join(f"{k!r} missing in {v} of {read} rows" for k, v in worst[:3] if v)
        raise DataError(
            f"every row of {source} has a missing value in a column the study uses, so no row "
            f"is left ({listed}). Fill in those columns, or mark a mostly-missing node "
            "measured = false in [variables]")
    # raw layout: one column per numeric variable, one per key of a categorical
    raw_columns: dict[str, list[int]] = {}
    at = 0
    for name, kind in variables:
        width = len(total["keys"][name]) if kind == "categorical" else 1
        raw_columns[name] = list(range(at, at + width))
        at += width
    rows_of_map: list[np.ndarray] = []
    columns: list[str] = []
    groups: dict[str, tuple[str, ...]] = {}
    levels_of: dict[str, dict[Any, int]] = {}
    widths: dict[str, int] = {}
    for name, kind in variables:
        if kind != "categorical":
            row = np.zeros(at)
            row[raw_columns[name][0]] = 1.0
            rows_of_map.append(row)
            columns.append(name)
            groups[name] = (name,)
            continue
        keys = total["keys"][name]
        texts, numeric = _key_texts(keys, csv_text)
        declared = study.variable(name).levels if study is not None else None
        observed = list(dict.fromkeys(texts))
        if declared is not None:
            level_list = list(declared)
            unknown = [i for i, t in enumerate(texts) if t not in level_list]
            if unknown:
                firsts = [total["key_first"][name][i] for i in unknown]
                first = min(f for f in firsts if f is not None)
                value = texts[unknown[firsts.index(first)]]
                position = _row_of(first, total["reads"])
                raise DataError(
                    f"column {name!r} in {source} holds {value!r} at data row {position + 1} "
                    f"(header not counted), which is not one of the levels declared in "
                    f"[variables].{name}.levels ({', '.join(repr(v) for v in level_list)}); add "
                    "the level to the list or fix the value")
        elif numeric:
            level_list = sorted(observed, key=float)
        else:
            level_list = sorted(observed)
        counts = np.zeros(len(level_list), dtype=np.int64)
        index_of = {lv: i for i, lv in enumerate(level_list)}
        for t, c in zip(texts, total["key_counts"][name]):
            counts[index_of[t]] += int(c)
        empty = [lv for lv, c in zip(level_list, counts) if c == 0]
        if empty:
            warnings.warn(
                f"categorical {name!r}: level{'s' if len(empty) > 1 else ''} "
                f"{', '.join(repr(v) for v in empty)} ha{'ve' if len(empty) > 1 else 's'} no "
                "row among the rows used and are left out of the dummies",
                EmptyLevelWarning, stacklevel=3)
        kept = [i for i, c in enumerate(counts) if c > 0]
        dummy_of_level = {level_list[i]: d - 1 for d, i in enumerate(kept)}  # reference -> -1
        dummies = []
        for i in kept[1:]:
            column = dummy_column(name, level_list[i])
            columns.append(column)
            dummies.append(column)
            row = np.zeros(at)
            for key_index, t in enumerate(texts):
                if t == level_list[i]:
                    row[raw_columns[name][key_index]] = 1.0
            rows_of_map.append(row)
        groups[name] = tuple(dummies)
        levels_of[name] = {k: dummy_of_level.get(t, -1) for k, t in zip(keys, texts)}
        widths[name] = len(dummies)
    linear_map = np.array(rows_of_map).reshape(len(rows_of_map), at)
    # the dummies are sums of value columns: mean = L m, C = L C_raw L'
    # partial means are offsets from a shift (see causalcheck.partition)
    means = linear_map @ (total["shift"] + total["means"])
    cross = linear_map @ total["cross"] @ linear_map.T
    cross = (cross + cross.T) / 2.0
    moments = Moments(n=used, columns=tuple(columns), means=means, cross=cross, groups=groups)
    _check_moments(moments, rows, study, source, total["extremes"])
    return _Plan(moments=moments, rows=rows, variables=variables, levels=levels_of,
                 widths=widths, keys={k: list(v) for k, v in total["keys"].items()})


def _check_moments(moments: Moments, rows: RowCount, study: Study | None, source: str,
                   extremes: Mapping[str, tuple[float, float]]) -> None:
    """The checks of ``moments._check_design``, from moments and column extremes."""
    check_enough_rows(source, moments.n, rows.dropped_missing, len(moments.columns))
    if study is None:
        return
    for role, name in (("treatment", study.treatment), ("outcome", study.outcome)):
        if name is None or name not in extremes:
            continue
        low, high = extremes[name]
        if low == high:
            raise DataError(
                f"the {role} {name!r} is constant in {source} (every one of the "
                f"{moments.n} rows used holds {float(low)!r}); a constant {role} carries no "
                f"information about an effect. Check that the right column is named "
                f"[study].{role}, or that dropping rows with missing values did not remove "
                "all variation")


def _watch(study: Study | None, variables: Sequence[tuple[str, str]]) -> list[str]:
    """Treatment and outcome, when numeric: their extremes are tracked to detect a constant."""
    if study is None:
        return []
    names = {str(study.treatment), str(study.outcome)}
    return [name for name, kind in variables if name in names and kind != "categorical"]


# --------------------------------------------------------------------------------------------
# Errors found in a batch, phrased as the in-memory engine phrases them


def _value_error(error: Mapping[str, Any], *, row: int, source: str, where: str) -> DataError:
    name, value, count = error["column"], error["value"], int(error["count"])
    reason = error["reason"]
    at = f"data row {row + 1} (header not counted)"
    if reason == "not_numeric":
        return DataError(
            f"column {name!r} in {source} is not numeric: {at} holds {value!r} ({count} "
            f"non-numeric value{'s' if count > 1 else ''} {where}). Fix the value, write a "
            "missing value as an empty field or NA, or, if the column holds categories, declare "
            f"[variables].{name} = {{ kind = \"categorical\" }}")
    if reason == "infinite":
        return DataError(f"column {name!r} in {source} holds an infinite value at {at} "
                         f"({float(value)!r}); replace it with a finite number or leave it empty "
                         "(missing)")
    if reason == "not_binary_text":
        return DataError(
            f"column {name!r} in {source} is declared binary but {at} holds {value!r}; a "
            "binary column holds 0/1, true/false or yes/no. Recode it, or declare "
            f"[variables].{name} kind = \"categorical\"")
    return DataError(
        f"column {name!r} in {source} is declared binary but {at} holds {float(value)!r}; a "
        "binary column holds only 0 and 1. Recode it, or declare "
        f"[variables].{name} kind = \"numeric\"")


# --------------------------------------------------------------------------------------------
# Choosing an engine


def _is_dask_frame(data: Any) -> bool:
    module = type(data).__module__ or ""
    return module.startswith("dask") and hasattr(data, "npartitions")


def _data_path(study: Study | None, data: Any) -> Path | None:
    if isinstance(data, (str, os.PathLike)):
        return Path(data)
    if data is None and study is not None and study.data is not None:
        return Path(study.data.path)
    return None


def choose_engine(study: Study | None, data: Any = None, *, engine: str | None = None,
                  variables: Sequence[str] = ()) -> EngineChoice:
    """The engine that will read ``data`` (see the module docstring for ``auto``).

    >>> import pandas as pd
    >>> choose_engine(None, pd.DataFrame({"x": [1.0]})).engine
    'pandas'
    """
    wanted = engine or (study.data.engine if study is not None and study.data is not None
                        else "auto")
    if wanted not in ENGINES:
        raise DataError(f"engine {wanted!r} is not one of {', '.join(ENGINES)}; use auto to let "
                        "causalcheck choose by the size of the data")
    if wanted != "auto":
        return EngineChoice(wanted, f"engine {wanted} was asked for")
    if _is_dask_frame(data):
        return EngineChoice("dask", "the data is a Dask frame", True)
    if isinstance(data, pd.DataFrame):
        return EngineChoice("pandas", "the data is a pandas frame in memory", True)
    path = _data_path(study, data)
    if path is None or not path.is_file():
        return EngineChoice("pandas", "no file to measure", True)
    size = path.stat().st_size
    limit = AUTO_STREAM_BYTES / 1024 / 1024
    if size > AUTO_STREAM_BYTES:
        return EngineChoice("stream", f"the file is {size / 1024 / 1024:,.0f} MB, over the "
                            f"{limit:.0f} MB auto limit for reading in memory", True)
    if _kind_of_file(path) == "parquet":
        try:
            import pyarrow.parquet as pq

            rows = pq.ParquetFile(path).metadata.num_rows
        except Exception:  # noqa: BLE001 - a damaged file is reported by the reader
            rows = 0
        decoded = rows * max(1, len(variables)) * 8
        if decoded > AUTO_STREAM_BYTES:
            return EngineChoice("stream", f"its {len(variables)} used columns decode to about "
                                f"{decoded / 1024 / 1024:,.0f} MB ({rows:,} rows), over the "
                                f"{limit:.0f} MB auto limit for reading in memory", True)
    return EngineChoice("pandas", f"the file is {size / 1024 / 1024:,.1f} MB, under the "
                        f"{limit:.0f} MB auto limit", True)


def _batch_rows(study: Study | None, width: int, batch_rows: int | None) -> int:
    if batch_rows is not None:
        return int(batch_rows)
    if study is not None and study.data is not None and study.data.batch_rows:
        return int(study.data.batch_rows)
    return int(max(4096, min(1 << 20, BATCH_BYTES // (8 * max(1, width)))))


def _progress(total: int | None, desc: str, quiet: bool) -> Any:
    from tqdm import tqdm

    disable = quiet or not (hasattr(sys.stderr, "isatty") and sys.stderr.isatty())
    return tqdm(total=total, desc=desc, unit=" rows", unit_scale=True, disable=disable,
                file=sys.stderr, leave=False, dynamic_ncols=True)


# --------------------------------------------------------------------------------------------
# Reading batches of a file (pyarrow or DuckDB)


def _sniff_csv(path: Path, columns: Sequence[str]) -> tuple[dict[str, Any], float]:
    """Arrow types of the first block (as the in-memory reader infers them), bytes per row."""
    import pyarrow as pa
    import pyarrow.csv as pacsv

    block = 1 << 20
    reader = pacsv.open_csv(
        path, read_options=pacsv.ReadOptions(block_size=block),
        parse_options=pacsv.ParseOptions(delimiter=_csv_separator(path)),
        convert_options=pacsv.ConvertOptions(include_columns=list(columns),
                                              strings_can_be_null=True))
    try:
        first = reader.read_next_batch()
        rows = max(1, first.num_rows)
    except StopIteration:
        rows = 1
    except pa.ArrowInvalid:
        rows = 1
    types = {f.name: f.type for f in reader.schema}
    reader.close()
    size = path.stat().st_size
    return types, min(block, size) / rows


def _read_types(kind: str, file_types: Mapping[str, Any],
                variables: Sequence[tuple[str, str]]) -> dict[str, Any]:
    """The Arrow type each column is read as: numbers as float64, categories as text (CSV)."""
    import pyarrow as pa

    out: dict[str, Any] = {}
    for name, var_kind in variables:
        found = file_types.get(name, pa.null())
        if kind == "csv" and var_kind == "categorical":
            out[name] = pa.string()
        elif var_kind != "categorical" and (pa.types.is_integer(found) or pa.types.is_floating(
                found) or pa.types.is_null(found) or pa.types.is_decimal(found)):
            out[name] = pa.float64()
        elif kind == "csv" and not pa.types.is_boolean(found):
            out[name] = pa.string()
        else:
            out[name] = found
    return out


_ARROW_CSV_ERROR = re.compile(r"In CSV column #(\d+): CSV conversion error to (\w+): "
                              r"invalid value '(.*)'", re.DOTALL)
_DUCKDB_CSV_ERROR = re.compile(r"CSV Error on Line: (\d+).*?converting column \"(.*?)\"\. "
                               r"Could not convert string \"(.*?)\" to '(\w+)'", re.DOTALL)


def _read_error(error: Exception, *, path: Path, source: str, done: int,
                header: Sequence[str], var_kinds: Mapping[str, str]) -> DataError:
    """A reader's conversion error as a DataError naming the column, the value and the row."""
    text = str(error)
    match = _DUCKDB_CSV_ERROR.search(text)
    if match:
        line, name, value = int(match.group(1)), match.group(2), match.group(3)
        return _conversion_error(name, value, f"data row {line - 1} (header not counted)",
                                 source, var_kinds)
    match = _ARROW_CSV_ERROR.search(text)
    if match:
        index, value = int(match.group(1)), match.group(3)
        name = header[index] if index < len(header) else f"#{index}"
        return _conversion_error(name, value, f"a row after data row {done} (header not "
                                 "counted; the rows before it were read)", source, var_kinds)
    return DataError(f"{source} cannot be read after data row {done} ({type(error).__name__}: "
                     f"{text.splitlines()[0] if text else ''}); check that the file is complete "
                     "and in one format throughout")


def _conversion_error(name: str, value: str, at: str, source: str,
                      var_kinds: Mapping[str, str]) -> DataError:
    if var_kinds.get(name) == "binary":
        return DataError(
            f"column {name!r} in {source} is declared binary but {at} holds {value!r}, after "
            "rows holding numbers; a binary column holds 0/1, true/false or yes/no "
            "throughout. Recode it, or declare [variables]."
            f"{name} kind = \"categorical\"")
    return DataError(
        f"column {name!r} in {source} is not numeric: {at} holds {value!r}. Fix the value, "
        "write a missing value as an empty field or NA, or, if the column holds categories, "
        f"declare [variables].{name} = {{ kind = \"categorical\" }}")


def _duckdb_type(arrow_type: Any) -> str:
    import pyarrow as pa

    if pa.types.is_floating(arrow_type):
        return "DOUBLE"
    if pa.types.is_boolean(arrow_type):
        return "BOOLEAN"
    return "VARCHAR"


def _sql_name(name: str) -> str:
    return '"' + name.replace('"', '""') + '"'


def _sql_text(text: str) -> str:
    return "'" + text.replace("'", "''") + "'"


def _iter_file_batches(path: Path, kind: str, columns: Sequence[str],
                       types: Mapping[str, Any], batch_rows: int, reader: str,
                       bytes_per_row: float,
                       nulls: Sequence[str] = CSV_NULL_VALUES) -> Iterator[Any]:
    """Lists of consecutive Arrow record batches of ``columns`` typed as ``types``, about
    ``batch_rows`` rows a list."""
    import pyarrow as pa

    if reader == "duckdb":
        import duckdb

        # no progress bar: DuckDB draws its own on stdout, which carries the JSON output
        connection = duckdb.connect()
        try:
            connection.execute("SET enable_progress_bar = false")
            if kind == "csv":
                type_spec = "{" + ", ".join(f"{_sql_text(c)}: {_sql_text(_duckdb_type(types[c]))}"
                                            for c in columns) + "}"
                null_list = "[" + ", ".join(_sql_text(v) for v in nulls) + "]"
                relation = (f"read_csv({_sql_text(str(path))}, header = true, delim = "
                            f"{_sql_text(_csv_separator(path))}, nullstr = {null_list}, "
                            f"types = {type_spec})")
            else:
                relation = f"read_parquet({_sql_text(str(path))})"
            query = f"SELECT {', '.join(_sql_name(c) for c in columns)} FROM {relation}"
            stream = connection.sql(query).to_arrow_reader(batch_rows)
            # DuckDB hands out batches of a few ten thousand rows: gather them to batch_rows
            gathered: list[Any] = []
            count = 0
            for batch in stream:
                if kind == "parquet":
                    batch = batch.cast(pa.schema([(c, types[c]) for c in columns]))
                gathered.append(batch)
                count += batch.num_rows
                if count >= batch_rows:
                    yield gathered
                    gathered, count = [], 0
            if gathered:
                yield gathered
        finally:
            connection.close()
        return
    if kind == "csv":
        import pyarrow.csv as pacsv

        stream = pacsv.open_csv(
            path, read_options=pacsv.ReadOptions(
                block_size=int(max(1 << 16, min(1 << 28, batch_rows * bytes_per_row))),
                use_threads=True),
            parse_options=pacsv.ParseOptions(delimiter=_csv_separator(path)),
            convert_options=pacsv.ConvertOptions(
                include_columns=list(columns), column_types=dict(types),
                strings_can_be_null=True))
        for batch in stream:
            yield [batch]
        return
    import pyarrow.parquet as pq

    # pre_buffer=False: read column chunks as they are decoded rather than a whole row group
    # ahead (measured: a third of the peak memory, and faster on this file system)
    handle = pq.ParquetFile(path, pre_buffer=False, buffer_size=1 << 20)
    try:
        for batch in handle.iter_batches(batch_size=batch_rows, columns=list(columns),
                                         use_threads=True):
            yield [batch.cast(pa.schema([(c, types[c]) for c in columns]))]
    finally:
        handle.close()


def _arrow_frame(batches: Sequence[Any],
                 variables: Sequence[tuple[str, str]]) -> dict[str, Any]:
    """Arrow batches (consecutive) as the columns the kernel reads: float arrays (in pieces
    when there are several batches), Series or coded values."""
    import pyarrow as pa
    import pyarrow.compute as pc

    frame: dict[str, Any] = {}
    for name, kind in variables:
        pieces = [b.column(name) for b in batches]
        if kind != "categorical" and pa.types.is_floating(pieces[0].type):
            arrays = [p.to_numpy(zero_copy_only=False) for p in pieces]
            frame[name] = arrays[0] if len(arrays) == 1 else kernel.Pieces(arrays)
            continue
        column = pieces[0] if len(pieces) == 1 else pa.chunked_array(pieces).combine_chunks()
        if kind == "categorical":
            encoded = column if pa.types.is_dictionary(column.type) else pc.dictionary_encode(
                column)
            codes = encoded.indices.fill_null(-1).to_numpy(zero_copy_only=False).astype(
                np.int64)
            keys = encoded.dictionary.to_pylist()
            for i, key in enumerate(keys):
                if key is None or (isinstance(key, float) and math.isnan(key)):
                    codes[codes == i] = -1          # a NaN value is missing, as in memory
            frame[name] = kernel.Coded(codes, keys)
        elif pa.types.is_boolean(column.type):
            frame[name] = pc.cast(column, pa.float64()).to_numpy(zero_copy_only=False)
        else:
            frame[name] = column.to_pandas()
    return frame


def _spill_ok(rows_estimate: float, width: int) -> bool:
    need = rows_estimate * width * 8
    return need < 0.5 * shutil.disk_usage(tempfile.gettempdir()).free


# --------------------------------------------------------------------------------------------
# The stream engine


class _Spill:
    """A temporary binary file of encoded rows for the second pass.

    Each batch is stored column by column (float64), so that it reads back as a column-major
    (rows, columns) array without a copy.
    """

    def __init__(self, variables: Sequence[tuple[str, str]]) -> None:
        self.variables = tuple(variables)
        handle, name = tempfile.mkstemp(prefix="causalcheck-rows-", suffix=".f64")
        self.path = name
        self.file = os.fdopen(handle, "wb")
        self.batches: list[int] = []
        self._finalizer = weakref.finalize(self, _remove, name)

    @property
    def rows(self) -> int:
        return sum(self.batches)

    def write(self, columns: np.ndarray) -> None:
        """One batch, given as a C-ordered (columns, rows) array."""
        np.ascontiguousarray(columns, dtype=np.float64).tofile(self.file)
        self.batches.append(int(columns.shape[1]))

    def mark(self) -> tuple[int, int]:
        return self.file.tell(), len(self.batches)

    def rewind(self, mark: tuple[int, int]) -> None:
        """Forget what was written since ``mark``."""
        self.file.seek(mark[0])
        self.file.truncate()
        del self.batches[mark[1]:]

    def done(self) -> None:
        self.file.close()

    def read(self) -> Iterator[np.ndarray]:
        """The batches again, as column-major (rows, columns) arrays."""
        width = len(self.variables)
        with open(self.path, "rb") as handle:
            for rows in self.batches:
                block = np.fromfile(handle, dtype=np.float64, count=rows * width)
                yield block.reshape(width, rows).T

    def close(self) -> None:
        if not self.file.closed:
            self.file.close()
        self._finalizer()


def _remove(path: str) -> None:
    try:
        os.unlink(path)
    except OSError:
        pass


def _needed(plan: _Plan, fits: Sequence[LinearFit]) -> list[tuple[str, str]]:
    """The study variables the fits use, in design order."""
    wanted = {plan.moments.variable_of(c) for f in fits for c in (*f.regressors, f.outcome)}
    return [(n, k) for n, k in plan.variables if n in wanted]


def _replay_plan(plan: _Plan, variables: Sequence[tuple[str, str]]) -> dict[str, Any]:
    """The kernel plan of the second pass: final levels of each categorical."""
    return {"variables": [list(v) for v in variables],
            "levels": {n: plan.levels[n] for n, k in variables if k == "categorical"},
            "widths": {n: plan.widths[n] for n, k in variables if k == "categorical"}}


def _fit_specs(plan: _Plan, fits: Sequence[LinearFit], variables: Sequence[tuple[str, str]],
               wanted: Sequence[Sequence[int]]) -> list[dict[str, Any]]:
    """Each fit as plain arrays, its columns indexed in the layout of ``variables``."""
    design: list[str] = []
    for name, _ in variables:
        design.extend(plan.moments.groups[name])
    index = {c: i for i, c in enumerate(design)}
    # C_XX^{-1} = cov_params / sigma^2; its wanted columns weight the residuals
    return [{"x": [index[c] for c in f.regressors], "y": index[f.outcome],
             "x_means": np.asarray(f.regressor_means), "y_mean": float(f.outcome_mean),
             "coef": np.asarray(f.coef),
             "weights": (f.cov_params / f.sigma2)[:, list(w)]}
            for f, w in zip(fits, wanted)]


class _ReadAgain(Exception):
    """The first pass must start again (with the full list of missing-value texts)."""


class _BatchEngine(RowSource):
    """Shared by the file and frame sources: first pass, finish, second pass."""

    def __init__(self, *, study: Study | None, variables: Sequence[tuple[str, str]],
                 source: str, batch_rows: int, csv_text: bool) -> None:
        self.study = study
        self.variables = tuple(variables)
        self.source = source
        self.batch_rows = batch_rows
        self.csv_text = csv_text
        self.plan: _Plan | None = None
        self.spill: _Spill | None = None

    # hooks -------------------------------------------------------------------------------
    def _batches(self, variables: Sequence[tuple[str, str]]) -> Iterator[tuple[int, Any]]:
        raise NotImplementedError

    def _total_rows(self) -> int | None:
        return None

    def _where(self, start: int, stop: int) -> str:
        return f"in data rows {start + 1}–{stop}, the batch where it was found; the rest " \
               "was not checked"

    # passes ------------------------------------------------------------------------------
    def first_pass(self, *, quiet: bool, replay: Sequence[str] | None,
                   spill: bool) -> _Plan:
        try:
            return self._first_pass(quiet=quiet, replay=replay, spill=spill)
        except _ReadAgain:
            # a file writing missing values as NA, NULL, ...: read it again with every token
            return self._first_pass(quiet=quiet, replay=replay, spill=spill)

    def _first_pass(self, *, quiet: bool, replay: Sequence[str] | None,
                    spill: bool) -> _Plan:
        plan = {"variables": [list(v) for v in self.variables],
                "watch": _watch(self.study, self.variables)}
        replay_set = set(replay) if replay is not None else {n for n, _ in self.variables}
        spilled = [(n, k) for n, k in self.variables if n in replay_set]
        spill_file = _Spill(spilled) if spill and spilled else None
        total = kernel.empty_partial(plan)
        done = 0
        # one buffer for the encoded batch, reused (a fresh 64 MB array a batch costs its
        # page faults every time)
        scratch = np.empty(self.batch_rows * (len(self.variables) + 8))
        bar = _progress(self._total_rows(), f"reading {self.source}", quiet)
        try:
            for index, frame in self._batches(self.variables):
                # fast path: float columns copied unchecked, moments checked for finiteness
                part = None
                encoded = kernel.encode_unchecked(frame, plan, out=scratch)
                if encoded is not None:
                    mark = spill_file.mark() if spill_file is not None else (0, 0)
                    if spill_file is not None:
                        spill_file.write(self._spill_block(encoded, total, None, spilled))
                    part = kernel.partial_from_encoded(encoded, plan, index, overwrite=True)
                    if part is None and spill_file is not None:
                        spill_file.rewind(mark)          # a missing value: encode it again
                if part is None:
                    encoded = kernel.encode_partition(frame, plan, out=scratch)
                    if encoded.error is not None:
                        row = done + int(encoded.error["position"])
                        raise _value_error(encoded.error, row=row, source=self.source,
                                           where=self._where(done, done + encoded.read))
                    if spill_file is not None:
                        keys = {n: encoded.keys[n] for n in encoded.keys}
                        spill_file.write(self._spill_block(encoded, total, {"keys": keys},
                                                           spilled))
                    part = kernel.partial_from_encoded(encoded, plan, index, overwrite=True)
                total = kernel.merge_partials(total, part)
                done += encoded.read
                bar.update(encoded.read)
        except BaseException:
            if spill_file is not None:
                spill_file.close()
            raise
        finally:
            bar.close()
        if spill_file is not None:
            spill_file.done()
        self.spill = spill_file
        self.plan = _finish(total, study=self.study, source=self.source,
                            csv_text=self.csv_text, engine=self.engine)
        return self.plan

    def _spill_block(self, encoded: kernel.Encoded, total: dict, part: dict | None,
                     spilled: Sequence[tuple[str, str]]) -> np.ndarray:
        """The batch's rows of the spilled variables as (variables, rows), C order."""
        rows_first = encoded.values.T                   # C-ordered (columns, rows) view
        if len(spilled) == len(self.variables) and all(k != "categorical"
                                                       for _, k in spilled):
            return rows_first
        starts: dict[str, int] = {}
        at = 0
        for name, kind in self.variables:
            starts[name] = at
            at += len(encoded.keys[name]) if kind == "categorical" else 1
        block = np.empty((len(spilled), encoded.values.shape[0]))
        for j, (name, kind) in enumerate(spilled):
            if kind == "categorical":
                # the batch's key codes -> codes in the list of every key seen so far
                merged = list(total["keys"][name])
                known = {k: i for i, k in enumerate(merged)}
                for k in encoded.keys[name]:
                    if k not in known:
                        known[k] = len(known)
                recode = np.array([known[k] for k in encoded.keys[name]] + [-1],
                                  dtype=np.float64)
                block[j] = recode[encoded.codes[name]]
            else:
                block[j] = rows_first[starts[name]]
        return block

    def _robust(self, fits: list[LinearFit], wanted: list[list[int]],
                quiet: bool) -> list[np.ndarray]:
        if self.plan is None:
            raise RuntimeError("the robust-SE pass needs the first pass")
        needed = _needed(self.plan, fits)
        spilled = {n for n, _ in self.spill.variables} if self.spill is not None else set()
        if self.spill is not None and all(n in spilled for n, _ in needed):
            sums, n = self._sums_from_spill(fits, wanted, needed, quiet)
        else:
            # rows dropped for missing values must be dropped again: read every variable then
            variables = needed if self.plan.rows.dropped_missing == 0 else list(self.variables)
            sums, n = self._sums_from_batches(fits, wanted, variables, quiet)
        if n != self.plan.moments.n:
            raise DataError(f"{self.source} changed between the two passes over it ({n} rows "
                            f"used in the second, {self.plan.moments.n} in the first); run "
                            "again on a file that is not being written")
        return [_hc1(f, total) for f, total in zip(fits, sums)]

    def _sums_from_batches(self, fits: list[LinearFit], wanted: list[list[int]],
                           variables: Sequence[tuple[str, str]],
                           quiet: bool) -> tuple[list[np.ndarray], int]:
        assert self.plan is not None
        plan = _replay_plan(self.plan, variables)
        specs = _fit_specs(self.plan, fits, variables, wanted)
        sums = [np.zeros(len(w)) for w in wanted]
        n = 0
        scratch = np.empty(self.batch_rows * (len(variables) + 8))
        bar = _progress(self.plan.rows.read, "robust standard errors (second pass)", quiet)
        try:
            for index, frame in self._batches(variables):
                part = kernel.partition_meat(frame, plan, specs, index, out=scratch)
                if part["error"] is not None:
                    raise DataError(f"{self.source} changed between the two passes over it; "
                                    "run again on a file that is not being written")
                for total, piece in zip(sums, part["meats"]):
                    total += piece
                n += part["n"]
                bar.update(sum(part["reads"].values()))
        finally:
            bar.close()
        return sums, n

    def _sums_from_spill(self, fits: list[LinearFit], wanted: list[list[int]],
                         variables: Sequence[tuple[str, str]],
                         quiet: bool) -> tuple[list[np.ndarray], int]:
        assert self.plan is not None and self.spill is not None
        plan = _replay_plan(self.plan, variables)
        specs = _fit_specs(self.plan, fits, variables, wanted)
        starts, width = kernel.layout(plan)
        position = {n: j for j, (n, _) in enumerate(self.spill.variables)}
        lookups = {}
        for name, kind in variables:
            if kind == "categorical":
                keys = self.plan.keys[name]
                lookups[name] = np.array([self.plan.levels[name][k] for k in keys] + [-1],
                                         dtype=np.int64)
        sums = [np.zeros(len(w)) for w in wanted]
        n = 0
        same = [n for n, _ in variables] == [n for n, _ in self.spill.variables] and all(
            k != "categorical" for _, k in variables)
        bar = _progress(self.plan.moments.n, "robust standard errors (second pass)", quiet)
        try:
            for block in self.spill.read():
                if same:
                    design = block                  # already the layout, column-major
                else:
                    design = np.zeros((width, block.shape[0])).T
                    for (name, kind), start in zip(variables, starts):
                        column = block[:, position[name]]
                        if kind == "categorical":
                            target = lookups[name][column.astype(np.int64)]
                            for d in range(self.plan.widths[name]):
                                design[:, start + d] = target == d
                        else:
                            design[:, start] = column
                pieces = kernel.meats_of_design(design, specs, overwrite=True)
                for total, piece in zip(sums, pieces):
                    total += piece
                n += block.shape[0]
                bar.update(block.shape[0])
        finally:
            bar.close()
        return sums, n

    def close(self) -> None:
        if self.spill is not None:
            self.spill.close()
            self.spill = None


class FileRows(_BatchEngine):
    """A CSV or Parquet file read in batches (the ``stream`` engine)."""

    engine = "stream"

    def __init__(self, path: Path, *, study: Study | None,
                 variables: Sequence[tuple[str, str]], batch_rows: int,
                 reader: str | None = None) -> None:
        self.path = Path(path)
        self.kind = _kind_of_file(self.path)
        super().__init__(study=study, variables=variables,
                         source=f"data file {str(self.path)!r}", batch_rows=batch_rows,
                         csv_text=self.kind == "csv")
        self.reader = reader or READERS[self.kind]
        self.header = file_columns(self.path)
        names = [n for n, _ in variables]
        self.bytes_per_row = 1.0
        try:
            if self.kind == "csv":
                file_types, self.bytes_per_row = _sniff_csv(self.path, names)
            else:
                import pyarrow.parquet as pq

                schema = pq.read_schema(self.path)
                file_types = {n: schema.field(n).type for n in names}
                if any(_is_dictionary(t) for t in file_types.values()):
                    file_types = {n: _value_type(t) for n, t in file_types.items()}
        except DataError:
            raise
        except Exception as e:  # noqa: BLE001 - pyarrow errors on a damaged file
            raise DataError(f"{self.source} cannot be read as {self.kind} "
                            f"({type(e).__name__}: {e}); check that the file is complete and "
                            "in that format") from None
        self.types = _read_types(self.kind, file_types, variables)
        # Reading numbers only, DuckDB is a third faster told that only an empty field is
        # missing (NaN and nan it reads as NaN, which is missing too); a file that writes NA,
        # NULL, #N/A... then fails to convert and is read again with the whole list.
        text = any(str(t) == "string" for t in self.types.values())
        self.nulls: tuple[str, ...] = CSV_NULL_VALUES if text else ("",)

    def _total_rows(self) -> int | None:
        if self.kind == "parquet":
            import pyarrow.parquet as pq

            return int(pq.ParquetFile(self.path).metadata.num_rows)
        return int(self.path.stat().st_size / max(self.bytes_per_row, 1.0))

    def rows_estimate(self) -> float:
        return float(self._total_rows() or 0)

    def _batches(self, variables: Sequence[tuple[str, str]]) -> Iterator[tuple[int, Any]]:
        import pyarrow as pa

        names = [n for n, _ in variables]
        kinds = dict(self.variables)
        done = 0
        batches = _iter_file_batches(self.path, self.kind, names, self.types,
                                     self.batch_rows, self.reader, self.bytes_per_row,
                                     self.nulls)
        index = 0
        while True:
            try:
                batch = next(batches)              # a list of consecutive record batches
            except StopIteration:
                return
            except Exception as error:
                reader_error = isinstance(error, (pa.ArrowInvalid, pa.ArrowNotImplementedError,
                                                  OSError, RuntimeError, ValueError)) or \
                    "duckdb" in (type(error).__module__ or "")
                if isinstance(error, DataError) or not reader_error:
                    raise
                match = _DUCKDB_CSV_ERROR.search(str(error))
                if match and match.group(3) in CSV_NULL_VALUES and self.nulls != CSV_NULL_VALUES:
                    self.nulls = CSV_NULL_VALUES
                    raise _ReadAgain() from None
                raise _read_error(error, path=self.path, source=self.source, done=done,
                                  header=self.header, var_kinds=kinds) from None
            rows = sum(b.num_rows for b in batch)
            if rows == 0:
                continue
            yield index, _arrow_frame(batch, variables)
            done += rows
            index += 1


def _is_dictionary(arrow_type: Any) -> bool:
    import pyarrow as pa

    return pa.types.is_dictionary(arrow_type)


def _value_type(arrow_type: Any) -> Any:
    return arrow_type.value_type if _is_dictionary(arrow_type) else arrow_type


class FrameRows(_BatchEngine):
    """A pandas frame taken in slices of ``batch_rows`` (the ``stream`` engine on a frame)."""

    engine = "stream"

    def __init__(self, frame: pd.DataFrame, *, study: Study | None,
                 variables: Sequence[tuple[str, str]], batch_rows: int,
                 source: str = "the data frame") -> None:
        super().__init__(study=study, variables=variables, source=source,
                         batch_rows=batch_rows, csv_text=False)
        self.frame = frame

    def _total_rows(self) -> int | None:
        return len(self.frame)

    def _batches(self, variables: Sequence[tuple[str, str]]) -> Iterator[tuple[int, Any]]:
        names = [n for n, _ in variables]
        for index, start in enumerate(range(0, len(self.frame), self.batch_rows)):
            part = self.frame.iloc[start:start + self.batch_rows]
            yield index, {n: part[n] for n in names}


# --------------------------------------------------------------------------------------------
# The Dask engine


def _dask_scheduler() -> tuple[Any, str]:
    """The default distributed client if there is one, else Dask's threaded scheduler."""
    try:
        from distributed import default_client

        client = default_client()
    except (ImportError, ValueError):
        return "threads", "Dask's local threaded scheduler (no distributed.Client is running)"
    try:
        workers = len(client.scheduler_info().get("workers", {}))
        address = client.scheduler.address
    except Exception:  # noqa: BLE001 - a description only
        workers, address = 0, "?"
    return client, f"the Dask cluster at {address} ({workers} worker{'s' if workers != 1 else ''})"


def _ship_kernel_by_value() -> None:
    """Let workers without causalcheck installed run the partition kernel."""
    try:
        import cloudpickle

        cloudpickle.register_pickle_by_value(kernel)
    except (ImportError, ValueError):  # pragma: no cover - older cloudpickle
        pass


def _tree(items: list[Any], merge: Any) -> Any:
    import dask

    merged = dask.delayed(merge, pure=True)
    while len(items) > 1:
        items = [merged(items[i], items[i + 1]) if i + 1 < len(items) else items[i]
                 for i in range(0, len(items), 2)]
    return items[0]


class DaskRows(RowSource):
    """A ``dask.dataframe`` reduced partition by partition (the ``dask`` engine)."""

    engine = "dask"

    def __init__(self, frame: Any, *, study: Study | None,
                 variables: Sequence[tuple[str, str]], source: str, csv_text: bool) -> None:
        self.frame = frame
        self.study = study
        self.variables = tuple(variables)
        self.source = source
        self.csv_text = csv_text
        self.plan: _Plan | None = None
        self.where = ""

    def _compute(self, graph: Any) -> Any:
        import dask

        scheduler, self.where = _dask_scheduler()
        if scheduler != "threads":
            _ship_kernel_by_value()
            return dask.compute(graph)[0]
        return dask.compute(graph, scheduler="threads")[0]

    def first_pass(self) -> _Plan:
        import dask

        plan = {"variables": [list(v) for v in self.variables],
                "watch": _watch(self.study, self.variables)}
        parts = self.frame[[n for n, _ in self.variables]].to_delayed()
        moment = dask.delayed(kernel.partition_moments, pure=True)
        total = self._compute(_tree([moment(p, plan, i) for i, p in enumerate(parts)],
                                    kernel.merge_partials))
        error = total["error"]
        if error is not None:
            row = _row_of((error["partition"], error["position"]), total["reads"])
            raise _value_error(dict(error, count=total["error_count"]), row=row,
                               source=self.source, where="in all")
        self.plan = _finish(total, study=self.study, source=self.source,
                            csv_text=self.csv_text, engine="dask")
        return self.plan

    def _robust(self, fits: list[LinearFit], wanted: list[list[int]],
                quiet: bool) -> list[np.ndarray]:
        import dask

        if self.plan is None:
            raise RuntimeError("the robust-SE pass needs the first pass")
        needed = _needed(self.plan, fits)
        variables = needed if self.plan.rows.dropped_missing == 0 else list(self.variables)
        plan = _replay_plan(self.plan, variables)
        specs = _fit_specs(self.plan, fits, variables, wanted)
        parts = self.frame[[n for n, _ in variables]].to_delayed()
        meat = dask.delayed(kernel.partition_meat, pure=True)
        total = self._compute(_tree([meat(p, plan, specs, i) for i, p in enumerate(parts)],
                                    kernel.merge_meats))
        if total["error"] is not None or total["n"] != self.plan.moments.n:
            raise DataError(f"{self.source} changed between the two passes over it; run again")
        return [_hc1(f, piece) for f, piece in zip(fits, total["meats"])]


def _dask_frame_of(path: Path, variables: Sequence[tuple[str, str]]) -> tuple[Any, bool]:
    """A dask.dataframe of the used columns of a CSV or Parquet file, and whether it is CSV."""
    import dask.dataframe as dd

    kind = _kind_of_file(path)
    names = [n for n, _ in variables]
    if kind == "parquet":
        return dd.read_parquet(str(path), columns=names), False
    file_types, _ = _sniff_csv(path, names)
    types = _read_types("csv", file_types, variables)
    dtypes = {}
    for name, _ in variables:
        t = str(types[name])
        dtypes[name] = "float64" if t == "double" else ("boolean" if t == "bool" else "object")
    frame = dd.read_csv(str(path), usecols=names, dtype=dtypes, sep=_csv_separator(path),
                        keep_default_na=False, na_values=list(CSV_NULL_VALUES),
                        blocksize="64MB")
    return frame, True


# --------------------------------------------------------------------------------------------
# The entry point


def _measured_columns(study: Study) -> list[str]:
    treatment, outcome = str(study.treatment), str(study.outcome)
    others = [n for n in study.measured if n not in (treatment, outcome)]
    return [treatment, outcome, *others]


def _kinds(study: Study | None, variables: Sequence[str]) -> list[tuple[str, str]]:
    return [(n, study.variable(n).kind if study is not None else "numeric") for n in variables]


def compute_moments(study: Study | None, data: Any = None, *, engine: str | None = None,
                    quiet: bool = False, variables: Sequence[str] | None = None,
                    replay: Sequence[str] | None = None,
                    batch_rows: int | None = None) -> MomentsResult:
    """Moments of the data a study uses, by whichever engine fits its size.

    Parameters
    ----------
    study : Study or None
        Gives the variables' kinds, declared levels, ``[data]`` (path, engine, batch_rows),
        treatment and outcome. ``None`` treats every variable as numeric.
    data : DataFrame, dask DataFrame, path or None
        The rows; by default the study's ``[data].path``.
    engine : {"auto", "pandas", "stream", "dask"}, optional
        Overrides ``[data].engine`` (default ``auto``).
    quiet : bool
        No progress bar (there is none either when stderr is not a terminal).
    variables : sequence of str, optional
        The study variables to take, in design order; by default the treatment, the outcome
        and every other measured node, sorted.
    replay : sequence of str, optional
        Variables the robust-SE pass will need (``stream`` keeps their rows in a temporary
        file when the data is CSV); by default every variable.
    batch_rows : int, optional
        Rows a batch (``stream``); by default ``[data].batch_rows``, else about 64 MB of
        design.

    Returns
    -------
    MomentsResult
        ``moments``, ``rows`` (``rows.engine`` names the engine), ``source`` (a
        :class:`RowSource` for the robust-SE pass; close it when done), ``notes``.

    Raises
    ------
    DataError
        No data, a missing or unreadable file, a file that is not CSV or Parquet, a missing
        column, a value that is not a number (with its column, value and row), every row
        dropped, too few rows, a constant treatment or outcome.

    Notes
    -----
    The batches are merged with the pairwise update of Chan, Golub & LeVeque (1979),

    .. math::

        n = n_a + n_b,\\quad d = \\bar x_b - \\bar x_a,\\quad
        \\bar x = \\bar x_a + d\\,n_b/n,\\quad C = C_a + C_b + d d^\\top n_a n_b / n,

    so every engine gives the in-memory moments up to rounding (tested to 1e-9 relative).

    References
    ----------
    Chan, Golub & LeVeque (1979), Stanford STAN-CS-79-773.
    """
    if variables is None:
        if study is None:
            raise ValueError("compute_moments needs variables= when no study is given")
        variables = _measured_columns(study)
    variables = list(dict.fromkeys(variables))
    if data is None and (study is None or study.data is None):
        where = study.source if study is not None else "<study>"
        raise DataError(
            f"study file {where!r} has no [data] table, so there is nothing to audit; "
            "add [data] with path = \"your_data.csv\" (CSV or Parquet, relative to the study "
            "file), pass data= in Python, or use `causalcheck controls` for the graph alone")
    choice = choose_engine(study, data, engine=engine, variables=variables)
    kinds = _kinds(study, variables)
    notes: list[str] = []
    if choice.automatic and choice.engine != "pandas":
        notes.append(f"engine auto chose {choice.engine}: {choice.reason}")
    if choice.engine == "dask":
        _require_dask()
    path = _data_path(study, data) if not isinstance(data, pd.DataFrame) and not \
        _is_dask_frame(data) else None
    if choice.engine == "pandas":
        return _pandas_moments(study, data, path, variables, notes)
    if choice.engine == "stream":
        if _is_dask_frame(data):
            raise DataError("engine stream reads a CSV or Parquet file or a pandas frame; for a "
                            "Dask frame use engine = \"dask\"")
        size = batch_rows or _batch_rows(study, len(variables) + 8, None)
        if isinstance(data, pd.DataFrame):
            _check_columns([str(c) for c in data.columns], variables, "the data frame")
            rows_source: _BatchEngine = FrameRows(data, study=study, variables=kinds,
                                                  batch_rows=size)
            spill = False
        else:
            assert path is not None
            _check_path(path)
            _kind_of_file(path)
            _check_columns(file_columns(path), variables, f"data file {str(path)!r}")
            rows_source = FileRows(path, study=study, variables=kinds, batch_rows=size)
            spill = SPILL[rows_source.kind] and _spill_ok(
                rows_source.rows_estimate(), len(replay or variables))
        try:
            plan = rows_source.first_pass(quiet=quiet, replay=replay, spill=spill)
        except BaseException:
            rows_source.close()
            raise
        return MomentsResult(plan.moments, plan.rows, rows_source, "stream", tuple(notes))
    # dask
    if _is_dask_frame(data):
        frame, csv_text, source = data, False, "the Dask frame"
        _check_columns([str(c) for c in data.columns], variables, source)
    elif isinstance(data, pd.DataFrame):
        import dask.dataframe as dd

        _check_columns([str(c) for c in data.columns], variables, "the data frame")
        parts = max(1, min(64, len(data) // 100_000 + 1))
        frame, csv_text, source = dd.from_pandas(data[variables], npartitions=parts), False, \
            "the data frame"
    else:
        assert path is not None
        _check_path(path)
        _kind_of_file(path)
        source = f"data file {str(path)!r}"
        _check_columns(file_columns(path), variables, source)
        frame, csv_text = _dask_frame_of(path, kinds)
    dask_rows = DaskRows(frame, study=study, variables=kinds, source=source, csv_text=csv_text)
    plan = _run_dask(dask_rows, path if not _is_dask_frame(data) and not isinstance(
        data, pd.DataFrame) else None)
    notes.append(f"the moments were computed on {dask_rows.where}")
    return MomentsResult(plan.moments, plan.rows, dask_rows, "dask", tuple(notes))


def _require_dask() -> None:
    try:
        import dask.dataframe  # noqa: F401
    except ImportError as error:
        raise DataError(
            f"engine dask needs the dask package with its dataframe part ({error}); install "
            "it with pip install \"causalcheck[dask]\", or set [data].engine = \"stream\" to "
            "read a large file in batches on this machine") from None


def _run_dask(rows: DaskRows, path: Path | None) -> _Plan:
    try:
        return rows.first_pass()
    except DataError:
        raise
    except (ValueError, TypeError) as error:
        text = str(error)
        if not ("convert" in text or "dtype" in text.lower() or "parse" in text):
            raise
        if path is not None and _kind_of_file(path) == "csv":
            located = _locate_csv_error(path, rows.variables, rows.source)
            if located is not None:
                raise located from None
        raise DataError(
            f"{rows.source} cannot be read as numbers by Dask ({type(error).__name__}: "
            f"{text.strip().splitlines()[0]}). A column the study uses as numeric holds "
            "text in some partition; fix the value, or declare the column kind = "
            "\"categorical\" in [variables]") from None


def _locate_csv_error(path: Path, variables: Sequence[tuple[str, str]],
                      source: str) -> DataError | None:
    """Find the column, value and row a CSV conversion failed at (one DuckDB scan, on error)."""
    names = [n for n, _ in variables]
    try:
        file_types, per_row = _sniff_csv(path, names)
        types = _read_types("csv", file_types, variables)
        for _ in _iter_file_batches(path, "csv", names, types, 1 << 16, "duckdb", per_row):
            pass
    except Exception as error:  # noqa: BLE001 - the error being located
        return _read_error(error, path=path, source=source, done=0,
                           header=file_columns(path), var_kinds=dict(variables))
    return None


def _pandas_moments(study: Study | None, data: Any, path: Path | None,
                    variables: list[str], notes: list[str]) -> MomentsResult:
    """The in-memory engine: exactly the audit's own reading and encoding."""
    if isinstance(data, pd.DataFrame):
        frame, source = data, "the data frame"
    elif _is_dask_frame(data):
        frame, source = data[variables].compute(), "the Dask frame"
    else:
        assert path is not None
        frame, source = read_frame(path, variables), f"data file {str(path)!r}"
    design = design_from_frame(frame, variables, study=study, source=source)
    moments = moments_from_design(design)
    rows = replace(design.rows, engine="pandas")
    return MomentsResult(moments, rows, InMemoryRows(design), "pandas", tuple(notes))

