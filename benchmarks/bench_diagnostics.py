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
    return 0


if __name__ == "__main__":
    sys.exit(main())
