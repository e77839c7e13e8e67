"""Speed and memory of the model check-up against statsmodels' influence path.

Run: ``python3 benchmarks/bench_diagnostics.py [--n 2000] [--terms 30] [--repeat 7]``

Both sides get the same simulated design (n sales, an intercept and ``terms - 1``
columns, some of them grouped like indicator sets) and log-price response.

* ours: ``appraise.engine.diagnostics.diagnose_arrays`` -- everything: influence and
  flags, VIF/GVIF and condition number, both Breusch-Pagan forms and Jarque-Bera,
  leave-one-out accuracy and interval coverage, 10-fold cross-validation, ratio study;
* ours, influence only: ``influence`` (hat, studentized, Cook's, DFFITS, LOO);
* statsmodels: ``OLS(...).fit()`` and ``OLSInfluence``: hat diagonal, internally and
  externally studentized residuals, Cook's distance, DFFITS (its external residuals
  refit the model once per sale).

Times are medians of ``--repeat`` runs after one warm-up; peak memory is measured in a
separate run under ``tracemalloc`` (Python-level allocations, numpy arrays included).
BLAS is limited to ``--threads`` threads (default 1) for both sides: on small matrices
extra BLAS threads only add overhead, and on a busy machine they can cost far more.
Structured fits (``--structured a|b|both|none``, default both): the check-up of a fit
whose region block is absorbed (``diagnose`` on ``fit.structure``, never the dense design)
against the dense path's check-up (``path="dense"``: statsmodels on the whole design, then
the pivoted QR of it), on simulated sales (21 numeric columns, an intercept, a region
column; log response):

* (a) 100,000 sales x (21 + 300 regions): both paths;
* (b) 1,000,000 sales x (21 + 1,000 regions): the structured path only (the dense design
  alone would be 8.2 GB).

Each side runs in its own fresh process: the time of the fit and of the check-up, the
process's peak resident set (``VmHWM``), and the check-up's own peak above what the process
held when it started (the high-water mark is reset through ``/proc/self/clear_refs`` just
before ``diagnose``). A few of the check-up's numbers are printed for both paths, to be seen
to agree (the tests ask 1e-8).

This is a script, not a test: the numbers depend on the machine.
"""

from __future__ import annotations

import argparse
import os
import sys


def _args() -> argparse.Namespace:
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--n", type=int, default=2000, help="sales (default 2000)")
    p.add_argument("--terms", type=int, default=30, help="design columns incl. intercept (30)")
    p.add_argument("--repeat", type=int, default=7, help="timed runs per side (default 7)")
    p.add_argument("--threads", type=int, default=1, help="BLAS threads (default 1)")
    p.add_argument("--seed", type=int, default=0)
    p.add_argument(
        "--structured",
        choices=("a", "b", "both", "none"),
        default="both",
        help="structured-fit cases: (a) 100k x 300 regions, (b) 1M x 1,000 (default both)",
    )
    p.add_argument("--structured-rows", type=int, help="sales of the structured case(s)")
    p.add_argument("--structured-regions", type=int, help="regions of the structured case(s)")
    p.add_argument("--child", choices=("structured", "dense"), help=argparse.SUPPRESS)
    return p.parse_args()


ARGS = _args() if __name__ == "__main__" else None
if ARGS is not None:  # before numpy is imported, so OpenBLAS reads it
    for var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
        os.environ[var] = str(ARGS.threads)

import time  # noqa: E402
import tracemalloc  # noqa: E402

import numpy as np  # noqa: E402
import statsmodels.api as sm  # noqa: E402
from statsmodels.stats.outliers_influence import OLSInfluence  # noqa: E402

from appraise.engine.diagnostics import TermGroupRef, diagnose_arrays  # noqa: E402
from appraise.engine.diagnostics.influence import influence  # noqa: E402


def simulated(n: int, p: int, seed: int):
    """Intercept, continuous columns, and two indicator groups of 4 and 5 levels."""
    rng = np.random.default_rng(seed)
    n_cont = p - 1 - 4 - 3
    cont = rng.normal(size=(n, n_cont))
    cont[:, 1] += 0.7 * cont[:, 0]  # some collinearity
    a = rng.integers(0, 5, size=n)
    b = rng.integers(0, 4, size=n)
    ind_a = (a[:, None] == np.arange(1, 5)).astype(float)
    ind_b = (b[:, None] == np.arange(1, 4)).astype(float)
    X = np.column_stack([np.ones(n), cont, ind_a, ind_b])
    beta = rng.normal(scale=0.05, size=X.shape[1])
    beta[0] = 12.5
    y = X @ beta + rng.normal(scale=0.15, size=n)
    names = ["Intercept", *[f"x{j}" for j in range(n_cont)],
             *[f"a[{k}]" for k in range(1, 5)], *[f"b[{k}]" for k in range(1, 4)]]  # fmt: skip
    groups = [TermGroupRef(f"x{j}", "plain", (1 + j,)) for j in range(n_cont)]
    groups.append(TermGroupRef("onehot(a)", "onehot", tuple(range(1 + n_cont, 5 + n_cont))))
    groups.append(TermGroupRef("onehot(b)", "onehot", tuple(range(5 + n_cont, 8 + n_cont))))
    return X, y, np.exp(y), names, groups


def ours_full(X, y, price, names, groups):
    return diagnose_arrays(X, y, price, names=names, groups=groups, response="log")


def ours_influence(X, y, price, names, groups):
    return influence(X, y)


def statsmodels_influence(X, y, price, names, groups):
    infl = OLSInfluence(sm.OLS(y, X).fit())
    return (
        infl.hat_matrix_diag,
        infl.resid_studentized_internal,
        infl.resid_studentized_external,
        infl.cooks_distance[0],
        infl.dffits[0],
    )


def timed(func, data, repeat: int) -> float:
    func(*data)  # warm-up
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        func(*data)
        times.append(time.perf_counter() - t0)
    return float(np.median(times))


def peak_memory(func, data) -> int:
    tracemalloc.start()
    func(*data)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return peak


def main() -> int:
    args = ARGS
    data = simulated(args.n, args.terms, args.seed)
    X = data[0]
    print(f"n = {X.shape[0]} sales, p = {X.shape[1]} columns, BLAS threads {args.threads}, "
          f"median of {args.repeat} runs")  # fmt: skip
    # the two sides agree before they are timed
    ours = influence(data[0], data[1])
    ref = statsmodels_influence(*data)
    for mine, theirs in zip(
        (ours.leverage, ours.student_internal, ours.student_external, ours.cooks_distance,
         ours.dffits), ref, strict=True,
    ):  # fmt: skip
        np.testing.assert_allclose(mine, theirs, rtol=1e-8)
    rows = []
    for label, func in (
        ("appraise diagnose (everything)", ours_full),
        ("appraise influence only", ours_influence),
        ("statsmodels OLS fit + OLSInfluence", statsmodels_influence),
    ):
        t = timed(func, data, args.repeat)
        m = peak_memory(func, data)
        rows.append((label, t, m))
    w = max(len(r[0]) for r in rows)
    print(f"{'':<{w}}  {'median ms':>10}  {'peak MiB':>9}")
    for label, t, m in rows:
        print(f"{label:<{w}}  {1e3 * t:>10.1f}  {m / 2**20:>9.2f}")
    ratio = rows[2][1] / rows[0][1]
    print(f"statsmodels' influence path takes {ratio:.0f}x the time of the whole check-up")
    return structured_cases(args)


# --- the check-up of a structured fit, against the dense path ----------------------------------
STRUCTURED_CASES = {"a": (100_000, 300), "b": (1_000_000, 1_000)}
N_NUMERIC = 21
DENSE_LIMIT_BYTES = 1.5e9  # the dense side is not started beyond this dense design


def structured_sales(rows: int, regions: int, seed: int):
    """Simulated sales as a sales table (past the importer) and the model: 21 numeric
    columns (one varying with the region), a region column, a log response."""
    import pandas as pd

    from appraise.engine.modelspec import parse_model
    from appraise.engine.roles import RoleMap
    from appraise.engine.sales import ROW_COLUMN, SalesTable, SourceInfo

    rng = np.random.default_rng(seed)
    region = rng.integers(0, regions, rows)
    effect = rng.normal(0.0, 0.25, regions)
    x = rng.normal(0.0, 1.0, (rows, N_NUMERIC))
    x[:, 0] = rng.lognormal(7.4, 0.3, rows)  # an area
    x[:, 1] = rng.integers(1, 6, rows)  # a count
    x[:, 2] = rng.uniform(0, 100, rows)  # an age
    x[:, 3] += 0.3 * effect[region]  # varies with the region
    beta = rng.normal(0.0, 0.03, N_NUMERIC)
    beta[:3] = (0.0004, 0.02, -0.003)
    noise = rng.normal(0.0, 0.12 + 0.001 * x[:, 2], rows)  # spread grows with age
    logp = 11.0 + x @ beta + effect[region] + noise
    names = [f"x{j + 1:02d}" for j in range(N_NUMERIC)]
    frame = pd.DataFrame(x, columns=names)
    frame.insert(0, "price", np.exp(logp))
    frame["region"] = pd.Series([f"R{g:04d}" for g in range(regions)]).to_numpy()[region]
    frame[ROW_COLUMN] = np.arange(2, rows + 2)
    sales = SalesTable(
        frame=frame,
        excluded=(),
        roles=RoleMap({"region": "region"}),
        source=SourceInfo(path="<simulated>", sha256="0" * 64, format="frame", rows_in_file=rows),
        area_unit="ft2",
    )
    features = ", ".join(f'"{c}"' for c in names) + ', "onehot(region)"'
    spec = parse_model(f'target = "price"\nresponse = "log"\nfeatures = [{features}]\n')
    return sales, spec


def _plain(v: float) -> str:
    """Ten significant digits without an exponent."""
    return np.format_float_positional(v, precision=10, unique=False, fractional=False, trim="-")


def _status_kib(key: str) -> int:
    with open("/proc/self/status", encoding="ascii") as f:
        for line in f:
            if line.startswith(key + ":"):
                return int(line.split()[1])
    return -1


def child(args: argparse.Namespace) -> int:
    """One side in this (fresh) process; prints one JSON line."""
    import json

    from appraise.engine.diagnostics import diagnose
    from appraise.engine.fitting import fit_model

    sales, spec = structured_sales(args.structured_rows, args.structured_regions, args.seed)
    t0 = time.perf_counter()
    fit = fit_model(sales, spec, path=args.child)
    t1 = time.perf_counter()
    before = _status_kib("VmRSS")
    try:  # the high-water mark from here on (Linux >= 4.0)
        with open("/proc/self/clear_refs", "w", encoding="ascii") as f:
            f.write("5")
        reset = True
    except OSError:
        reset = False
    d = diagnose(fit)
    t2 = time.perf_counter()
    hwm = _status_kib("VmHWM")
    print(json.dumps({
        "path": fit.path, "n": fit.n, "p": fit.p, "fit_s": t1 - t0, "diagnose_s": t2 - t1,
        "checkup_extra_mib": (hwm - before) / 1024 if reset else None,
        "bp_lm": d.residual_tests.koenker.statistic,
        "condition": d.collinearity.condition.number,
        "kfold_rmse": d.kfold.rmse_price, "loo_press": d.loo.press,
        "max_cooks": float(np.nanmax(d.influence.cooks_distance)),
        "region_gvif_root": max(t.gvif_root for t in d.collinearity.terms),
        "flags": len(d.flags), "warnings": len(d.warnings),
    }))  # fmt: skip
    return 0


def run_child(path: str, rows: int, regions: int, args: argparse.Namespace) -> dict:
    """A side in a fresh process: wall time, its peak resident set, its JSON line."""
    import json
    import subprocess

    wrapper = (
        "import resource, subprocess, sys\n"
        "r = subprocess.run(sys.argv[1:])\n"
        "sys.stderr.write('\\nPEAK_KIB=%d\\n' % "
        "resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)\n"
        "sys.exit(r.returncode)\n"
    )
    argv = [sys.executable, "-c", wrapper, sys.executable, __file__, "--child", path,
            "--structured-rows", str(rows), "--structured-regions", str(regions),
            "--threads", str(args.threads), "--seed", str(args.seed)]  # fmt: skip
    t0 = time.perf_counter()
    proc = subprocess.run(argv, capture_output=True, text=True)
    wall = time.perf_counter() - t0
    out = {"wall": wall, "ok": proc.returncode == 0, "err": proc.stderr[-2000:]}
    for line in proc.stderr.splitlines():
        if line.startswith("PEAK_KIB="):
            out["peak_mib"] = int(line.split("=")[1]) / 1024
    if out["ok"]:
        out.update(json.loads(proc.stdout.strip().splitlines()[-1]))
    return out


def structured_cases(args: argparse.Namespace) -> int:
    if args.structured == "none":
        return 0
    names = ("a", "b") if args.structured == "both" else (args.structured,)
    status = 0
    for name in names:
        rows, regions = STRUCTURED_CASES[name]
        rows = args.structured_rows or rows
        regions = args.structured_regions or regions
        p = 1 + N_NUMERIC + regions - 1
        print(f"\n({name}) check-up of a fit with {rows:,} sales x ({N_NUMERIC + 1} numeric + "
              f"{regions - 1:,} region indicators), BLAS threads {args.threads}")  # fmt: skip
        sides = ["structured"]
        if 8.0 * rows * p <= DENSE_LIMIT_BYTES:
            sides.append("dense")
        else:
            print(f"    dense path not run: its design alone is {8.0 * rows * p / 1e9:.1f} GB")
        results = {}
        for side in sides:
            r = run_child(side, rows, regions, args)
            results[side] = r
            if not r["ok"]:
                print(f"    {side}: FAILED\n{r['err']}")
                status = 1
                continue
            extra = r.get("checkup_extra_mib")
            print(
                f"    {side + ' path':<16} fit {r['fit_s']:7.2f} s   check-up "
                f"{r['diagnose_s']:7.2f} s   process {r['wall']:6.1f} s, peak "
                f"{r['peak_mib']:7,.0f} MiB; the check-up's own peak above what the process held "
                + ("n/a" if extra is None else f"{extra:6,.0f} MiB")
            )
        keys = ("bp_lm", "condition", "kfold_rmse", "loo_press", "max_cooks", "region_gvif_root")
        for side, r in results.items():
            if r["ok"]:
                print(f"    {side:<16} " + "  ".join(f"{k} {_plain(r[k])}" for k in keys))
        if all(r["ok"] for r in results.values()) and len(results) == 2:
            s, d = results["structured"], results["dense"]
            worst = max(abs(s[k] - d[k]) / abs(d[k]) for k in keys)
            digits = int(-np.log10(worst)) if worst > 0 else 16
            ratio = (d["diagnose_s"] / s["diagnose_s"], d["peak_mib"] / s["peak_mib"])
            print(f"    these numbers agree to {digits} significant digits; the dense "
                  f"check-up takes {ratio[0]:.1f}x the time, its process {ratio[1]:.1f}x "
                  "the memory")  # fmt: skip
    return status


if __name__ == "__main__":
    if ARGS is not None and ARGS.child:
        sys.exit(child(ARGS))
    sys.exit(main())
