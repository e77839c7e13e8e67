"""Batch valuation of a roll: appraise against a statsmodels script, side by side.

    python benchmarks/bench_batch.py [--sales 100000] [--subjects 1000000] [--regions 300]
                                     [--roll parquet|csv]

Invented data with a known truth (21 numeric attributes, ``--regions`` regions, a log
price) is written to Parquet: the sales, and a roll of subjects drawn the same way (a few
with a missing attribute or a region the sales never had, as a roll holds), the roll also
as CSV with ``--roll csv`` (both sides then read the CSV). Each side runs
in its own process, one after the other, and reports

* the time to value every subject once the model is fitted (reading the subjects included;
  the fit is common to both and not timed), and
* the resident memory once the model is fitted and the peak resident memory of its whole
  process (``ru_maxrss``: the fit included). Nothing is traced while timing: tracing every
  allocation would slow the side that makes more Python objects.

Sides: ``appraise`` (the engine of ``appraise batch``: chunks of the subjects through
``FitResult.predict``, written to Parquet with every row and its reason) and ``statsmodels``
(the script a statsmodels user writes: ``smf.ols`` on the sales, ``get_prediction`` on the
whole subjects frame, ``summary_frame``, bounds exponentiated and a smearing factor). The
statsmodels script cannot value the odd rows, so it gets only the clean ones (it has less
work). This is a script, not a test: timings on shared machines vary.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

NUMERIC = 21


def make_data(
    folder: Path,
    sales: int,
    subjects: int,
    regions: int,
    seed: int = 11,
    roll_format: str = "parquet",
) -> None:
    """Sales and subjects Parquet files (the subjects also as CSV for ``roll_format="csv"``),
    and the model file, under ``folder``."""
    rng = np.random.default_rng(seed)
    beta = rng.normal(0, 0.05, NUMERIC)
    effect = rng.normal(0, 0.2, regions)
    names = np.array([f"R{k:04d}" for k in range(regions)], dtype=object)

    def draw(n: int, with_price: bool) -> pd.DataFrame:
        x = rng.normal(0, 1, (n, NUMERIC))
        r = rng.integers(0, regions, n)
        cols = {f"x{j + 1}": x[:, j] for j in range(NUMERIC)}
        frame = pd.DataFrame({"id": [f"P{i:08d}" for i in range(n)], **cols, "region": names[r]})
        if with_price:
            log_price = 12.5 + x @ beta + effect[r] + rng.normal(0, 0.25, n)
            frame.insert(1, "price", np.exp(log_price).round(0))
        return frame

    draw(sales, True).to_parquet(folder / "sales.parquet", index=False)
    roll = draw(subjects, False)
    odd = rng.choice(subjects, size=max(subjects // 10_000, 2), replace=False)
    roll.loc[odd[::2], "x1"] = np.nan  # a missing attribute
    roll.loc[odd[1::2], "region"] = "Nowhere"  # a level the sales never had
    roll.to_parquet(folder / "subjects.parquet", index=False)
    if roll_format == "csv":
        roll.to_csv(folder / "subjects.csv", index=False)
    features = [f"x{j + 1}" for j in range(NUMERIC)] + ["onehot(region, ref='R0000')"]
    from dataclasses import fields

    from appraise.engine.modelspec import ModelSpec

    # like for like: statsmodels' intervals take one error variance for every sale
    spread = 'spread = "constant"\n' if "spread" in {f.name for f in fields(ModelSpec)} else ""
    (folder / "model.toml").write_text(
        f'target = "price"\nresponse = "log"\nlevel = 0.9\n{spread}'
        f"features = {json.dumps(features)}\n",
        encoding="utf-8",
    )


def rss_mib() -> float:
    """Resident memory of this process now (Linux), MiB."""
    for line in Path("/proc/self/status").read_text().splitlines():
        if line.startswith("VmRSS:"):
            return int(line.split()[1]) / 1024
    return float("nan")


def side_appraise(folder: Path, roll: str) -> dict:
    from appraise import pipeline
    from appraise.commands.batch import _Writer
    from appraise.engine.batch import value_file

    sales = pipeline.load(folder / "sales.parquet")
    fit = pipeline.fit(sales, pipeline.read_model(folder / "model.toml"))
    before = rss_mib()
    t0 = time.perf_counter()
    writer = _Writer(folder / "appraise_out.parquet", "parquet", {"caution": "estimate"})
    rows = valued = 0
    during = []  # resident memory after each chunk: flat, however long the roll
    for chunk in value_file(fit, sales, folder / f"subjects.{roll}"):
        writer.write(chunk)
        rows += len(chunk)
        valued += int((chunk["reason"] == "").sum())
        during.append(rss_mib())
    writer.close()
    seconds = time.perf_counter() - t0
    flat = {"first_chunk_rss_mib": during[0], "last_chunk_rss_mib": during[-1]}
    return {"seconds": seconds, "fitted_rss_mib": before, "rows": rows, "valued": valued} | flat


def side_statsmodels(folder: Path, roll_format: str) -> dict:
    import statsmodels.formula.api as smf

    sales = pd.read_parquet(folder / "sales.parquet")
    terms = " + ".join(f"x{j + 1}" for j in range(NUMERIC))
    formula = f"np.log(price) ~ {terms} + C(region, Treatment('R0000'))"
    res = smf.ols(formula, data=sales).fit()
    smearing = float(np.mean(np.exp(res.resid)))
    before = rss_mib()
    t0 = time.perf_counter()
    path = folder / f"subjects.{roll_format}"
    roll = pd.read_parquet(path) if roll_format == "parquet" else pd.read_csv(path)
    clean = roll[roll["x1"].notna() & roll["region"].isin(sales["region"].unique())]
    frame = res.get_prediction(clean).summary_frame(alpha=0.10)
    out = pd.DataFrame(
        {
            "id": clean["id"].to_numpy(),
            "estimate": np.exp(frame["mean"].to_numpy()) * smearing,
            "median": np.exp(frame["mean"].to_numpy()),
            "low": np.exp(frame["obs_ci_lower"].to_numpy()),
            "high": np.exp(frame["obs_ci_upper"].to_numpy()),
        }
    )
    out.to_parquet(folder / "statsmodels_out.parquet", index=False)
    seconds = time.perf_counter() - t0
    return {"seconds": seconds, "fitted_rss_mib": before, "rows": len(roll), "valued": len(out)}


def run_side(name: str, folder: Path, roll: str) -> dict:
    """One side in a fresh process; its result and its peak resident memory."""
    cmd = [sys.executable, __file__, "--side", name, "--folder", str(folder), "--roll", roll]
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, text=True)
    out = proc.stdout.read() if proc.stdout else ""
    _, status, usage = os.wait4(proc.pid, 0)
    proc.returncode = os.waitstatus_to_exitcode(status)
    if proc.returncode != 0:
        raise SystemExit(f"the {name} side failed (exit {proc.returncode})")
    result = json.loads(out.strip().splitlines()[-1])
    result["peak_rss_mib"] = usage.ru_maxrss / 1024  # Linux: kilobytes
    return result


def compare_outputs(folder: Path) -> float:
    """Largest relative difference between the two sides' estimates and bounds."""
    a = pd.read_parquet(folder / "appraise_out.parquet").set_index("id")
    b = pd.read_parquet(folder / "statsmodels_out.parquet").set_index("id")
    a = a.loc[b.index]
    worst = 0.0
    for col in ("estimate", "median", "low", "high"):
        worst = max(worst, float(np.max(np.abs(a[col] / b[col] - 1))))
    return worst


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sales", type=int, default=100_000)
    ap.add_argument("--subjects", type=int, default=1_000_000)
    ap.add_argument("--regions", type=int, default=300)
    ap.add_argument("--roll", choices=["parquet", "csv"], default="parquet", help="roll format")
    ap.add_argument("--side", choices=["appraise", "statsmodels"], help=argparse.SUPPRESS)
    ap.add_argument("--folder", help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.side:
        fn = side_appraise if args.side == "appraise" else side_statsmodels
        print(json.dumps(fn(Path(args.folder), args.roll)))
        return 0
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        make_data(folder, args.sales, args.subjects, args.regions, roll_format=args.roll)
        print(
            f"batch valuation: {args.subjects:,} subjects from a model of {args.sales:,} sales "
            f"x ({NUMERIC} numeric + {args.regions} regions), log price, {args.roll} roll; "
            "one run each"
        )
        results = {name: run_side(name, folder, args.roll) for name in ("appraise", "statsmodels")}
        print(f"{'side':<14}{'valued':>12}{'seconds':>10}{'RSS after fit':>15}{'peak RSS MiB':>14}")
        for name, r in results.items():
            print(
                f"{name:<14}{r['valued']:>12,}{r['seconds']:>10.2f}"
                f"{r['fitted_rss_mib']:>15,.0f}{r['peak_rss_mib']:>14,.0f}"
            )
        a, s = results["appraise"], results["statsmodels"]
        print(
            f"ratio appraise/statsmodels: time {a['seconds'] / s['seconds']:.2f} "
            f"(target 0.10), peak RSS {a['peak_rss_mib'] / s['peak_rss_mib']:.2f} "
            f"(target 0.25); every row out: "
            f"{a['rows']:,} of {args.subjects:,}"
        )
        print(f"largest relative difference of the values: {compare_outputs(folder):.1e}")
        print(
            f"appraise's resident memory after its first chunk {a['first_chunk_rss_mib']:,.0f} "
            f"MiB, after its last {a['last_chunk_rss_mib']:,.0f} MiB"
        )
    return 0


if __name__ == "__main__":
    sys.exit(main())
