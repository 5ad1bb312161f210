"""Generate the engine benchmark data: 10,000,000 rows x 32 numeric columns, Parquet and CSV.

The rows follow an invented linear structural model (a household-energy scenario of our own)
whose graph is written as a study file beside the data, so that the benchmark runs a real audit:
twelve confounders, three confounders reached through a proxy (so there are eight minimal
adjustment sets), two mediators, two instruments, six outcome predictors, a descendant of the
treatment and a collider. Values are rounded to four decimals, so CSV and Parquet hold the same
numbers.

Usage::

    python tests/benchmarks/make_big_file.py [--rows 10000000] [--out /tmp/causalcheck-bench]

It writes ``big.parquet``, ``big.csv``, ``big_parquet.toml`` and ``big_csv.toml`` into ``--out``
and skips a file that already exists with the expected number of rows. Memory stays bounded:
the rows are generated and written one million at a time.
"""

from __future__ import annotations

import argparse
import shutil
import sys
import time
from pathlib import Path

import numpy as np

CONFOUNDERS = [f"c{i}" for i in range(1, 13)]
PROXY_PAIRS = [(f"a{i}", f"b{i}") for i in range(1, 4)]      # t <- a -> b -> y
MEDIATORS = ["m1", "m2"]
INSTRUMENTS = ["i1", "i2"]
PREDICTORS = [f"o{i}" for i in range(1, 7)]
COLUMNS = (["t", "y", *CONFOUNDERS, *[v for pair in PROXY_PAIRS for v in pair], *MEDIATORS,
            *INSTRUMENTS, *PREDICTORS, "d1", "k1"])
assert len(COLUMNS) == 32


def edges() -> list[str]:
    out = []
    for c in CONFOUNDERS:
        out += [f"{c} -> t", f"{c} -> y"]
    for a, b in PROXY_PAIRS:
        out += [f"{a} -> t", f"{a} -> {b}", f"{b} -> y"]
    for m in MEDIATORS:
        out += [f"t -> {m}", f"{m} -> y"]
    out += [f"{i} -> t" for i in INSTRUMENTS]
    out += [f"{o} -> y" for o in PREDICTORS]
    out += ["t -> y", "t -> d1", "t -> k1", "y -> k1"]
    return out


def study_text(data_name: str) -> str:
    edge_lines = ",\n  ".join(f'"{e}"' for e in edges())
    return (
        "[study]\n"
        'title = "Engine benchmark: insulation grants and winter bills (invented)"\n'
        'treatment = "t"\noutcome = "y"\n\n'
        f'[data]\npath = "{data_name}"\nengine = "stream"\n\n'
        f"[graph]\nedges = [\n  {edge_lines}\n]\n\n"
        "[controls]\n"
        'used = ["c1", "c2", "c3", "c4", "c5", "c6", "c7", "c8", "c9", "c10", "c11", "c12", '
        '"a1", "a2", "a3", "m1"]\n\n'
        '[sensitivity]\nbenchmarks = ["c1", "c2"]\n')


def chunk(rng: np.random.Generator, rows: int) -> dict[str, np.ndarray]:
    """One block of rows from the linear model (fixed coefficients, unit-variance noise)."""
    v: dict[str, np.ndarray] = {}
    for j, c in enumerate(CONFOUNDERS):
        v[c] = rng.normal(size=rows) + 0.1 * j
    for a, b in PROXY_PAIRS:
        v[a] = rng.normal(size=rows)
        v[b] = 0.7 * v[a] + rng.normal(size=rows)
    for i in INSTRUMENTS:
        v[i] = rng.normal(size=rows)
    for o in PREDICTORS:
        v[o] = rng.normal(size=rows)
    t = rng.normal(size=rows)
    for j, c in enumerate(CONFOUNDERS):
        t += (0.05 + 0.01 * j) * v[c]
    for a, _ in PROXY_PAIRS:
        t += 0.2 * v[a]
    t += 0.3 * v["i1"] + 0.2 * v["i2"]
    v["t"] = t
    for m in MEDIATORS:
        v[m] = 0.4 * t + rng.normal(size=rows)
    y = 0.25 * t + rng.normal(size=rows) * (1.0 + 0.3 * np.abs(t))   # heteroskedastic
    for j, c in enumerate(CONFOUNDERS):
        y += (0.08 - 0.005 * j) * v[c]
    for _, b in PROXY_PAIRS:
        y += 0.15 * v[b]
    for m in MEDIATORS:
        y += 0.2 * v[m]
    for j, o in enumerate(PREDICTORS):
        y += 0.1 * (j + 1) * v[o]
    v["y"] = y
    v["d1"] = 0.5 * t + rng.normal(size=rows)
    v["k1"] = 0.3 * t + 0.3 * y + rng.normal(size=rows)
    return {name: np.round(v[name], 4) for name in COLUMNS}


def _partial(path: Path) -> Path:
    """Where a file is written before it is complete (renamed when done)."""
    return path.with_name(path.name + ".partial")


def _rows_in(path: Path) -> int | None:
    try:
        if path.suffix == ".parquet":
            import pyarrow.parquet as pq

            return pq.ParquetFile(path).metadata.num_rows
        marker = path.with_suffix(".rows")
        return int(marker.read_text()) if marker.exists() else None
    except Exception:  # noqa: BLE001 - a damaged file is regenerated
        return None


def write(out: Path, rows: int, *, seed: int = 20240601, block: int = 1_000_000) -> None:
    import pyarrow as pa
    import pyarrow.csv as pacsv
    import pyarrow.parquet as pq

    out.mkdir(parents=True, exist_ok=True)
    parquet, csv = out / "big.parquet", out / "big.csv"
    need_parquet = _rows_in(parquet) != rows
    need_csv = _rows_in(csv) != rows
    (out / "big_parquet.toml").write_text(study_text("big.parquet"))
    (out / "big_csv.toml").write_text(study_text("big.csv"))
    if not (need_parquet or need_csv):
        print(f"{parquet} and {csv} already hold {rows} rows")
        return
    free = shutil.disk_usage(out).free
    estimate = rows * 32 * 8 * 2.5
    if free < estimate:
        sys.exit(f"not enough space in {out}: {free / 1e9:.1f} GB free, about "
                 f"{estimate / 1e9:.1f} GB needed")
    rng = np.random.default_rng(seed)
    schema = pa.schema([(c, pa.float64()) for c in COLUMNS])
    pq_writer = pq.ParquetWriter(_partial(parquet), schema) if need_parquet else None
    csv_writer = pacsv.CSVWriter(_partial(csv), schema) if need_csv else None
    start = time.perf_counter()
    done = 0
    while done < rows:
        size = min(block, rows - done)
        table = pa.table(chunk(rng, size), schema=schema)
        if pq_writer is not None:
            pq_writer.write_table(table, row_group_size=block)
        if csv_writer is not None:
            csv_writer.write_table(table)
        done += size
        print(f"{done:,} rows, {time.perf_counter() - start:.0f} s", flush=True)
    if pq_writer is not None:
        pq_writer.close()
        _partial(parquet).rename(parquet)
    if csv_writer is not None:
        csv_writer.close()
        _partial(csv).rename(csv)
        csv.with_suffix(".rows").write_text(str(rows))
    for path in (parquet, csv):
        print(f"{path}: {path.stat().st_size / 1e9:.2f} GB")


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--rows", type=int, default=10_000_000)
    parser.add_argument("--out", type=Path, default=Path("/tmp/causalcheck-bench"))
    args = parser.parse_args(argv)
    write(args.out, args.rows)


if __name__ == "__main__":
    main()
