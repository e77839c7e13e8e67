"""The sample town (Ashcombe Vale): a refit as the window runs it, and the worksheet.

    python benchmarks/bench_sample.py [--runs 20] [--profile]

Part 1, the refit (fit, value the subject, model checks: what the window runs after each
edit), through ``appraise.pipeline``, side by side with the statsmodels path a user would
write for the same three steps on the same design matrix (``OLS(...).fit(cov_type)``,
``get_prediction`` for the subject, ``OLSInfluence(...).summary_frame()`` for the checks).

Part 2, the worksheet: the market-conditions figure, the four sale plots, the content and
the paged PDF (``appraise report`` without its fit). Qt is started once before timing.

Both wall time and CPU time of the process are reported (best of ``--runs``): on a shared
machine wall time grows with the others' load, CPU time much less. ``--profile`` prints
where the worksheet's time goes. This is a script, not a test.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

SAMPLE = Path(__file__).resolve().parents[1] / "sample_data"


def best_of(fn, runs: int) -> tuple[float, float, object]:
    """Best wall and best CPU seconds of ``runs`` calls, and the last result."""
    walls, cpus, out = [], [], None
    for _ in range(runs):
        w, c = time.perf_counter(), time.process_time()
        out = fn()
        walls.append(time.perf_counter() - w)
        cpus.append(time.process_time() - c)
    return min(walls), min(cpus), out


def traced_peak(fn) -> float:
    tracemalloc.start()
    fn()
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return peak / 2**20


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=20, help="runs of the refit (worksheet: a fifth)")
    ap.add_argument("--profile", action="store_true", help="where the worksheet's time goes")
    args = ap.parse_args(argv)

    import statsmodels.api as sm
    from statsmodels.stats.outliers_influence import OLSInfluence

    from appraise import pipeline
    from appraise.engine.diagnostics import DiagnosticSettings
    from appraise.engine.valuation import prepare_subject

    sales = pipeline.load(SAMPLE / "ashcombe_sales.csv")
    spec = pipeline.read_model(SAMPLE / "ashcombe_model.toml")
    subject = pipeline.subject_frame(SAMPLE / "subject.json", sales)
    checks = DiagnosticSettings()

    def refit():
        return pipeline.analyse(sales, spec, subject=subject, diagnostics=checks)

    run = refit()
    fit = run.fit
    x0 = fit.design.build(prepare_subject(fit, subject)).matrix
    cov = {"classical": "nonrobust"}.get(fit.cov_type, fit.cov_type)

    def statsmodels_path():
        res = sm.OLS(fit.y, fit.X).fit(cov_type=cov)
        res.get_prediction(x0).summary_frame(alpha=1 - fit.spec.level)
        return OLSInfluence(sm.OLS(fit.y, fit.X).fit()).summary_frame()

    steps = {
        "fit": lambda: pipeline.fit(sales, spec),
        "value": lambda: pipeline.value(fit, subject),
        "checks": lambda: pipeline.check(fit, checks),
    }
    print(f"Ashcombe Vale sample: {fit.n} sales, {fit.p} design columns; best of {args.runs} runs")
    print(f"{'refit step':<46}{'wall ms':>9}{'CPU ms':>9}{'traced MiB':>12}")
    for name, fn in steps.items():
        w, c, _ = best_of(fn, args.runs)
        print(f"{'  ' + name:<46}{1e3 * w:>9.1f}{1e3 * c:>9.1f}{traced_peak(fn):>12.1f}")
    w, c, _ = best_of(refit, args.runs)
    print(
        f"{'appraise refit (fit + value + checks)':<46}{1e3 * w:>9.1f}{1e3 * c:>9.1f}"
        f"{traced_peak(refit):>12.1f}"
    )
    sw, sc, _ = best_of(statsmodels_path, max(args.runs // 4, 1))
    print(
        f"{'statsmodels (OLS + get_prediction + OLSInfluence)':<46}{1e3 * sw:>9.1f}"
        f"{1e3 * sc:>9.1f}{traced_peak(statsmodels_path):>12.1f}"
    )
    print(f"refit: {w / sw:.2f} of the statsmodels path's time (target: well under 100 ms)")

    from appraise.qtrender.figures import worksheet_figures
    from appraise.qtrender.grid_figures import index_figure
    from appraise.qtrender.pdf import write_pdf
    from appraise.qtrender.qtapp import ensure_app
    from appraise.report.worksheet import build_worksheet

    ensure_app()
    grid, _ = pipeline.grid(fit, SAMPLE / "subject.json")
    valuation, diagnostics = run.valuation, run.diagnostics
    with tempfile.TemporaryDirectory() as tmp:
        pdf = Path(tmp) / "worksheet.pdf"
        parts = {
            "market-conditions figure": lambda: (index_figure(grid),),
            "sale plots (4 charts, PNG)": lambda: worksheet_figures(fit, valuation),
        }
        made = {}
        print(f"{'worksheet step':<46}{'wall ms':>9}{'CPU ms':>9}")
        total_w = total_c = 0.0
        for name, fn in parts.items():
            w, c, made[name] = best_of(fn, max(args.runs // 5, 1))
            total_w, total_c = total_w + w, total_c + c
            print(f"{'  ' + name:<46}{1e3 * w:>9.0f}{1e3 * c:>9.0f}")

        def content():
            return build_worksheet(
                fit,
                valuation,
                diagnostics=diagnostics,
                figures=made["sale plots (4 charts, PNG)"],
                grid=grid,
                grid_figures=made["market-conditions figure"],
            )

        w, c, worksheet = best_of(content, max(args.runs // 5, 1))
        total_w, total_c = total_w + w, total_c + c
        print(f"{'  content (sections, tables, notices)':<46}{1e3 * w:>9.0f}{1e3 * c:>9.0f}")
        w, c, pages = best_of(lambda: write_pdf(worksheet, pdf), max(args.runs // 5, 1))
        total_w, total_c = total_w + w, total_c + c
        print(f"{'  paged PDF (' + str(pages) + ' pages)':<46}{1e3 * w:>9.0f}{1e3 * c:>9.0f}")
        print(
            f"{'worksheet in all':<46}{1e3 * total_w:>9.0f}{1e3 * total_c:>9.0f}"
            "   (target under 2,000 ms)"
        )
        if args.profile:
            import cProfile
            import pstats

            prof = cProfile.Profile()
            prof.enable()
            figs = worksheet_figures(fit, valuation)
            write_pdf(
                build_worksheet(
                    fit,
                    valuation,
                    diagnostics=diagnostics,
                    figures=figs,
                    grid=grid,
                    grid_figures=(index_figure(grid),),
                ),
                pdf,
            )
            prof.disable()
            pstats.Stats(prof).sort_stats("tottime").print_stats(15)
    return 0


if __name__ == "__main__":
    sys.exit(main())
