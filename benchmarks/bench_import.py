"""Reading a sales export: appraise's importer against plain pandas, side by side.

    python benchmarks/bench_import.py [--rows 100000]

The table is generated here (invented sales written the way messy exports write them:
"$412,500" beside "412500" and "$412,500.00" prices, "N/A" and unreadable prices, ISO
dates beside "05 Mar 2024", areas with and without "sq ft", listings exported twice,
yes/Y/No flags, padded region names, a few blank cells). Three readers:

* ``pandas.read_csv`` with its defaults: the obvious alternative. It is fast, but it
  leaves the prices as text ("$412,500"), guesses types and accounts for no row;
* ``pandas.read_csv`` followed by the cleaning an analyst would write by hand for this
  export (strip "$", "," and "sq ft", to_numeric, mixed-format to_datetime, drop
  non-arm's-length rows and repeated ids): still no exclusion log, no role map;
* ``appraise.engine.importing.load_sales``: every cell parsed with the rules of the
  importer, every row used or excluded with a reason, roles suggested.

Reported: best and median wall time of several runs (the readers take turns) and peak
traced memory (tracemalloc).
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
    """A messy listing export: the forms a real one mixes, a few percent of each."""
    rng = np.random.default_rng(seed)
    price = np.round(rng.lognormal(12.9, 0.35, rows), -2)
    dates = pd.Timestamp("2023-07-01") + pd.to_timedelta(rng.integers(0, 1095, rows), unit="D")
    area = rng.integers(700, 4200, rows).astype(float)
    area[rng.random(rows) < 0.002] = np.nan  # a few blank cells

    def some(share: float) -> np.ndarray:
        return rng.random(rows) < share

    price_text = np.array([f"${p:,.0f}" for p in price], dtype=object)
    plain = some(0.05)
    price_text[plain] = [f"{p:.0f}" for p in price[plain]]  # no currency, no grouping
    cents = some(0.03)
    price_text[cents] = [f"${p:,.2f}" for p in price[cents]]
    price_text[some(0.004)] = "N/A"
    price_text[some(0.002)] = "call agent"  # unreadable: the row is excluded with the reason
    date_text = np.array(dates.strftime("%Y-%m-%d"), dtype=object)
    named = some(0.02)
    date_text[named] = dates[named].strftime("%d %b %Y")  # "05 Mar 2024"
    date_text[some(0.001)] = ""
    area_text = np.array([f"{a:.0f}" if a == a else "" for a in area], dtype=object)
    units = some(0.03)
    area_text[units] = [f"{a:,.0f} sq ft" if a == a else "" for a in area[units]]
    ids = np.array([f"B-{i:06d}" for i in range(rows)], dtype=object)
    dup = np.flatnonzero(some(0.003))
    ids[dup] = ids[np.maximum(dup - 1, 0)]  # a listing exported twice
    frame = pd.DataFrame(
        {
            "Sale ID": ids,
            "Sale Price": price_text,
            "Sale Date": date_text,
            "Living Area (sq ft)": area_text,
            "Lot Size (sq ft)": rng.integers(2000, 60000, rows),
            "Year Built": rng.integers(1880, 2024, rows),
            "Beds": rng.integers(1, 7, rows),
            "Baths": rng.integers(2, 10, rows) / 2,
            "Neighbourhood": rng.choice(
                ["Old Mill", "Heronmoor", "Copper Hill", "Saltmarsh End", " Old Mill "], rows
            ),
            "Arms Length": rng.choice(["Yes", "No", "Y", "yes"], rows, p=[0.9, 0.01, 0.05, 0.04]),
        }
    )
    frame.to_csv(path, index=False)


def pandas_plain(path: Path):
    return pd.read_csv(path)


def pandas_hand_cleaned(path: Path):
    """What an analyst writes by hand for this export (no log of what was dropped, no roles)."""
    f = pd.read_csv(path, dtype=str, keep_default_na=False)
    f["Sale Price"] = pd.to_numeric(
        f["Sale Price"].str.replace(r"[$,]", "", regex=True), errors="coerce"
    )
    f["Sale Date"] = pd.to_datetime(f["Sale Date"], format="mixed", errors="coerce")
    f["Living Area (sq ft)"] = pd.to_numeric(
        f["Living Area (sq ft)"].str.replace(r"[,]|\s*sq ft$", "", regex=True), errors="coerce"
    )
    for c in ("Lot Size (sq ft)", "Year Built", "Beds", "Baths"):
        f[c] = pd.to_numeric(f[c], errors="coerce")
    f["Neighbourhood"] = f["Neighbourhood"].str.strip()
    keep = f["Arms Length"].str.lower().isin(["yes", "y"]) & f["Sale Price"].gt(0)
    f = f[keep & f["Sale Date"].notna()]
    return f.drop_duplicates("Sale ID")


def appraise_importer(path: Path):
    return load_sales(path)


def measure(readers, path: Path, runs: int) -> dict:
    """Best wall time of ``runs`` runs of each reader, the readers taking turns (so a busy
    spell on a shared machine hits them alike), and each one's peak traced memory."""
    times: dict = {fn: [] for fn in readers}
    for _ in range(runs):
        for fn in readers:
            t0 = time.perf_counter()
            fn(path)
            times[fn].append(time.perf_counter() - t0)
    out = {}
    for fn in readers:
        tracemalloc.start()
        fn(path)
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        out[fn] = (min(times[fn]), statistics.median(times[fn]), peak / 2**20)
    return out


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=100_000)
    ap.add_argument("--runs", type=int, default=5)
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "export.csv"
        make_export(path, args.rows)
        size = path.stat().st_size / 2**20
        table = load_sales(path)
        print(
            f"{args.rows:,} rows, {size:.1f} MiB CSV; importer: {table.n_used:,} used, "
            f"{len(table.excluded):,} excluded with reasons; {args.runs} runs of each"
        )
        print(f"{'reader':<44}{'best s':>8}{'median s':>10}{'peak MiB':>10}")
        readers = {
            pandas_plain: "pandas.read_csv (types guessed, no log)",
            pandas_hand_cleaned: "pandas + hand cleaning (no log, no roles)",
            appraise_importer: "appraise load_sales (every row accounted)",
        }
        results = measure(list(readers), path, args.runs)
        for fn, label in readers.items():
            best, median, mem = results[fn]
            print(f"{label:<44}{best:>8.2f}{median:>10.2f}{mem:>10.1f}")
        a, h = results[appraise_importer], results[pandas_hand_cleaned]
        print(
            f"appraise / hand-cleaning pandas: best time {a[0] / h[0]:.2f} (target at most "
            f"1.3), median {a[1] / h[1]:.2f}; traced peak {a[2] / h[2]:.1f} (pandas' Arrow "
            "string buffers are not traced, so its peak reads low)"
        )
    return 0


if __name__ == "__main__":
    sys.exit(main())
