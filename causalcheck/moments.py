"""Moments: the sample size, means and centred cross-products every regression is solved from.

A :class:`Moments` object is the narrow waist of the tool. It holds, for every *design column*
the study uses (a numeric or binary variable is one column; a categorical variable with ``k``
levels is ``k - 1`` dummy columns, the first level being the reference), the number of rows
``n``, the column means :math:`\\bar x` and the centred cross-product matrix

.. math::

    C = \\sum_{i=1}^{n} (x_i - \\bar x)(x_i - \\bar x)^\\top .

Every linear regression among these columns, with an intercept, is then solved from ``C`` in
:math:`O(p^3)` without touching the rows again (:mod:`causalcheck.regress`), so comparing fifty
adjustment sets costs one pass over the data.

Numerical stability. Accumulating raw sums :math:`\\sum x x^\\top` loses every digit when the
values sit far from zero (a column around :math:`10^9` with unit spread). Here rows are taken in
chunks; each chunk is centred on its own mean (a corrected two-pass computation) and chunks are
merged with the exact pairwise update of Chan, Golub & LeVeque (1979):

.. math::

    n = n_a + n_b, \\quad d = \\bar x_b - \\bar x_a, \\quad
    \\bar x = \\bar x_a + d\\, n_b / n, \\quad
    C = C_a + C_b + d d^\\top n_a n_b / n .

The same update merges moments computed on separate files, batches or cluster partitions.

Rows with a missing value in any used column are dropped before the moments are taken, and
counted per column in a :class:`RowCount`.

References
----------
Chan, T. F., Golub, G. H. & LeVeque, R. J. (1979). Updating formulae and a pairwise algorithm
for computing sample variances. Technical Report STAN-CS-79-773, Stanford University.

Examples
--------
>>> import pandas as pd
>>> frame = pd.DataFrame({"x": [1.0, 2.0, 3.0, 4.0], "y": [2.0, 4.1, 5.9, 8.0]})
>>> moments, rows = moments_from_frame(frame, ["x", "y"])
>>> moments.n, moments.columns, rows.dropped_missing
(4, ('x', 'y'), 0)
>>> round(float(moments.covariance()[0, 1]), 4)
3.3
"""

from __future__ import annotations

import math
import re
import warnings
from collections.abc import Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from .errors import CausalCheckWarning, DataError, near_matches

if TYPE_CHECKING:  # pragma: no cover
    from .study import DataSpec, Study

__all__ = [
    "CSV_SUFFIXES",
    "PARQUET_SUFFIXES",
    "Design",
    "EmptyLevelWarning",
    "Moments",
    "RowCount",
    "design_from_frame",
    "dummy_column",
    "file_columns",
    "iter_chunks",
    "merge_moments",
    "moments_from_array",
    "moments_from_covariance",
    "moments_from_design",
    "moments_from_frame",
    "read_frame",
]

CSV_SUFFIXES = (".csv", ".tsv", ".txt")
PARQUET_SUFFIXES = (".parquet", ".pq")
_COMPRESSION = (".gz", ".bz2", ".xz", ".zst", ".zip")
_CHUNK_ROWS = 1 << 17
_TRUE = ("true", "yes", "y", "t", "1", "1.0")
_FALSE = ("false", "no", "n", "f", "0", "0.0")


class EmptyLevelWarning(CausalCheckWarning):
    """A declared level of a categorical variable has no row among the rows used."""


# --------------------------------------------------------------------------------------------
# Results


@dataclass(frozen=True)
class RowCount:
    """How many rows were read, used and dropped, and which columns were missing.

    ``missing`` maps each study variable to the number of rows (of those read) in which it is
    missing; a row missing several variables counts once in ``dropped_missing``. ``engine``
    names what read the rows (``pandas``, ``stream`` or ``dask``; see
    :mod:`causalcheck.engines`).
    """

    read: int
    used: int
    dropped_missing: int
    missing: Mapping[str, int] = field(default_factory=dict)
    engine: str = "pandas"

    def to_dict(self) -> dict[str, Any]:
        return {"read": self.read, "used": self.used, "dropped_missing": self.dropped_missing,
                "missing_by_column": dict(self.missing), "engine": self.engine}


@dataclass(frozen=True, eq=False)
class Moments:
    """Sample size, means and centred cross-products of the design columns.

    Attributes
    ----------
    n : int
        Rows used.
    columns : tuple of str
        Design columns: numeric variables and dummy columns (``"region[south]"``).
    means : ndarray, shape (p,)
        Column means.
    cross : ndarray, shape (p, p)
        Centred cross-products :math:`\\sum_i (x_i-\\bar x)(x_i-\\bar x)^\\top`.
    groups : mapping
        Study variable -> its design columns (``k - 1`` dummies for a categorical).
    """

    n: int
    columns: tuple[str, ...]
    means: np.ndarray
    cross: np.ndarray
    groups: Mapping[str, tuple[str, ...]] = field(default_factory=dict)

    def __post_init__(self) -> None:
        p = len(self.columns)
        if self.means.shape != (p,) or self.cross.shape != (p, p):
            raise ValueError(f"Moments: means {self.means.shape} and cross {self.cross.shape} "
                             f"do not match {p} columns")
        if not self.groups:
            object.__setattr__(self, "groups", {c: (c,) for c in self.columns})

    def covariance(self, ddof: int = 1) -> np.ndarray:
        """Sample covariance matrix, :math:`C / (n - \\mathrm{ddof})`."""
        return self.cross / (self.n - ddof)

    def correlation(self) -> np.ndarray:
        """Sample correlation matrix (``nan`` rows for constant columns)."""
        scale = np.sqrt(np.diag(self.cross))
        with np.errstate(divide="ignore", invalid="ignore"):
            return self.cross / np.outer(scale, scale)

    def index(self, column: str) -> int:
        """Position of a design column."""
        try:
            return self.columns.index(column)
        except ValueError:
            raise KeyError(f"{column!r} is not a design column; the columns are "
                           f"{', '.join(self.columns)}{near_matches(column, self.columns)}"
                           ) from None

    def select(self, variables: Sequence[str]) -> tuple[str, ...]:
        """Study variables (or design columns) -> design columns, expanding categoricals.

        >>> m = moments_from_covariance(np.eye(3), columns=["a", "r[x]", "r[y]"], n=10,
        ...                             groups={"a": ("a",), "r": ("r[x]", "r[y]")})
        >>> m.select(["r", "a"])
        ('r[x]', 'r[y]', 'a')
        """
        out: list[str] = []
        for name in variables:
            if name in self.groups:
                out.extend(self.groups[name])
            elif name in self.columns:
                out.append(name)
            else:
                known = list(self.groups) + list(self.columns)
                raise KeyError(f"{name!r} is neither a study variable nor a design column of "
                               f"these moments{near_matches(name, known)}")
        return tuple(dict.fromkeys(out))

    def variable_of(self, column: str) -> str:
        """The study variable a design column belongs to."""
        for name, cols in self.groups.items():
            if column in cols:
                return name
        return column

    def subset(self, columns: Sequence[str]) -> Moments:
        """Moments of some of the design columns (groups restricted accordingly)."""
        idx = [self.index(c) for c in columns]
        keep = set(columns)
        groups = {name: tuple(c for c in cols if c in keep) for name, cols in self.groups.items()
                  if any(c in keep for c in cols)}
        return Moments(n=self.n, columns=tuple(columns), means=self.means[idx].copy(),
                       cross=self.cross[np.ix_(idx, idx)].copy(), groups=groups)

    def to_dict(self) -> dict[str, Any]:
        return {"n": self.n, "columns": list(self.columns), "means": self.means.tolist(),
                "cross": self.cross.tolist(),
                "groups": {k: list(v) for k, v in self.groups.items()}}


@dataclass(frozen=True, eq=False)
class Design:
    """The encoded rows: one float64 array per design column, missing rows dropped.

    Columns are kept as separate 1-D arrays — views of the caller's frame where no conversion
    or row dropping was needed — so that encoding a large frame copies nothing. Row-level
    passes (moments, robust standard errors) read them in chunks with :meth:`chunks`.
    """

    columns: tuple[str, ...]
    data: tuple[np.ndarray, ...]            # one (n,) float64 array per design column
    groups: Mapping[str, tuple[str, ...]]
    rows: RowCount
    levels: Mapping[str, tuple[str, ...]] = field(default_factory=dict)

    @property
    def n(self) -> int:
        return int(self.rows.used)

    def column(self, name: str) -> np.ndarray:
        """One design column (length n)."""
        return self.data[self.columns.index(name)]

    def take(self, columns: Sequence[str]) -> np.ndarray:
        """Some design columns as one column-major (n, k) array (a copy)."""
        if not columns:
            return np.empty((self.n, 0), dtype=np.float64, order="F")
        # stacking (k, n) then transposing is much faster than filling columns one by one
        return np.vstack([self.column(c) for c in columns]).T

    @property
    def values(self) -> np.ndarray:
        """All design columns as one (n, p) array (a copy; prefer :meth:`chunks`)."""
        return self.take(self.columns)

    def chunks(self, columns: Sequence[str] | None = None, *, rows: int = _CHUNK_ROWS,
               centre: Sequence[float] | np.ndarray | None = None) -> Iterator[np.ndarray]:
        """Row chunks of the given columns (default all) as (rows, k) arrays.

        With ``centre`` each column has its value subtracted while it is copied (one pass).
        The chunk array is a reused buffer: copy it if you keep it past the next iteration.
        """
        index = range(len(self.columns)) if columns is None else \
            [self.columns.index(c) for c in columns]
        arrays = [self.data[i] for i in index]
        offsets = np.zeros(len(arrays)) if centre is None else np.asarray(centre, dtype=float)
        buffer = np.empty((len(arrays), min(rows, max(self.n, 1))), dtype=np.float64)
        for start in range(0, self.n, rows):
            stop = min(start + rows, self.n)
            width = stop - start
            for j, array in enumerate(arrays):
                if centre is None:
                    buffer[j, :width] = array[start:stop]
                else:
                    np.subtract(array[start:stop], offsets[j], out=buffer[j, :width])
            yield buffer[:, :width].T


# --------------------------------------------------------------------------------------------
# Reading files


def _kind_of_file(path: Path) -> str:
    suffixes = [s.lower() for s in path.suffixes]
    while suffixes and suffixes[-1] in _COMPRESSION:
        suffixes.pop()
    last = suffixes[-1] if suffixes else ""
    if last in PARQUET_SUFFIXES:
        return "parquet"
    if last in CSV_SUFFIXES:
        return "csv"
    raise DataError(
        f"data file {str(path)!r} has the suffix {path.suffix!r}, which causalcheck does not "
        f"read; save the data as CSV ({', '.join(CSV_SUFFIXES)}, optionally compressed) or "
        f"Parquet ({', '.join(PARQUET_SUFFIXES)}) and point [data].path at it")


def _check_path(path: Path) -> None:
    if not path.exists():
        raise DataError(f"data file {str(path)!r} does not exist; [data].path is relative to "
                        "the study file's folder — check the name and the folder")
    if path.is_dir():
        raise DataError(f"data file {str(path)!r} is a folder, not a file; point [data].path "
                        "at the CSV or Parquet file inside it")


def _csv_separator(path: Path) -> str:
    return "\t" if ".tsv" in [s.lower() for s in path.suffixes] else ","


def file_columns(path: str | Path) -> tuple[str, ...]:
    """The column names of a CSV or Parquet file, read from its header only."""
    path = Path(path)
    _check_path(path)
    kind = _kind_of_file(path)
    try:
        if kind == "parquet":
            import pyarrow.parquet as pq

            return tuple(pq.read_schema(path).names)
        header = pd.read_csv(path, nrows=0, sep=_csv_separator(path))
        return tuple(str(c) for c in header.columns)
    except pd.errors.EmptyDataError:
        raise DataError(f"data file {str(path)!r} is empty; it needs a header row with the "
                        "column names and one row per unit") from None
    except UnicodeDecodeError as e:
        raise DataError(f"data file {str(path)!r} is not UTF-8 text (bad byte at offset "
                        f"{e.start}); save it as UTF-8 CSV or as Parquet") from None
    except OSError as e:
        raise DataError(f"data file {str(path)!r} cannot be read ({e}); check that it is a "
                        f"{kind} file and that you may read it") from None
    except Exception as e:  # noqa: BLE001 - pyarrow / parser errors on a damaged file
        raise DataError(f"data file {str(path)!r} cannot be read as {kind} "
                        f"({type(e).__name__}: {e}); check that the file is complete and in "
                        "that format") from None


def _check_columns(available: Sequence[str], wanted: Sequence[str], source: str) -> None:
    missing = [c for c in wanted if c not in available]
    if not missing:
        return
    lines = [f"{c!r}{near_matches(c, available)}" for c in missing]
    shown = ", ".join(repr(c) for c in list(available)[:12])
    more = f", … ({len(available)} in all)" if len(available) > 12 else ""
    plural = "s" if len(missing) > 1 else ""
    raise DataError(
        f"{source} has no column{plural} {'; '.join(lines)}. Every measured node of the "
        f"graph must be a column; the data has {shown}{more}. Rename the column, fix the name "
        "in the study file, or mark the node measured = false in [variables]")


def read_frame(spec: DataSpec | str | Path, columns: Sequence[str]) -> pd.DataFrame:
    """Read the needed ``columns`` of a CSV or Parquet file into a DataFrame.

    CSV is parsed with pyarrow's multithreaded reader and falls back to pandas when a column
    mixes numbers and text (so that the offending value can be shown).

    Raises
    ------
    DataError
        When the file does not exist, cannot be read, or lacks a column (near matches listed).
    """
    path = Path(spec.path if hasattr(spec, "path") else spec)
    available = file_columns(path)
    _check_columns(available, columns, f"data file {str(path)!r}")
    kind = _kind_of_file(path)
    columns = list(dict.fromkeys(columns))
    try:
        if kind == "parquet":
            import pyarrow.parquet as pq

            table = pq.read_table(path, columns=columns)
            return table.to_pandas()
        return _read_csv(path, columns)
    except DataError:
        raise
    except UnicodeDecodeError as e:
        raise DataError(f"data file {str(path)!r} is not UTF-8 text (bad byte at offset "
                        f"{e.start}); save it as UTF-8 CSV or as Parquet") from None
    except Exception as e:  # noqa: BLE001 - pyarrow / parser errors on a damaged file
        raise DataError(f"data file {str(path)!r} cannot be read as {kind} "
                        f"({type(e).__name__}: {e}); check that the file is complete and in "
                        "that format") from None


def _ragged_message(path: Path, sep: str) -> str:
    """Which line of a CSV file has a different number of fields from its header."""
    import csv

    if any(s.lower() in _COMPRESSION for s in path.suffixes):
        return (f"data file {str(path)!r}: a row has a different number of fields from the "
                "header. A decimal comma (1,5 for 1.5) or an unquoted comma inside a text value "
                "splits a field; write decimals with a point, put text that holds the "
                "separator in double quotes, or fill in the missing fields")
    with path.open(encoding="utf-8", errors="replace", newline="") as handle:
        rows = csv.reader(handle, delimiter=sep)
        header = next(rows, [])
        for row in rows:
            if row and len(row) != len(header):
                where = (f"line {rows.line_num} has {len(row)} fields where the header has "
                         f"{len(header)} ({sep.join(row)[:80]!r})")
                break
        else:
            where = "a row has a different number of fields from the header"
    return (f"data file {str(path)!r}: {where}. A decimal comma (1,5 for 1.5) or an unquoted "
            "comma inside a text value splits a field; write decimals with a point, put text "
            "that holds the separator in double quotes, or fill in the missing fields")


def _read_csv(path: Path, columns: list[str]) -> pd.DataFrame:
    import pyarrow as pa
    import pyarrow.csv as pacsv

    sep = _csv_separator(path)
    try:
        table = pacsv.read_csv(
            path, parse_options=pacsv.ParseOptions(delimiter=sep),
            # strings_can_be_null: an empty field or NA in a text column is missing, as in a
            # numeric column (and as pandas reads it), not a category named "" or "NA"
            convert_options=pacsv.ConvertOptions(include_columns=columns,
                                                  strings_can_be_null=True))
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError) as error:
        ragged = re.search(r"Expected (\d+) columns, got (\d+)", str(error))
        if ragged:
            raise DataError(_ragged_message(path, sep)) from None
        # Type inferred from the first block broke later (numbers, then text): let pandas read
        # each column whole so that the non-numeric value can be reported. Every column is
        # read: with usecols pandas silently drops the extra fields of a ragged row.
        try:
            return pd.read_csv(path, sep=sep, low_memory=False)[columns]
        except pd.errors.ParserError:
            raise DataError(_ragged_message(path, sep)) from None
    undecodable = [f.name for f in table.schema if pa.types.is_binary(f.type)]
    if undecodable:
        raise DataError(f"data file {str(path)!r} is not UTF-8 text (column "
                        f"{undecodable[0]!r} holds bytes that are not UTF-8); save it as UTF-8 "
                        "CSV or as Parquet")
    return table.to_pandas()


# --------------------------------------------------------------------------------------------
# Encoding


def dummy_column(variable: str, level: str) -> str:
    """The design-column name of one level of a categorical: ``"region[south]"``."""
    return f"{variable}[{level}]"


def _row_text(position: int) -> str:
    return f"data row {position + 1} (header not counted)"


def _parse_float(value: object) -> float:
    """``float(value)`` for a text or number cell; NaN when it is not a number."""
    try:
        return float(value)  # type: ignore[arg-type]
    except OverflowError:                 # a Python int beyond the double range
        return math.inf if value > 0 else -math.inf  # type: ignore[operator]
    except (TypeError, ValueError):
        return math.nan


def _numeric(series: pd.Series, name: str, source: str) -> np.ndarray:
    """A numeric or boolean column as float64 (NaN where missing); DataError otherwise."""
    return _numeric_checked(series, name, source)[0]


def _numeric_checked(series: pd.Series, name: str, source: str) -> tuple[np.ndarray, bool]:
    """:func:`_numeric` and whether every value is finite (so nothing is missing)."""
    if pd.api.types.is_bool_dtype(series.dtype):
        values = series.astype("float64").to_numpy(dtype=np.float64, na_value=np.nan)
        return values, not np.isnan(values.sum())
    if series.dtype == np.float64:
        values = series.to_numpy()          # a view: no copy of a large column
    elif pd.api.types.is_numeric_dtype(series.dtype):
        values = series.to_numpy(dtype=np.float64, na_value=np.nan)
    else:
        try:
            converted = pd.to_numeric(series, errors="coerce")
        except OverflowError:
            # pandas cannot coerce an integer of hundreds of digits; float() reads it as inf,
            # which the check below reports with its row
            converted = pd.Series([_parse_float(v) for v in series], index=series.index,
                                  dtype="float64")
        bad = converted.isna().to_numpy() & series.notna().to_numpy()
        if bad.any():
            position = int(np.flatnonzero(bad)[0])
            value = series.iloc[position]
            count = int(bad.sum())
            raise DataError(
                f"column {name!r} in {source} is not numeric: {_row_text(position)} holds "
                f"{value!r} ({count} non-numeric value{'s' if count > 1 else ''} in all). Fix "
                "the value, write a missing value as an empty field or NA, or, if the column "
                f"holds categories, declare [variables].{name} = {{ kind = \"categorical\" }}")
        values = converted.to_numpy(dtype=np.float64, na_value=np.nan)
    total = values.sum()
    if np.isfinite(total):                  # the common case: one reduction, all finite
        return values, True
    infinite = np.isinf(values)
    if infinite.any():
        position = int(np.flatnonzero(infinite)[0])
        raise DataError(f"column {name!r} in {source} holds an infinite value at "
                        f"{_row_text(position)} ({float(values[position])!r}); replace it with a "
                        "finite number or leave it empty (missing)")
    return values, False


def _binary(series: pd.Series, name: str, source: str) -> np.ndarray:
    """A 0/1 column from bool, 0/1 numbers or true/false, yes/no text."""
    if pd.api.types.is_bool_dtype(series.dtype) or pd.api.types.is_numeric_dtype(series.dtype):
        values = _numeric(series, name, source)
    else:
        text = series.astype("string").str.strip().str.lower()
        values = np.full(len(series), np.nan)
        values[text.isin(_TRUE).fillna(False).to_numpy(dtype=bool)] = 1.0
        values[text.isin(_FALSE).fillna(False).to_numpy(dtype=bool)] = 0.0
        bad = np.isnan(values) & series.notna().to_numpy()
        if bad.any():
            position = int(np.flatnonzero(bad)[0])
            raise DataError(
                f"column {name!r} in {source} is declared binary but {_row_text(position)} "
                f"holds {series.iloc[position]!r}; a binary column holds 0/1, true/false or "
                f"yes/no. Recode it, or declare [variables].{name} kind = \"categorical\"")
        return values
    observed = values[~np.isnan(values)]
    bad = (observed != 0.0) & (observed != 1.0)
    if bad.any():
        position = int(np.flatnonzero(~np.isnan(values))[np.flatnonzero(bad)[0]])
        raise DataError(
            f"column {name!r} in {source} is declared binary but {_row_text(position)} holds "
            f"{float(values[position])!r}; a binary column holds only 0 and 1. Recode it, or declare "
            f"[variables].{name} kind = \"numeric\"")
    return values


def _level_text(series: pd.Series) -> tuple[pd.Series, bool]:
    """Category values as text; integer-valued numbers print without a decimal point."""
    if pd.api.types.is_numeric_dtype(series.dtype) and not pd.api.types.is_bool_dtype(
            series.dtype):
        values = series.to_numpy(dtype=np.float64, na_value=np.nan)
        # an infinite code is not a whole number: it prints as 'inf', not int(inf)
        whole = np.isnan(values) | (np.isfinite(values) & (values == np.round(values)))
        if whole.all():
            text = pd.Series([None if np.isnan(v) else str(int(v)) for v in values],
                             index=series.index, dtype="object")
        else:
            text = pd.Series([None if np.isnan(v) else repr(float(v)) for v in values],
                             index=series.index, dtype="object")
        return text, True
    text = series.astype("object").where(series.notna(), None)
    return text.map(lambda v: v if v is None else str(v)), False


def _categorical(series: pd.Series, name: str, declared: tuple[str, ...] | None,
                 source: str) -> tuple[np.ndarray, tuple[str, ...]]:
    """Level codes (``-1`` missing) and the level list (declared, else sorted observed)."""
    text, numeric = _level_text(series)
    present = text.notna().to_numpy()
    observed = pd.unique(text[present])
    if declared is not None:
        levels = tuple(declared)
        unknown = [v for v in observed if v not in levels]
        if unknown:
            position = int(np.flatnonzero(present & text.isin(unknown).to_numpy())[0])
            raise DataError(
                f"column {name!r} in {source} holds {text.iloc[position]!r} at "
                f"{_row_text(position)}, which is not one of the levels declared in "
                f"[variables].{name}.levels ({', '.join(repr(v) for v in levels)}); add the "
                "level to the list or fix the value")
    elif numeric:
        levels = tuple(sorted(observed, key=float))
    else:
        levels = tuple(sorted(observed))
    lookup = {level: i for i, level in enumerate(levels)}
    codes = np.fromiter((lookup.get(v, -1) if v is not None else -1 for v in text),
                        dtype=np.int64, count=len(text))
    return codes, levels


def _study_facts(study: Study | None, name: str) -> tuple[str, tuple[str, ...] | None]:
    if study is None:
        return "numeric", None
    variable = study.variable(name)
    return variable.kind, variable.levels


def design_from_frame(frame: pd.DataFrame, variables: Sequence[str], *,
                      study: Study | None = None, source: str | None = None) -> Design:
    """Encode the used ``variables`` of ``frame`` into a float64 design, dropping missing rows.

    Numeric columns are taken as float64 (booleans as 0/1); ``kind = "binary"`` columns must
    hold 0/1, true/false or yes/no; ``kind = "categorical"`` columns become ``k - 1`` dummy
    columns named ``"variable[level]"`` with the first level (declared order, else sorted) as
    reference. A declared level with no row left after dropping missing values is removed
    (an :class:`EmptyLevelWarning`), so that the dummies stay linearly independent.

    Raises
    ------
    DataError
        Missing column (with near matches), non-numeric value (shown with its row), a binary
        column with other values, a category not among the declared levels, every row dropped,
        a constant treatment or outcome, or fewer rows than parameters.
    """
    source = source or "the data frame"
    variables = list(dict.fromkeys(variables))
    _check_columns([str(c) for c in frame.columns], variables, source)
    read = len(frame)
    if read == 0:
        raise DataError(f"{source} has no rows; it needs one row per unit below the "
                        "header")
    numeric: dict[str, np.ndarray] = {}
    codes: dict[str, np.ndarray] = {}
    declared_levels: dict[str, tuple[str, ...]] = {}
    missing_mask = np.zeros(read, dtype=bool)
    missing: dict[str, int] = {}
    for name in variables:
        kind, declared = _study_facts(study, name)
        series = frame[name]
        if kind == "categorical":
            code, levels = _categorical(series, name, declared, source)
            codes[name] = code
            declared_levels[name] = levels
            absent = code < 0
        else:
            if kind == "binary":
                values, complete = _binary(series, name, source), False
            else:
                values, complete = _numeric_checked(series, name, source)
            numeric[name] = values
            if complete:                        # all finite: nothing missing, no extra pass
                missing[name] = 0
                continue
            absent = np.isnan(values)
        count = int(np.count_nonzero(absent))
        missing[name] = count
        if count:
            missing_mask |= absent
    used = int(read - missing_mask.sum())
    rows = RowCount(read=read, used=used, dropped_missing=read - used, missing=missing)
    if used == 0:
        worst = sorted(missing.items(), key=lambda kv: -kv[1])
        listed = ", ".join(f"{k!r} missing in {v} of {read} rows" for k, v in worst[:3] if v)
        raise DataError(
            f"every row of {source} has a missing value in a column the study uses, so no row "
            f"is left ({listed}). Fill in those columns, or mark a mostly-missing node "
            "measured = false in [variables]")
    keep = ~missing_mask if rows.dropped_missing else None

    columns: list[str] = []
    groups: dict[str, tuple[str, ...]] = {}
    blocks: list[np.ndarray] = []
    final_levels: dict[str, tuple[str, ...]] = {}
    for name in variables:
        if name in numeric:
            values = numeric[name] if keep is None else numeric[name][keep]
            columns.append(name)
            groups[name] = (name,)
            blocks.append(values)
            continue
        code = codes[name] if keep is None else codes[name][keep]
        levels = declared_levels[name]
        counts = np.bincount(code, minlength=len(levels))
        empty = [lv for lv, c in zip(levels, counts) if c == 0]
        if empty:
            warnings.warn(
                f"categorical {name!r}: level{'s' if len(empty) > 1 else ''} "
                f"{', '.join(repr(v) for v in empty)} ha{'ve' if len(empty) > 1 else 's'} no "
                "row among the rows used and are left out of the dummies",
                EmptyLevelWarning, stacklevel=2)
        kept = [i for i, c in enumerate(counts) if c > 0]
        final_levels[name] = tuple(levels[i] for i in kept)
        dummies = []
        for i in kept[1:]:
            column = dummy_column(name, levels[i])
            columns.append(column)
            dummies.append(column)
            blocks.append((code == i).astype(np.float64))
        groups[name] = tuple(dummies)
    design = Design(columns=tuple(columns), data=tuple(blocks), groups=groups, rows=rows,
                    levels=final_levels)
    _check_design(design, study, source)
    return design


def check_enough_rows(source: str, n: int, dropped_missing: int, p: int) -> None:
    """Refuse fewer usable rows than a regression on all ``p`` design columns needs."""
    if n < p + 1:
        raise DataError(
            f"{source} has {n} usable row{'s' if n != 1 else ''} "
            f"({dropped_missing} dropped for missing values) but a regression on "
            f"all {p} design columns together needs at least {p + 1} (the intercept and "
            f"{p - 1} slopes, plus one degree of freedom for the error); add rows or use "
            "fewer variables")


def _check_design(design: Design, study: Study | None, source: str) -> None:
    check_enough_rows(source, design.n, design.rows.dropped_missing, len(design.columns))
    if study is None:
        return
    for role, name in (("treatment", study.treatment), ("outcome", study.outcome)):
        if name is None or name not in design.groups:
            continue
        column = design.column(name)
        if column.size and np.all(column == column[0]):
            raise DataError(
                f"the {role} {name!r} is constant in {source} (every one of the "
                f"{design.n} rows used holds {float(column[0])!r}); a constant {role} carries no "
                f"information about an effect. Check that the right column is named "
                f"[study].{role}, or that dropping rows with missing values did not remove "
                "all variation")


# --------------------------------------------------------------------------------------------
# Moments


def moments_from_array(values: np.ndarray, columns: Sequence[str], *,
                       groups: Mapping[str, tuple[str, ...]] | None = None,
                       chunk_rows: int = _CHUNK_ROWS) -> Moments:
    """Moments of the rows of a 2-D float array, chunk by chunk, merged exactly.

    Each chunk is centred on its own mean with the corrected two-pass formula
    (:math:`C = \\sum (x-m)(x-m)^\\top - n\\,(\\bar x - m)(\\bar x - m)^\\top`); chunks are
    merged with :func:`merge_moments`.
    """
    values = np.asarray(values, dtype=np.float64)
    if values.ndim != 2 or values.shape[1] != len(columns):
        raise ValueError(f"values must be (n, {len(columns)}); got {values.shape}")
    total: Moments | None = None
    for start in range(0, values.shape[0], chunk_rows):
        chunk = values[start:start + chunk_rows]
        part = _chunk_moments(chunk, tuple(columns), groups)
        total = part if total is None else merge_moments(total, part)
    if total is None:
        p = len(columns)
        return Moments(n=0, columns=tuple(columns), means=np.zeros(p), cross=np.zeros((p, p)),
                       groups=dict(groups or {}))
    return total


def _chunk_moments(chunk: np.ndarray, columns: tuple[str, ...],
                   groups: Mapping[str, tuple[str, ...]] | None, *,
                   scratch: bool = False) -> Moments:
    """Moments of one chunk; ``scratch=True`` lets it centre the chunk in place."""
    n = chunk.shape[0]
    pilot = chunk.mean(axis=0)
    if scratch:
        chunk -= pilot
        centred = chunk
    else:
        centred = chunk - pilot
    # corrected two-pass: residual mean of the centred chunk, (almost) zero
    offset = centred.mean(axis=0)
    cross = centred.T @ centred - n * np.outer(offset, offset)
    cross = (cross + cross.T) / 2.0
    return Moments(n=n, columns=columns, means=pilot + offset, cross=cross,
                   groups=dict(groups or {}))


def moments_from_design(design: Design, *, chunk_rows: int = 1 << 14) -> Moments:
    """Moments of an encoded :class:`Design` in one fused pass over its columns.

    Each column is centred on a pilot :math:`m`, the mean of the first chunk (within a small
    fraction of a standard deviation of the full mean), while it is copied into a chunk
    buffer small enough to stay in cache; the chunk's
    cross-products are added with a symmetric rank-k update (BLAS ``dsyrk``) of the buffer
    with a row of ones appended, whose last column gives the sums of the centred values for
    free; their mean, the offset of the pilot, is removed at the end (the corrected two-pass formula):

    .. math:: C = \\sum_i (x_i - m)(x_i - m)^\\top - n\\,(\\bar x - m)(\\bar x - m)^\\top ,
              \\qquad \\bar x = m + \\tfrac1n \\sum_i (x_i - m).
    """
    from scipy.linalg import blas

    p, n = len(design.columns), design.n
    if n == 0:
        return Moments(n=0, columns=design.columns, means=np.zeros(p), cross=np.zeros((p, p)),
                       groups=dict(design.groups))
    # pilot: the mean of the first chunk (the exact offset to the full mean is removed below)
    first = min(chunk_rows, n)
    pilot = np.array([column[:first].mean() for column in design.data], dtype=np.float64)
    buffer = np.empty((p + 1, first), dtype=np.float64)
    buffer[p] = 1.0
    upper = np.zeros((p + 1, p + 1), dtype=np.float64, order="F")
    for start in range(0, n, chunk_rows):
        stop = min(start + chunk_rows, n)
        width = stop - start
        for j, column in enumerate(design.data):
            np.subtract(column[start:stop], pilot[j], out=buffer[j, :width])
        # upper triangle of [x - m; 1][x - m; 1]' by a symmetric rank-k update (BLAS dsyrk;
        # the transpose is Fortran-ordered, so nothing is copied)
        upper = blas.dsyrk(1.0, buffer[:, :width].T, beta=1.0, c=upper, trans=1, lower=0,
                           overwrite_c=1)
    full = np.triu(upper) + np.triu(upper, 1).T
    cross = full[:p, :p]
    offset = full[:p, p] / n            # sum_i (x_i - m) / n
    # corrected two-pass: remove the (small) mean of the pilot-centred columns
    cross = cross - n * np.outer(offset, offset)
    return Moments(n=n, columns=design.columns, means=pilot + offset, cross=cross,
                   groups=dict(design.groups))


def moments_from_frame(frame: pd.DataFrame, variables: Sequence[str], *,
                       study: Study | None = None,
                       source: str | None = None) -> tuple[Moments, RowCount]:
    """Encode ``variables`` of ``frame`` (see :func:`design_from_frame`) and take moments.

    Returns
    -------
    moments : Moments
    rows : RowCount
    """
    design = design_from_frame(frame, variables, study=study, source=source)
    return moments_from_design(design), design.rows


def merge_moments(a: Moments, b: Moments) -> Moments:
    """Exact moments of the union of two disjoint row sets.

    .. math::

        n = n_a + n_b,\\quad d = \\bar x_b - \\bar x_a,\\quad
        \\bar x = \\bar x_a + d\\,n_b/n,\\quad C = C_a + C_b + d d^\\top n_a n_b / n

    References
    ----------
    Chan, Golub & LeVeque (1979), Stanford STAN-CS-79-773, the pairwise update.

    >>> a = moments_from_array(np.array([[1.0], [2.0]]), ["x"])
    >>> b = moments_from_array(np.array([[3.0], [4.0], [5.0]]), ["x"])
    >>> m = merge_moments(a, b)
    >>> m.n, float(m.means[0]), float(m.cross[0, 0])
    (5, 3.0, 10.0)
    """
    if a.columns != b.columns:
        raise ValueError(f"cannot merge moments of different columns: {a.columns} vs "
                         f"{b.columns}")
    if a.n == 0:
        return b
    if b.n == 0:
        return a
    n = a.n + b.n
    # d = mean_b - mean_a ; mean = mean_a + d*n_b/n ; C = C_a + C_b + d d' n_a n_b / n
    delta = b.means - a.means
    means = a.means + delta * (b.n / n)
    cross = a.cross + b.cross + np.outer(delta, delta) * (a.n * b.n / n)
    groups = dict(a.groups) if a.groups else dict(b.groups)
    return Moments(n=n, columns=a.columns, means=means, cross=cross, groups=groups)


def moments_from_covariance(cov: np.ndarray | Sequence[Sequence[float]], *,
                            columns: Sequence[str], n: int,
                            means: np.ndarray | Sequence[float] | None = None,
                            groups: Mapping[str, tuple[str, ...]] | None = None) -> Moments:
    """Moments implied by a covariance matrix at sample size ``n`` (planning mode).

    .. math:: C = \\Sigma\\,(n - 1)

    >>> m = moments_from_covariance([[1.0, 0.5], [0.5, 1.0]], columns=["t", "y"], n=101)
    >>> float(m.cross[0, 1]), float(m.covariance()[0, 1])
    (50.0, 0.5)
    """
    matrix = np.array(cov, dtype=np.float64)
    p = len(columns)
    if matrix.shape != (p, p):
        raise ValueError(f"cov must be {p}x{p} for columns {list(columns)}; got "
                         f"{matrix.shape}")
    if not np.allclose(matrix, matrix.T, rtol=1e-10, atol=1e-12):
        raise ValueError("cov must be symmetric")
    if n < 2:
        raise ValueError(f"n must be at least 2; got {n}")
    centre = np.zeros(p) if means is None else np.array(means, dtype=np.float64)
    # cross = cov * (n - 1)
    return Moments(n=int(n), columns=tuple(columns), means=centre,
                   cross=(matrix + matrix.T) / 2.0 * (n - 1), groups=dict(groups or {}))


def iter_chunks(values: np.ndarray, rows: int = _CHUNK_ROWS) -> Iterable[np.ndarray]:
    """Row chunks of a 2-D array (views)."""
    for start in range(0, values.shape[0], rows):
        yield values[start:start + rows]
