"""The fit at county size, side by side: appraise, a plain statsmodels script, the floor.

Run: ``python3 benchmarks/bench_fit.py [--case a|b|both] [--rows N --regions G] [--keep]``

Cases (simulated sales written to Parquet under a temporary folder by a seeded
generator; 21 numeric columns, a region column, the price; log response):

* (a) 100,000 sales x (21 numeric + 300 region indicators): ``appraise fit --json``;
* (b) 1,000,000 sales x (21 + 1,000 region indicators): ``appraise value --json`` (the fit
  with every standard error and one prediction interval).

Sides, each run in its own fresh process (wall time from outside; peak memory is the
process's own maximum resident set, ``ru_maxrss`` from ``os.wait4``):

* **appraise**: the command line, whole process (import, read, fit, JSON out);
* **appraise, inside**: the same steps in one process with the time of each
  (``load_sales``, ``fit_model``, the JSON), to show where the time goes;
* **statsmodels formula**: ``pandas.read_parquet`` then
  ``smf.ols("np.log(price) ~ x01 + ... + C(region)").fit()`` -- for (b) it is not run:
  its dense design alone is n x p x 8 bytes (8.2 GB) and the pseudo-inverse's SVD needs
  about twice that again, more than the machine can spare;
* **floor**: the least a fit must do -- read the columns once (pyarrow, the region
  dictionary-encoded), absorb the region means with ``bincount``, solve the small normal
  equations by Cholesky, classical standard errors of all coefficients and one interval.

Every side gets the same number of BLAS threads (``--threads``, default 1): on a small
shared machine extra BLAS threads mostly wait for each other (a 1,000,000 x 22 Gram
matrix took 0.09 s on one thread and anywhere up to 12 s on two busy cores).

This is a script, not a test: numbers depend on the machine and its load. Run it once,
when the machine is quiet.
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

N_NUMERIC = 21
CASES = {"a": (100_000, 300, "fit"), "b": (1_000_000, 1_000, "value")}
DENSE_LIMIT_BYTES = 4e9  # the statsmodels script is not started beyond this dense design
THREADS = 1  # BLAS threads of every side (--threads)


# --- data ----------------------------------------------------------------------------------
def generate(folder: Path, rows: int, regions: int, seed: int = 2026) -> dict[str, Path]:
    """Simulated sales (Parquet), the model file and a subject, written under ``folder``."""
    import numpy as np
    import pandas as pd

    rng = np.random.default_rng(seed)
    region = rng.integers(0, regions, rows)
    effect = rng.normal(0.0, 0.25, regions)
    x = rng.normal(0.0, 1.0, (rows, N_NUMERIC))
    x[:, 0] = rng.lognormal(7.4, 0.3, rows)  # an area
    x[:, 1] = rng.integers(1, 6, rows)  # a count (bedrooms)
    x[:, 2] = rng.uniform(0, 100, rows)  # an age
    x[:, 3] += 0.3 * effect[region]  # a column that varies with the region
    beta = rng.normal(0.0, 0.03, N_NUMERIC)
    beta[:3] = (0.0004, 0.02, -0.003)
    logp = 11.0 + x @ beta + effect[region] + rng.normal(0.0, 0.18, rows)
    names = [f"x{j + 1:02d}" for j in range(N_NUMERIC)]
    frame = pd.DataFrame(x, columns=names)
    frame.insert(0, "sale_id", [f"S{i:07d}" for i in range(rows)])
    frame.insert(1, "price", np.round(np.exp(logp), 0))
    frame["region"] = pd.Series([f"R{g:04d}" for g in range(regions)]).to_numpy()[region]
    sales = folder / "sales.parquet"
    frame.to_parquet(sales, index=False)
    model = folder / "model.toml"
    features = ", ".join(f'"{c}"' for c in names) + ', "onehot(region)"'
    model.write_text(
        f'target = "price"\nresponse = "log"\nspread = "constant"\nfeatures = [{features}]\n',
        encoding="utf-8",
    )
    subject = folder / "subject.json"
    row = frame.iloc[7].drop(["sale_id", "price"]).to_dict()
    subject.write_text(json.dumps(row), encoding="utf-8")
    return {"sales": sales, "model": model, "subject": subject}


# --- the sides, each a small program run in its own process -----------------------------------
INSIDE = r"""
import json, sys, time
t0 = time.perf_counter()
from appraise.engine.importing import load_sales
from appraise.engine.modelspec import load_model
from appraise.engine.fitting import fit_model
from appraise.engine.jsonable import to_jsonable
from appraise import pipeline
t1 = time.perf_counter()
sales = load_sales(sys.argv[1])
t2 = time.perf_counter()
fit = fit_model(sales, load_model(sys.argv[2]))
t3 = time.perf_counter()
text = json.dumps(to_jsonable(fit.to_dict()), allow_nan=False)
t4 = time.perf_counter()
pred = fit.predict(pipeline.subject_frame(sys.argv[3], sales))
t5 = time.perf_counter()
print(json.dumps({"import": t1 - t0, "load_sales": t2 - t1, "fit_model": t3 - t2,
                  "json": t4 - t3, "predict": t5 - t4, "path": fit.path_text,
                  "low": float(pred.low[0]), "high": float(pred.high[0])}))
"""

STATSMODELS = r"""
import sys
import numpy as np
import pandas as pd
import statsmodels.formula.api as smf
df = pd.read_parquet(sys.argv[1])
rhs = " + ".join([c for c in df.columns if c.startswith("x")] + ["C(region)"])
res = smf.ols("np.log(price) ~ " + rhs, data=df).fit()
print(float(res.params["x01"]), float(res.bse["x01"]), res.df_resid)
"""

FLOOR = r"""
import sys
import numpy as np
import pyarrow.parquet as pq
from scipy import linalg, special
names = [f"x{j + 1:02d}" for j in range(21)]
t = pq.read_table(sys.argv[1], columns=["price", *names, "region"], read_dictionary=["region"])
codes = t.column("region").combine_chunks().indices.to_numpy().astype(np.intp)
G = len(t.column("region").combine_chunks().dictionary)
y = np.log(t.column("price").to_numpy())
Z = np.empty((len(y), 22))
Z[:, 0] = 1.0
for j, c in enumerate(names):
    Z[:, j + 1] = t.column(c).to_numpy()
del t
n, k = Z.shape
cnt = np.bincount(codes, minlength=G).astype(float)
ref = int(np.argmax(cnt))
M = np.stack([np.bincount(codes, weights=Z[:, j], minlength=G) for j in range(k)], 1) / cnt[:, None]
ym = np.bincount(codes, weights=y, minlength=G) / cnt
M[ref] = 0.0
ym[ref] = 0.0
Z -= M[codes]
y -= ym[codes]
S = Z.T @ Z
c = linalg.cho_factor(S)
b = linalg.cho_solve(c, Z.T @ y)
e = y - Z @ b
p = k + G - 1
s2 = e @ e / (n - p)
Sinv = linalg.cho_solve(c, np.eye(k))
keep = np.arange(G) != ref
se_b = np.sqrt(s2 * np.diag(Sinv))
se_g = np.sqrt(s2 * (1 / cnt[keep] + np.einsum("ij,jk,ik->i", M[keep], Sinv, M[keep])))
z0, g0 = Z[7] + M[codes[7]], codes[7]  # one sale's own row as the subject
d0 = z0 - M[g0]
var = s2 * (d0 @ Sinv @ d0 + (1 / cnt[g0] if g0 != ref else 0.0))
gamma = ym - M @ b
fit0 = z0 @ b + (gamma[g0] if g0 != ref else 0.0)
q = special.stdtrit(n - p, 0.95)
print(se_b[1], se_g[0], np.exp(fit0 - q * np.sqrt(var + s2)), np.exp(fit0 + q * np.sqrt(var + s2)))
"""


def run_side(argv: list[str]) -> dict:
    """Run one side in a fresh process: wall seconds and its output."""
    env = dict(os.environ)
    for var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
        env[var] = str(THREADS)
    t0 = time.perf_counter()
    proc = subprocess.run(argv, capture_output=True, env=env)
    wall = time.perf_counter() - t0
    return {
        "ok": proc.returncode == 0,
        "wall": wall,
        "peak_mib": float("nan"),
        "out": proc.stdout.decode(errors="replace")[-4000:],
        "err": proc.stderr.decode(errors="replace")[-2000:],
    }


def _runner(argv: list[str]) -> list[str]:
    """Wrap a side so that its own peak memory is reported: the wrapper's only child is the
    side, so ``RUSAGE_CHILDREN``'s ``ru_maxrss`` is that process's peak resident set."""
    wrapper = (
        "import resource, subprocess, sys, json\n"
        "r = subprocess.run(sys.argv[1:])\n"
        "m = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss\n"
        "sys.stderr.write('\\nPEAK_KIB=%d\\n' % m)\n"
        "sys.exit(r.returncode)\n"
    )
    return [sys.executable, "-c", wrapper, *argv]


def measure(argv: list[str]) -> dict:
    res = run_side(_runner(argv))
    for line in res["err"].splitlines():
        if line.startswith("PEAK_KIB="):
            res["peak_mib"] = int(line.split("=")[1]) / 1024
    return res


def appraise_argv(command: str, files: dict[str, Path]) -> list[str]:
    argv = [sys.executable, "-m", "appraise", command, str(files["sales"]), "--model"]
    argv += [str(files["model"]), "--json"]
    if command == "value":
        argv += ["--subject", str(files["subject"])]
    return argv


def run_case(name: str, rows: int, regions: int, command: str, folder: Path) -> list[dict]:
    t0 = time.perf_counter()
    files = generate(folder, rows, regions)
    print(f"\n({name}) {rows:,} sales x ({N_NUMERIC} numeric + {regions - 1:,} region indicators)")
    print(f"    data written in {time.perf_counter() - t0:.1f} s: {files['sales']}")
    py = sys.executable
    sides: list[tuple[str, list[str] | None, str]] = [
        (f"appraise {command} --json (whole process)", appraise_argv(command, files), ""),
        ("appraise, inside one process", [py, "-c", INSIDE, *map(str, files.values())], ""),
    ]
    dense_bytes = rows * (N_NUMERIC + regions) * 8
    if dense_bytes <= DENSE_LIMIT_BYTES:
        sides.append(
            ("statsmodels formula script", [py, "-c", STATSMODELS, str(files["sales"])], "")
        )
    else:
        sides.append(
            (
                "statsmodels formula script",
                None,
                f"not run: the dense design alone is {dense_bytes / 1e9:.1f} GB and the "
                "pseudo-inverse's SVD needs about twice that again",
            )
        )
    sides.append(("one-pass floor", [py, "-c", FLOOR, str(files["sales"])], ""))
    results = []
    for label, argv, note in sides:
        if argv is None:
            results.append({"side": label, "note": note})
            print(f"    {label:<42} {note}")
            continue
        r = measure(argv)
        r["side"] = label
        results.append(r)
        if not r["ok"]:
            print(f"    {label:<42} FAILED: {r['err'].strip().splitlines()[-1:]}")
            continue
        extra = ""
        if label.startswith("appraise, inside"):
            inside = json.loads(r["out"].strip().splitlines()[-1])
            r["inside"] = inside
            extra = (
                "  ("
                + ", ".join(
                    f"{k} {inside[k]:.2f} s"
                    for k in ("import", "load_sales", "fit_model", "json", "predict")
                )
                + f"; {inside['path']})"
            )
        print(f"    {label:<42} {r['wall']:8.2f} s {r['peak_mib']:9,.0f} MiB peak{extra}")
    _ratios(name, results)
    return results


def _ratios(name: str, results: list[dict]) -> None:
    by = {
        r["side"].split(" ")[0] + (" inside" if "inside" in r["side"] else ""): r for r in results
    }
    ours = next(
        r for r in results if r["side"].startswith("appraise ") and "inside" not in r["side"]
    )
    if not ours.get("ok"):
        return
    sm_run = next(r for r in results if r["side"].startswith("statsmodels"))
    floor = by.get("one-pass")
    if sm_run.get("ok"):
        print(
            f"    ratio to statsmodels: time {ours['wall'] / sm_run['wall']:.2f}x, "
            f"memory {ours['peak_mib'] / sm_run['peak_mib']:.2f}x"
            + ("   (target: at most 0.25x and 0.5x)" if name == "a" else "")
        )
    if floor and floor.get("ok"):
        print(
            f"    ratio to the floor:   time {ours['wall'] / floor['wall']:.2f}x, "
            f"memory {ours['peak_mib'] / floor['peak_mib']:.2f}x"
            + ("   (target: at most 3x, and 2 GB)" if name == "b" else "")
        )


def main() -> int:
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--case", choices=["a", "b", "both"], default="both")
    p.add_argument("--rows", type=int, help="override the sales count (a smoke run)")
    p.add_argument("--regions", type=int, help="override the region count")
    p.add_argument("--keep", action="store_true", help="keep the generated files")
    p.add_argument("--threads", type=int, default=1, help="BLAS threads of every side (1)")
    args = p.parse_args()
    global THREADS
    THREADS = args.threads
    names = ["a", "b"] if args.case == "both" else [args.case]
    with tempfile.TemporaryDirectory(prefix="appraise-bench-fit-") as tmp:
        for name in names:
            rows, regions, command = CASES[name]
            rows = args.rows or rows
            regions = args.regions or regions
            folder = Path(tmp) / name
            folder.mkdir()
            run_case(name, rows, regions, command, folder)
            if args.keep:
                kept = Path.cwd() / f"bench_fit_{name}"
                kept.mkdir(exist_ok=True)
                for f in folder.iterdir():
                    f.replace(kept / f.name)
                print(f"    files kept in {kept}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
