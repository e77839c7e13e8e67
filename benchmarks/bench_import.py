"""Reading a sales export: appraise's importer against plain pandas, side by side.

    python benchmarks/bench_import.py [--rows 100000]

The table is generated here (invented sales written the way exports write them:
"$412,500" prices, ISO dates, a region column, a few blank cells). Three readers:

* ``pandas.read_csv`` with its defaults: the obvious alternative. It is fast, but it
  leaves the prices as text ("$412,500"), guesses types and accounts for no row;
* ``pandas.read_csv`` followed by the minimal cleaning an analyst would write by hand
  (strip "$" and ",", to_numeric, to_datetime): still no exclusion log, no role map;
* ``appraise.engine.importing.load_sales``: every cell parsed with the rules of the
  importer, every row used or excluded with a reason, roles suggested.

Reported: median wall time of several runs and peak traced memory (tracemalloc).
This is a script, not a test: timings on shared machines vary.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from appraise.engine.importing import load_sales  # noqa: E402


def make_export(path: Path, rows: int, seed: int = 7) -> None:
    rng = np.random.default_rng(seed)
    price = np.round(rng.lognormal(12.9, 0.35, rows), -2)
    dates = pd.Timestamp("2023-07-01") + pd.to_timedelta(rng.integers(0, 1095, rows), unit="D")
    area = rng.integers(700, 4200, rows).astype(float)
    area[rng.random(rows) < 0.002] = np.nan  # a few blank cells
    frame = pd.DataFrame(
        {
            "Sale ID": [f"B-{i:06d}" for i in range(rows)],
            "Sale Price": [f"${p:,.0f}" for p in price],
            "Sale Date": dates.strftime("%Y-%m-%d"),
            "Living Area (sq ft)": area,
            "Lot Size (sq ft)": rng.integers(2000, 60000, rows),
            "Year Built": rng.integers(1880, 2024, rows),
            "Beds": rng.integers(1, 7, rows),
            "Baths": rng.integers(2, 10, rows) / 2,
            "Neighbourhood": rng.choice(
                ["Old Mill", "Heronmoor", "Copper Hill", "Saltmarsh End"], rows
            ),
            "Arms Length": np.where(rng.random(rows) < 0.01, "No", "Yes"),
        }
    )
    frame.to_csv(path, index=False)


def pandas_plain(path: Path):
    return pd.read_csv(path)


def pandas_hand_cleaned(path: Path):
    f = pd.read_csv(path, dtype=str, keep_default_na=False)
    f["Sale Price"] = pd.to_numeric(
        f["Sale Price"].str.replace(r"[$,]", "", regex=True), errors="coerce"
    )
    f["Sale Date"] = pd.to_datetime(f["Sale Date"], format="%Y-%m-%d", errors="coerce")
    for c in ("Living Area (sq ft)", "Lot Size (sq ft)", "Year Built", "Beds", "Baths"):
        f[c] = pd.to_numeric(f[c], errors="coerce")
    return f[f["Arms Length"] == "Yes"]


def appraise_importer(path: Path):
    return load_sales(path)


def measure(fn, path: Path, runs: int) -> tuple[float, float]:
    times = []
    for _ in range(runs):
        t0 = time.perf_counter()
        fn(path)
        times.append(time.perf_counter() - t0)
    tracemalloc.start()
    fn(path)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return statistics.median(times), peak / 2**20


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=100_000)
    ap.add_argument("--runs", type=int, default=3)
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "export.csv"
        make_export(path, args.rows)
        size = path.stat().st_size / 2**20
        table = load_sales(path)
        print(
            f"{args.rows:,} rows, {size:.1f} MiB CSV; importer: {table.n_used:,} used, "
            f"{len(table.excluded):,} excluded with reasons, median of {args.runs} runs"
        )
        print(f"{'reader':<44}{'median s':>10}{'peak MiB':>10}")
        for label, fn in (
            ("pandas.read_csv (types guessed, no log)", pandas_plain),
            ("pandas + hand cleaning (no log, no roles)", pandas_hand_cleaned),
            ("appraise load_sales (every row accounted)", appraise_importer),
        ):
            t, mem = measure(fn, path, args.runs)
            print(f"{label:<44}{t:>10.2f}{mem:>10.1f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
