"""The model assistant on 2,500 sales x 80 columns, side by side with refitting.

Run: ``.venv/bin/python benchmarks/bench_suggest.py [--sales 2500] [--columns 80]``

The sales are invented (seeded): a log price driven by a dozen of the columns, the rest
noise. Three figures are printed:

1. the whole ``appraise suggest`` search (candidates, stepwise search, the honest
   hold-out search, the per-line gains), as the command runs it;
2. one step of the search scored by updating the decomposition (every add, drop and
   swap), from the start model and from the proposed one;
3. the same step's additions by refitting every candidate on every training fold with
   statsmodels OLS (the obvious alternative), on a share of the candidates, scaled up to
   all of them; and the largest difference between the two paths' held-out residuals.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from sales_factory import sales_from_frame  # noqa: E402

from appraise.engine.fitting import fit_model  # noqa: E402
from appraise.engine.modelspec import ModelSpec  # noqa: E402
from appraise.engine.suggest.search import (  # noqa: E402
    SearchSettings,
    _folds,
    _Rows,
    _terms_named,
    build_problem,
    rank_moves,
    suggest,
)
from appraise.engine.suggest.update import cv_state  # noqa: E402


def invented_sales(n: int, columns: int, seed: int = 0) -> pd.DataFrame:
    """``columns`` attribute columns: a quarter grades 1-10, a fifth categories, the rest
    continuous (some skewed); log price uses twelve of them."""
    rng = np.random.default_rng(seed)
    data: dict[str, np.ndarray] = {}
    n_grade, n_cat = columns // 4, columns // 5
    n_num = columns - n_grade - n_cat
    for k in range(n_num):
        v = rng.lognormal(0, 0.8, n) if k % 3 == 0 else rng.normal(0, 1, n)
        data[f"measure_{k:02d}"] = v * 100 + (500 if k % 3 else 0)
    for k in range(n_grade):
        data[f"grade_{k:02d}"] = rng.integers(1, 11, n).astype(float)
    for k in range(n_cat):
        levels = np.array([f"L{j}" for j in range(3 + k % 6)])
        data[f"kind_{k:02d}"] = rng.choice(levels, n)
    df = pd.DataFrame(data)
    logp = (
        11.5
        + 0.4 * np.log(df["measure_00"])
        + 0.0015 * df["measure_01"]
        - 0.001 * df["measure_02"]
        + 0.05 * df["grade_00"]
        + 0.004 * df["grade_00"] ** 2
        + 0.03 * df["grade_01"]
        + 0.1 * (df["kind_00"] == "L1")
        - 0.08 * (df["kind_01"] == "L2")
        + 0.2 * np.log(df["measure_03"])
        + 0.0008 * np.maximum(df["measure_04"] - 500, 0)
        + rng.normal(0, 0.12, n)
    )
    df.insert(0, "price", np.round(np.exp(logp), -2))
    df.insert(0, "sale_id", [f"B-{i:05d}" for i in range(n)])
    return df


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--sales", type=int, default=2500)
    ap.add_argument("--columns", type=int, default=80)
    ap.add_argument("--refit-share", type=float, default=0.1)
    args = ap.parse_args()
    df = invented_sales(args.sales, args.columns)
    start = ("log(measure_00)", "grade_00", "onehot(kind_00)")
    fit = fit_model(
        sales_from_frame(df, {"sale_id": "sale_id"}),
        ModelSpec(target="price", features=start, response="log"),
    )
    settings = SearchSettings()

    t0 = time.perf_counter()
    result = suggest(fit, settings)
    t_search = time.perf_counter() - t0
    print(f"{args.sales:,} sales x {args.columns} columns, {result.n_candidates} candidate terms")
    print(
        f"whole search (incl. hold-out search): {t_search:.1f} s, {len(result.steps)} steps, "
        f"{len(result.proposed.features)} lines, CV RMSE {result.path.start_rmse:.4f} -> "
        f"{result.path.final_rmse:.4f}, hold-out {result.honest.holdout_rmse:.4f}"
    )

    problem = build_problem(fit)
    one_step(problem, settings, problem.start, "the start model", args.refit_share)
    final = _terms_named(problem, result.path.features)
    one_step(problem, settings, final, "the proposed model", args.refit_share)


def one_step(problem, settings, terms, label: str, refit_share: float) -> None:
    """Every single change of ``terms`` by updating, and its additions by statsmodels refits."""
    from statsmodels.regression.linear_model import OLS

    features = [t.feature for t in terms]
    t0 = time.perf_counter()
    moves = rank_moves(problem, settings, features)
    t_update = time.perf_counter() - t0
    rows = _Rows(problem, np.arange(problem.n))
    folds = _folds(problem.n, settings)
    X = rows.design(terms)
    by_feature = {t.feature: t for t in problem.forms}
    adds = [m for m in moves if m.change == "add"]
    rng = np.random.default_rng(1)
    share = max(1, int(round(refit_share * len(adds))))
    picked = [
        np.hstack([rows.block(by_feature[f]) for f in adds[i].lines])
        for i in rng.choice(len(adds), share, replace=False)
    ]
    state = cv_state(X, problem.y, folds, centre=True)
    fast = state.score_add(picked)
    OLS(problem.y, X).fit()  # statsmodels' first fit pays for lazy imports: not counted
    t0 = time.perf_counter()
    worst = 0.0
    for j, block in enumerate(picked):
        Xa = np.hstack([X, block])
        out = np.empty(problem.n)
        for k in range(int(folds.max()) + 1):
            held = folds == k
            res = OLS(problem.y[~held], Xa[~held]).fit()
            out[held] = problem.y[held] - Xa[held] @ res.params
        worst = max(worst, float(np.max(np.abs(out - fast[:, j]))))
    t_refit = (time.perf_counter() - t0) * len(adds) / share
    print(
        f"one step from {label} ({X.shape[1]} design columns): {len(moves)} changes by "
        f"updating in {t_update:.2f} s; its {len(adds)} additions refitted with statsmodels "
        f"on every fold {t_refit:.1f} s (measured on {share}, scaled); largest difference in "
        f"held-out residuals {worst:.1e}"
    )


if __name__ == "__main__":
    main()
