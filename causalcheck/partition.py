"""The moment function of one batch or partition of rows (numpy and pandas only).

This is the only code of causalcheck that runs on Dask workers, and the per-batch step of the
``stream`` engine. It imports nothing from the project, takes a batch of rows and a *plan*
(plain lists and dicts) and returns plain arrays, so that it can be shipped by value to a
cluster that does not have causalcheck installed (:mod:`causalcheck.engines` registers it with
cloudpickle for that). It raises nothing on bad values: a value that is not numeric, not
binary, infinite or not a declared level is returned as an ``"error"`` record (reason, column,
value, position, count), and the caller phrases the message.

The encoding follows :func:`causalcheck.moments.design_from_frame` exactly, so that every engine
gives the in-memory result:

- ``numeric``: booleans as 0/1, numbers as float64, text parsed as numbers (a value that does
  not parse is an error), NaN or null is missing, an infinity is an error;
- ``binary``: 0/1 numbers or booleans, or the texts true/false, yes/no, t/f, y/n, 1/0
  (case and surrounding space ignored);
- ``categorical``: one 0/1 column per distinct value (*key*) found in the batch. Keys are kept
  in the partial result, so that batches with different keys merge exactly: a key absent from a
  batch is a column of zeros there, whose mean and centred cross-products are exactly zero
  (the driver turns keys into levels and dummies once every batch is in).

A *partial* is the moments of the rows of one batch that have no missing value, with their
layout (each variable's block of columns), the missing counts and the row count read. Partials
merge with the pairwise update of Chan, Golub & LeVeque (1979), after padding both to the union
of their keys:

.. math::

    n = n_a + n_b, \\quad d = \\bar x_b - \\bar x_a, \\quad
    \\bar x = \\bar x_a + d\\, n_b / n, \\quad
    C = C_a + C_b + d d^\\top n_a n_b / n .

References
----------
Chan, T. F., Golub, G. H. & LeVeque, R. J. (1979). Updating formulae and a pairwise algorithm
for computing sample variances. Technical Report STAN-CS-79-773, Stanford University.

Chan, T. F., Golub, G. H. & LeVeque, R. J. (1983). Algorithms for computing the sample
variance: analysis and recommendations. The American Statistician 37(3), 242–247 (shifted
data).

Examples
--------
>>> import pandas as pd
>>> plan = {"variables": [["x", "numeric"], ["g", "categorical"]]}
>>> frame = pd.DataFrame({"x": [1.0, 2.0, None, 4.0], "g": ["a", "b", "a", "a"]})
>>> part = partition_moments(frame, plan)
>>> part["n"], part["read"], part["missing"].tolist(), part["keys"]["g"]
(3, 4, [1, 0], ['a', 'b'])
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any, NamedTuple

import numpy as np
import pandas as pd

__all__ = [
    "FALSE_TEXTS",
    "TRUE_TEXTS",
    "Coded",
    "Encoded",
    "Pieces",
    "empty_partial",
    "encode_partition",
    "encode_unchecked",
    "final_layout",
    "layout",
    "meats_of_design",
    "merge_meats",
    "merge_partials",
    "moments_of_values",
    "partial_from_encoded",
    "partition_meat",
    "partition_moments",
]

# the same texts as causalcheck.moments (a test checks that they agree)
TRUE_TEXTS = ("true", "yes", "y", "t", "1", "1.0")
FALSE_TEXTS = ("false", "no", "n", "f", "0", "0.0")


class Coded(NamedTuple):
    """A categorical column already coded: ``codes[i]`` indexes ``keys`` (``-1`` missing)."""

    codes: np.ndarray
    keys: list


class Pieces(NamedTuple):
    """A float64 column delivered in consecutive pieces (several small reader batches)."""

    arrays: list

    def __len__(self) -> int:
        return int(sum(len(a) for a in self.arrays))

    def joined(self) -> np.ndarray:
        return np.concatenate(self.arrays) if self.arrays else np.zeros(0)


class Encoded(NamedTuple):
    """One batch encoded: the rows without a missing value, and what was found on the way."""

    values: np.ndarray            # (n_used, width) float64, column-major
    read: int
    missing: np.ndarray           # rows missing each variable, of those read
    keys: dict                    # categorical variable -> keys (the batch's distinct values)
    codes: dict                   # categorical variable -> key code of each used row
    key_counts: dict              # categorical variable -> used rows per key
    key_first: dict               # categorical variable -> first position (of rows read) per key
    error: dict | None
    extremes: dict                # watched variable -> (min, max) over the rows used
    checked: bool = True          # False: copied by encode_unchecked, not yet checked


# --------------------------------------------------------------------------------------------
# One column


def _error(reason: str, column: str, values: Any, bad: np.ndarray) -> dict:
    position = int(np.flatnonzero(bad)[0])
    value = values[position] if isinstance(values, np.ndarray) else values.iloc[position]
    if isinstance(value, np.generic):
        value = value.item()
    return {"reason": reason, "column": column, "value": value, "position": position,
            "count": int(bad.sum())}


def _numeric(column: Any, name: str) -> tuple[np.ndarray, dict | None]:
    """Float64 values, NaN where missing (``moments._numeric``'s rules)."""
    if isinstance(column, Pieces):
        column = column.joined()
    if isinstance(column, np.ndarray) and column.dtype.kind == "f":
        values = column.astype(np.float64, copy=False)
    else:
        series = column if isinstance(column, pd.Series) else pd.Series(column)
        if pd.api.types.is_bool_dtype(series.dtype):
            values = series.astype("float64").to_numpy(dtype=np.float64, na_value=np.nan)
        elif pd.api.types.is_numeric_dtype(series.dtype):
            values = series.to_numpy(dtype=np.float64, na_value=np.nan)
        else:
            converted = pd.to_numeric(series, errors="coerce")
            bad = converted.isna().to_numpy() & series.notna().to_numpy()
            if bad.any():
                return np.empty(0), _error("not_numeric", name, series, bad)
            values = converted.to_numpy(dtype=np.float64, na_value=np.nan)
    if np.isfinite(values).all():        # one pass in the common case: no NaN, no infinity
        return values, None
    infinite = np.isinf(values)
    if infinite.any():
        return np.empty(0), _error("infinite", name, values, infinite)
    return values, None


def _binary(column: Any, name: str) -> tuple[np.ndarray, dict | None]:
    """0/1 values, NaN where missing (``moments._binary``'s rules)."""
    if isinstance(column, Pieces):
        column = column.joined()
    series = column if isinstance(column, pd.Series) else pd.Series(column)
    if pd.api.types.is_bool_dtype(series.dtype) or pd.api.types.is_numeric_dtype(series.dtype):
        values, error = _numeric(column, name)
        if error is not None:
            return values, error
        bad = ~np.isnan(values) & (values != 0.0) & (values != 1.0)
        if bad.any():
            return np.empty(0), _error("not_binary_number", name, values, bad)
        return values, None
    text = series.astype("string").str.strip().str.lower()
    values = np.full(len(series), np.nan)
    values[text.isin(TRUE_TEXTS).fillna(False).to_numpy(dtype=bool)] = 1.0
    values[text.isin(FALSE_TEXTS).fillna(False).to_numpy(dtype=bool)] = 0.0
    bad = np.isnan(values) & series.notna().to_numpy()
    if bad.any():
        return np.empty(0), _error("not_binary_text", name, series, bad)
    return values, None


def _length(column: Any) -> int:
    return int(len(column.codes) if isinstance(column, Coded) else len(column))


def _codes(column: Any) -> tuple[np.ndarray, list]:
    """Key codes (``-1`` missing) and the keys, in order of first appearance."""
    if isinstance(column, Coded):
        return np.asarray(column.codes, dtype=np.int64), list(column.keys)
    series = column if isinstance(column, pd.Series) else pd.Series(column)
    codes, uniques = pd.factorize(series, use_na_sentinel=True)
    keys = [k.item() if isinstance(k, np.generic) else k for k in uniques.tolist()]
    return codes.astype(np.int64, copy=False), keys


# --------------------------------------------------------------------------------------------
# One batch


def encode_partition(frame: Any, plan: Mapping[str, Any], *,
                     out: np.ndarray | None = None) -> Encoded:
    """Encode a batch: one column per numeric or binary variable, one per key of a categorical.

    ``frame[name]`` may be a pandas Series, a float64 array or a :class:`Coded` column;
    ``plan["variables"]`` lists ``[name, kind]`` pairs. Rows missing any variable are dropped.
    ``out``, a 1-D float64 buffer, is used for the encoded values when it is large enough
    (a reader of many batches passes the same buffer each time and saves re-allocating it).
    """
    variables = [(str(v[0]), str(v[1])) for v in plan["variables"]]
    read = _length(frame[variables[0][0]]) if variables else 0
    blocks: list[np.ndarray] = []
    widths: list[int] = []
    missing = np.zeros(len(variables), dtype=np.int64)
    absent_any = np.zeros(read, dtype=bool)
    keys: dict[str, list] = {}
    codes_of: dict[str, np.ndarray] = {}
    for j, (name, kind) in enumerate(variables):
        column = frame[name]
        if kind == "categorical":
            codes, found = _codes(column)
            keys[name] = found
            codes_of[name] = codes
            absent = codes < 0
            blocks.append(codes)
            widths.append(len(found))
        else:
            values, error = (_binary if kind == "binary" else _numeric)(column, name)
            if error is not None:
                return Encoded(np.empty((0, 0)), read, missing, {}, {}, {}, {}, error, {})
            absent = np.isnan(values)
            blocks.append(values)
            widths.append(1)
        count = int(absent.sum())
        missing[j] = count
        if count:
            absent_any |= absent
    keep = ~absent_any
    used = int(keep.sum())
    dropped = used < read
    key_first: dict[str, list[int]] = {}
    key_counts: dict[str, np.ndarray] = {}
    used_codes: dict[str, np.ndarray] = {}
    for name in list(codes_of):
        codes = codes_of[name]
        present = codes >= 0
        positions = np.flatnonzero(present)
        found, first_index = np.unique(codes[present], return_index=True)
        if len(found) < len(keys[name]):
            # a key with no row (a dictionary larger than the batch): renumber without it
            renumber = np.full(len(keys[name]) + 1, -1, dtype=np.int64)
            renumber[found] = np.arange(len(found))
            codes = renumber[codes]
            codes_of[name] = codes
            keys[name] = [keys[name][i] for i in found]
            widths[[v[0] for v in variables].index(name)] = len(found)
        width = len(keys[name])
        firsts = np.full(width, -1, dtype=np.int64)
        firsts[: len(first_index)] = positions[first_index]
        key_first[name] = firsts.tolist()
        kept_codes = codes[keep] if dropped else codes
        used_codes[name] = kept_codes
        key_counts[name] = np.bincount(kept_codes, minlength=width).astype(np.int64)
    width = int(sum(widths))
    values = _buffer(out, width, used)
    watched = set(plan.get("watch", ()))
    extremes: dict[str, tuple[float, float]] = {}
    at = 0
    for (name, kind), block, size in zip(variables, blocks, widths):
        if kind == "categorical":
            kept_codes = used_codes[name]
            for k in range(size):
                values[:, at + k] = kept_codes == k
        else:
            values[:, at] = block[keep] if dropped else block
            if name in watched and used:
                extremes[name] = (float(values[:, at].min()), float(values[:, at].max()))
        at += size
    return Encoded(values, read, missing, keys, used_codes, key_counts, key_first, None,
                   extremes)


def _buffer(out: np.ndarray | None, width: int, rows: int) -> np.ndarray:
    """A column-major (rows, width) float64 array, in ``out`` when it is large enough."""
    if out is not None and out.size >= width * rows:
        return out[: width * rows].reshape(width, rows).T
    return np.empty((width, rows), dtype=np.float64).T


def _plain_floats(frame: Any, variables: Sequence[tuple[str, str]]) -> list[Any] | None:
    """Every column as float64 array(s) when every variable is numeric and stored as floats."""
    arrays = []
    for name, kind in variables:
        if kind != "numeric":
            return None
        column = frame[name]
        if isinstance(column, Pieces):
            if not all(isinstance(a, np.ndarray) and a.dtype == np.float64
                       for a in column.arrays):
                return None
            arrays.append(column)
            continue
        if isinstance(column, pd.Series):
            if column.dtype != np.float64:
                return None
            column = column.to_numpy()
        if not isinstance(column, np.ndarray) or column.dtype != np.float64:
            return None
        arrays.append(column)
    return arrays


def encode_unchecked(frame: Any, plan: Mapping[str, Any], *,
                     out: np.ndarray | None = None) -> Encoded | None:
    """The fast path of :func:`encode_partition`: float64 numeric columns copied unchecked.

    Returns ``None`` unless every variable is ``numeric`` and stored as float64. The values are
    not checked for NaN (missing) or infinity: :func:`partial_from_encoded` and
    :func:`meats_of_design` return non-finite results when there is one, and the caller then
    encodes the batch again with :func:`encode_partition`. A batch without a missing value —
    the common case — is so read once and never scanned for NaN.
    """
    variables = [(str(v[0]), str(v[1])) for v in plan["variables"]]
    arrays = _plain_floats(frame, variables)
    if not arrays:
        return None
    rows = len(arrays[0])
    values = _buffer(out, len(arrays), rows)
    for j, array in enumerate(arrays):
        if isinstance(array, Pieces):
            at = 0
            for piece in array.arrays:
                values[at: at + len(piece), j] = piece
                at += len(piece)
        else:
            values[:, j] = array
    watched = set(plan.get("watch", ()))
    extremes = {name: (float(values[:, j].min()), float(values[:, j].max()))
                for j, (name, _) in enumerate(variables) if name in watched and rows}
    return Encoded(values, rows, np.zeros(len(variables), dtype=np.int64), {}, {}, {}, {},
                   None, extremes, False)


def moments_of_values(values: np.ndarray, shift: np.ndarray | None = None, *,
                      overwrite: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """Mean offsets from ``shift`` and centred cross-products of an (n, p) array.

    The mean is returned as an offset :math:`o = \\bar x - s` from ``shift`` (default the
    mean of the first 1024 rows, close to the batch mean), computed from the shifted values so
    that a column near :math:`10^9` with unit spread keeps its digits:

    .. math:: o = \\overline{x - s}, \\qquad
        C = \\sum_i (x_i - s)(x_i - s)^\\top - n\\, o\\, o^\\top .

    As :math:`s` is within a few standard deviations of the mean, the subtraction cancels
    little (the shifted-data form of the textbook algorithm; Chan, Golub & LeVeque 1983).
    ``overwrite=True`` shifts ``values`` in place (no copy of the batch).
    """
    n, p = values.shape
    if n == 0:
        return np.zeros(p), np.zeros((p, p))
    if shift is None:
        shift = values[:1024].mean(axis=0)
    if overwrite:
        shifted = values
        shifted -= shift
    else:
        shifted = values - shift
    offset = shifted.sum(axis=0) / n
    # C = sum (x - s)(x - s)' - n o o'
    cross = shifted.T @ shifted - n * np.outer(offset, offset)
    return offset, (cross + cross.T) / 2.0


def _layout(plan: Mapping[str, Any], keys: Mapping[str, list]) -> list[int]:
    return [len(keys[str(v[0])]) if v[1] == "categorical" else 1 for v in plan["variables"]]


def empty_partial(plan: Mapping[str, Any], index: int = 0) -> dict:
    """The partial of no rows."""
    keys = {str(v[0]): [] for v in plan["variables"] if v[1] == "categorical"}
    width = sum(_layout(plan, keys))
    return {"n": 0, "read": 0, "missing": np.zeros(len(plan["variables"]), dtype=np.int64),
            "shift": np.zeros(width), "means": np.zeros(width),
            "cross": np.zeros((width, width)), "keys": keys,
            "key_counts": {k: np.zeros(0, dtype=np.int64) for k in keys},
            "key_first": {k: [] for k in keys}, "reads": {}, "error": None, "error_count": 0,
            "extremes": {}, "plan": _plan_of(plan)}


def _plan_of(plan: Mapping[str, Any]) -> dict:
    return {"variables": [list(v) for v in plan["variables"]],
            "watch": list(plan.get("watch", ()))}


def partial_from_encoded(encoded: Encoded, plan: Mapping[str, Any], index: int = 0, *,
                         overwrite: bool = False) -> dict:
    """The partial (moments, layout, counts) of an encoded batch; ``index`` orders batches.

    ``overwrite=True`` lets it centre ``encoded.values`` in place. For a batch from
    :func:`encode_unchecked` it returns ``None`` when the moments are not finite (a missing
    or infinite value): encode it again with :func:`encode_partition`.
    """
    if encoded.error is not None:
        part = empty_partial(plan, index)
        part["read"] = encoded.read
        part["reads"] = {index: encoded.read}
        part["error"] = dict(encoded.error, partition=index)
        part["error_count"] = encoded.error["count"]
        return part
    values = encoded.values
    shift = values[:1024].mean(axis=0) if values.shape[0] else np.zeros(values.shape[1])
    means, cross = moments_of_values(values, shift, overwrite=overwrite)
    if not encoded.checked and not (np.isfinite(cross).all() and np.isfinite(shift).all()):
        return None
    return {"n": int(encoded.values.shape[0]), "read": encoded.read, "missing": encoded.missing,
            "shift": shift, "means": means, "cross": cross, "keys": encoded.keys,
            "key_counts": encoded.key_counts,
            "key_first": {k: [(index, p) if p >= 0 else None for p in v]
                          for k, v in encoded.key_first.items()},
            "reads": {index: encoded.read}, "error": None, "error_count": 0,
            "extremes": dict(encoded.extremes), "plan": _plan_of(plan)}


def partition_moments(frame: Any, plan: Mapping[str, Any], index: int = 0) -> dict:
    """The partial moments of one batch (see the module docstring); never raises on values."""
    fast = encode_unchecked(frame, plan)
    if fast is not None:
        part = partial_from_encoded(fast, plan, index, overwrite=True)
        if part is not None:
            return part
    return partial_from_encoded(encode_partition(frame, plan), plan, index, overwrite=True)


# --------------------------------------------------------------------------------------------
# Merging


def _first_of(a: Any, b: Any) -> Any:
    if a is None:
        return b
    if b is None:
        return a
    return min(a, b)


def _pad(part: dict, union: Mapping[str, list], plan: Mapping[str, Any],
         ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Shift, mean offsets and cross-products of ``part`` laid out on the union of keys.

    A key the batch does not hold is a column of zeros there: shift, offset and cross-products
    zero, exactly.
    """
    target: list[int] = []
    start = 0
    for v in plan["variables"]:
        name = str(v[0])
        if v[1] == "categorical":
            where = {k: i for i, k in enumerate(union[name])}
            target.extend(start + where[k] for k in part["keys"][name])
            start += len(union[name])
        else:
            target.append(start)
            start += 1
    shift = np.zeros(start)
    means = np.zeros(start)
    cross = np.zeros((start, start))
    idx = np.asarray(target, dtype=np.int64)
    shift[idx] = part["shift"]
    means[idx] = part["means"]
    cross[np.ix_(idx, idx)] = part["cross"]
    return shift, means, cross


def merge_partials(a: dict, b: dict) -> dict:
    """Exact moments of the union of two disjoint batches (Chan et al. 1979), keys united."""
    plan = a["plan"]
    union: dict[str, list] = {}
    counts: dict[str, np.ndarray] = {}
    firsts: dict[str, list] = {}
    for name, keys_a in a["keys"].items():
        keys_b = b["keys"][name]
        seen = {k: i for i, k in enumerate(keys_a)}
        merged = list(keys_a) + [k for k in keys_b if k not in seen]
        where = {k: i for i, k in enumerate(merged)}
        count = np.zeros(len(merged), dtype=np.int64)
        count[: len(keys_a)] += a["key_counts"][name]
        first = list(a["key_first"][name]) + [None] * (len(merged) - len(keys_a))
        for k, c, f in zip(keys_b, b["key_counts"][name], b["key_first"][name]):
            i = where[k]
            count[i] += c
            first[i] = _first_of(first[i], f)
        union[name], counts[name], firsts[name] = merged, count, first
    error = a["error"]
    error_count = a["error_count"] + b["error_count"]
    if b["error"] is not None and (error is None or (b["error"]["partition"], b["error"]["position"])
                                   < (error["partition"], error["position"])):
        error = b["error"]
    shift_a, means_a, cross_a = _pad(a, union, plan)
    shift_b, means_b, cross_b = _pad(b, union, plan)
    n = a["n"] + b["n"]
    if a["n"] == 0:
        shift, means, cross = shift_b, means_b, cross_b
    elif b["n"] == 0:
        shift, means, cross = shift_a, means_a, cross_a
    else:
        # means are offsets from a shift: d = (s_b - s_a) + (o_b - o_a) keeps the digits of
        # a column far from zero (s_b - s_a is exact for values of one magnitude, Sterbenz)
        # d = mean_b - mean_a ; mean = mean_a + d n_b/n ; C = C_a + C_b + d d' n_a n_b/n
        delta = (shift_b - shift_a) + (means_b - means_a)
        shift = shift_a
        means = means_a + delta * (b["n"] / n)
        cross = cross_a + cross_b + np.outer(delta, delta) * (a["n"] * b["n"] / n)
    extremes = dict(a["extremes"])
    for name, (low, high) in b["extremes"].items():
        if name in extremes:
            extremes[name] = (min(extremes[name][0], low), max(extremes[name][1], high))
        else:
            extremes[name] = (low, high)
    return {"n": n, "read": a["read"] + b["read"], "missing": a["missing"] + b["missing"],
            "shift": shift, "means": means, "cross": cross, "keys": union, "key_counts": counts,
            "key_first": firsts, "reads": {**a["reads"], **b["reads"]}, "error": error,
            "error_count": error_count, "extremes": extremes, "plan": plan}


# --------------------------------------------------------------------------------------------
# The robust-SE pass


def layout(plan: Mapping[str, Any]) -> tuple[list[int], int]:
    """First design column of each variable and the width of the final design layout.

    A numeric or binary variable takes one column; a categorical takes
    ``plan["widths"][name]`` dummy columns (its levels but the reference, in level order).
    """
    starts, at = [], 0
    for v in plan["variables"]:
        starts.append(at)
        at += int(plan["widths"][str(v[0])]) if v[1] == "categorical" else 1
    return starts, at


def final_layout(encoded: Encoded, plan: Mapping[str, Any]) -> np.ndarray:
    """An encoded batch in the final design layout of :func:`layout`.

    ``plan["levels"]`` maps each categorical variable to ``{key: dummy index}``, ``-1`` for the
    reference level; a key missing from it is a ``KeyError``.
    """
    n = encoded.values.shape[0]
    starts, width = layout(plan)
    if all(v[1] != "categorical" for v in plan["variables"]):
        return encoded.values                      # numeric variables: already the layout
    design = np.zeros((width, n), dtype=np.float64).T          # column-major (n, width)
    at = 0
    for v, start in zip(plan["variables"], starts):
        name, kind = str(v[0]), v[1]
        if kind == "categorical":
            lookup = plan["levels"][name]
            unknown = [k for k in encoded.keys[name] if k not in lookup]
            if unknown:
                raise KeyError(f"{name}: the value {unknown[0]!r} has no level")
            dummy = np.array([lookup[k] for k in encoded.keys[name]] + [-1], dtype=np.int64)
            target = dummy[encoded.codes[name]]
            for d in range(int(plan["widths"][name])):
                design[:, start + d] = target == d
            at += len(encoded.keys[name])
        else:
            design[:, start] = encoded.values[:, at]
            at += 1
    return design


def partition_meat(frame: Any, plan: Mapping[str, Any], fits: Sequence[Mapping[str, Any]],
                   index: int = 0, *, out: np.ndarray | None = None) -> dict:
    """The HC1 sums of each fit over one batch (see :func:`meats_of_design`).

    The batch is encoded as in :func:`encode_partition` (rows missing any variable of the plan
    dropped) and laid out as in :func:`final_layout`.
    """
    fast = encode_unchecked(frame, plan, out=out)
    if fast is not None:
        sums = meats_of_design(fast.values, fits, overwrite=True)
        if all(np.isfinite(piece).all() for piece in sums):
            return {"n": int(fast.values.shape[0]), "meats": sums, "error": None,
                    "reads": {index: fast.read}}
    encoded = encode_partition(frame, plan, out=out)
    if encoded.error is not None:
        return {"n": 0, "meats": [], "error": dict(encoded.error, partition=index),
                "reads": {index: encoded.read}}
    design = final_layout(encoded, plan)
    return {"n": int(design.shape[0]), "meats": meats_of_design(design, fits, overwrite=True),
            "error": None, "reads": {index: encoded.read}}


def meats_of_design(design: np.ndarray, fits: Sequence[Mapping[str, Any]], *,
                    overwrite: bool = False) -> list[np.ndarray]:
    """Diagonal of :math:`A M A` per fit, :math:`M = \\sum_i e_i^2 \\tilde x_i \\tilde x_i^\\top`.

    Each fit is a dict with ``"x"`` (design-column indices of the regressors), ``"y"``,
    ``"x_means"``, ``"y_mean"``, ``"coef"`` and ``"weights"`` (the columns of
    :math:`A = C_{XX}^{-1}` whose standard errors are wanted, a (k, m) array). With
    :math:`e_i = (y_i - \\bar y) - (x_i - \\bar x)^\\top\\hat\\beta` and
    :math:`w_i = A_{\\cdot j}^\\top \\tilde x_i`, the sum for column ``j`` is
    :math:`\\sum_i e_i^2 w_{ij}^2 = (A M A)_{jj}`, the HC0 variance before the
    :math:`n/(n-k-1)` factor; only the wanted diagonal is formed (``n k m`` work, not
    ``n k^2``). The design is centred once on the fits' means (``overwrite=True``: in place)
    and every fit is a product with zero-padded coefficients, so no column is gathered.
    """
    width = design.shape[1]
    centre = np.zeros(width)
    for spec in fits:
        centre[list(spec["x"])] = spec["x_means"]
        centre[spec["y"]] = spec["y_mean"]
    centred = design if overwrite else design.copy(order="F")
    centred -= centre
    # work on the (width, n) transpose: C-ordered for a column-major design, where BLAS's
    # products are an order of magnitude faster than on the (n, width) view (measured)
    rows = centred.T
    # one product for every fit: row 0 of a fit's block gives x~'beta, the others A_j' x~
    blocks = []
    for spec in fits:
        weights = np.asarray(spec["weights"])
        block = np.zeros((1 + weights.shape[1], width))
        block[0, list(spec["x"])] = spec["coef"]
        block[1:, list(spec["x"])] = weights.T
        blocks.append(block)
    products = np.vstack(blocks) @ rows
    sums = []
    at = 0
    for spec, block in zip(fits, blocks):
        # e_i = (y_i - ybar) - (x_i - xbar)' beta
        error = rows[spec["y"]] - products[at]
        # w_i = A' x~_i for the wanted columns of A = C_XX^{-1}
        weight = products[at + 1: at + len(block)]
        sums.append((weight * weight) @ (error * error))
        at += len(block)
    return sums


def merge_meats(a: dict, b: dict) -> dict:
    """Sum of two batches' HC1 sums."""
    error = a["error"] if a["error"] is not None else b["error"]
    if not a["meats"]:
        meats = b["meats"]
    elif not b["meats"]:
        meats = a["meats"]
    else:
        meats = [x + y for x, y in zip(a["meats"], b["meats"])]
    return {"n": a["n"] + b["n"], "meats": meats, "error": error,
            "reads": {**a["reads"], **b["reads"]}}
