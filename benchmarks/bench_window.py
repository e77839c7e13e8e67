"""The desktop window with a county-size sales file: does the UI thread keep turning?

    python benchmarks/bench_window.py [--rows 1000000]

A sales file of ``--rows`` invented sales (the sample's columns: price, date, areas,
year built, baths, position, neighbourhood, condition) is written to Parquet with a
model file like the sample's. The window (offscreen Qt) opens it, fits, values and
checks; then the first keystrokes go into the sales filter; then the model is edited
(one feature dropped) and refitted. A 10 ms timer on the UI thread records the longest
gap between its ticks in each phase: the longest time the window could not repaint or
answer a click. The process's peak resident memory is printed at the end.
``--profile DIR`` writes a cProfile of the UI thread for each phase to DIR (and prints
its ten most expensive calls), to find what a gap is made of; ``--trace-stalls 0.2``
prints every thread's stack whenever the UI thread has not ticked for 0.2 s (a watchdog
that needs no lock Python holds, so it also catches a pool thread holding the GIL; for
the same reason it reads the other threads' frames while they run, and once, in a
thousand-region run, it crashed the process in the middle of a dump: use it to find a
stall, not to measure). ``--regions 1000`` makes a county of small tracts.
After the fit each result tab is shown in turn (the plots, checks, comparables and
neighbourhoods draw when shown), then the sales are sorted by price. This is a script,
not a test.
"""

from __future__ import annotations

import argparse
import cProfile
import faulthandler
import io
import os
import pstats
import resource
import sys
import tempfile
import time
from pathlib import Path

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

REGIONS = ("Old Mill", "Heronmoor", "Copper Hill", "Saltmarsh End", "Tanners Row", "Fenwick")
MODEL = """target = "price"
response = "log"
level = 0.90
effective_date = "2026-06-30"
features = [
    "log(living_area)",
    "dist_km",
    "living_area * dist_km",
    "poly(age, degree=2)",
    "log(lot_area)",
    "bathrooms",
    "onehot(condition, ref='average')",
    "onehot(region, ref='Old Mill')",
    "months",
]

[derived]
dist_km = "distance_km(latitude, longitude, 44.0412, -71.3021)"
age = "2026 - year_built"
months = "months_between(sale_date, '2026-06-30')"
"""


def region_names(count: int) -> tuple[str, ...]:
    """The six neighbourhoods, or ``count`` invented tracts ("Heronmoor 0001", ...) for a
    county of small regions (the first is the model's reference)."""
    if count <= len(REGIONS):
        return REGIONS[:count]
    return ("Old Mill",) + tuple(f"{REGIONS[k % 6]} {k:04d}" for k in range(1, count))


def make_sales(path: Path, rows: int, seed: int = 5, regions: int = 6) -> None:
    import numpy as np
    import pandas as pd

    names = region_names(regions)
    rng = np.random.default_rng(seed)
    area = rng.uniform(700, 4000, rows).round()
    region = rng.integers(0, len(names), rows)
    cond = rng.choice(["poor", "average", "good"], rows, p=[0.2, 0.5, 0.3])
    built = rng.integers(1880, 2025, rows)
    lat = 44.0412 + rng.normal(0, 0.03, rows)
    lon = -71.3021 + rng.normal(0, 0.04, rows)
    days = rng.integers(0, 1095, rows)
    log_price = (
        11.2
        + 0.55 * np.log(area)
        + 0.03 * (region % 6)
        - 0.002 * (2026 - built)
        + 0.0004 * days
        + rng.normal(0, 0.15, rows)
    )
    frame = pd.DataFrame(
        {
            "Sale ID": [f"W-{i:07d}" for i in range(rows)],
            "Sale Price": np.round(np.exp(log_price), -2),
            "Sale Date": pd.Timestamp("2023-07-01") + pd.to_timedelta(days, unit="D"),
            "Living Area (sq ft)": area,
            "Lot Size (sq ft)": rng.uniform(2000, 40000, rows).round(),
            "Year Built": built,
            "Baths": rng.integers(2, 9, rows) / 2,
            "Latitude": lat.round(6),
            "Longitude": lon.round(6),
            "Neighbourhood": np.array(names, dtype=object)[region],
            "Condition": cond,
        }
    )
    if path.suffix == ".csv":
        frame.to_csv(path, index=False)
    else:
        frame.to_parquet(path, index=False)


class StallMeter:
    """The longest gap between ticks of a 10 ms timer on the UI thread, per phase."""

    def __init__(self, trace_after: float | None = None) -> None:
        from PySide6.QtCore import QTimer

        self.trace_after = trace_after
        self.longest = 0.0
        self.ticks = 0
        self.last = time.perf_counter()
        self.timer = QTimer()
        self.timer.setInterval(10)
        self.timer.timeout.connect(self._tick)
        self.timer.start()

    def _tick(self) -> None:
        now = time.perf_counter()
        self.longest = max(self.longest, now - self.last)
        self.last = now
        self.ticks += 1
        if self.trace_after is not None:  # re-armed on every tick: fires only in a stall
            faulthandler.dump_traceback_later(self.trace_after, file=sys.stderr)

    def reset(self) -> None:
        self.longest, self.last = 0.0, time.perf_counter()


def wait_until(app, done, timeout: float) -> float:
    t0 = time.perf_counter()
    while not done():
        app.processEvents()
        time.sleep(0.002)
        if time.perf_counter() - t0 > timeout:
            raise SystemExit("timed out")
    return time.perf_counter() - t0


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=1_000_000)
    ap.add_argument("--timeout", type=float, default=900.0)
    ap.add_argument(
        "--regions", type=int, default=6, help="neighbourhoods (6) or small tracts (e.g. 1000)"
    )
    ap.add_argument("--format", choices=["parquet", "csv"], default="parquet")
    ap.add_argument("--profile", type=Path, default=None, help="write a UI-thread profile here")
    ap.add_argument(
        "--trace-stalls", type=float, default=None, help="print stacks after a gap this long (s)"
    )
    args = ap.parse_args(argv)

    from PySide6.QtCore import QSettings, Qt

    from appraise.engine.modelspec import parse_model
    from appraise.gui.main_window import MainWindow
    from appraise.gui.preferences import Preferences
    from appraise.gui.session import Session
    from appraise.qtrender.qtapp import ensure_app

    app = ensure_app()
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        sales_path = folder / f"county_sales.{args.format}"
        make_sales(sales_path, args.rows, regions=args.regions)
        model_path = folder / "county_model.toml"
        model_path.write_text(MODEL, encoding="utf-8")
        prefs = Preferences(QSettings(str(folder / "prefs.ini"), QSettings.Format.IniFormat))
        session = Session()
        window = MainWindow(session, prefs)
        window.show()
        meter = StallMeter(args.trace_stalls)
        app.processEvents()
        print(f"window with {args.rows:,} sales (offscreen Qt); longest UI-thread gap per phase")
        print(f"{'phase':<52}{'seconds':>9}{'longest gap ms':>16}")

        def phase(name: str, start, done) -> None:
            profile = cProfile.Profile() if args.profile is not None else None
            meter.reset()
            if profile is not None:
                profile.enable()
            start()
            took = wait_until(app, done, args.timeout)
            ticks = meter.ticks  # one more tick, so that a stall at the very end counts
            wait_until(app, lambda: meter.ticks > ticks, args.timeout)
            if profile is not None:
                profile.disable()
            print(f"{name:<52}{took:>9.1f}{1e3 * meter.longest:>16.0f}", flush=True)
            if profile is not None:
                args.profile.mkdir(parents=True, exist_ok=True)
                slug = "".join(ch if ch.isalnum() else "_" for ch in name.split(" (")[0])[:40]
                profile.dump_stats(str(args.profile / f"{slug}.prof"))
                out = io.StringIO()
                stats = pstats.Stats(profile, stream=out)
                stats.sort_stats("tottime").print_stats(10)
                print(out.getvalue())

        def quiet() -> bool:
            """No work left anywhere: the session's, the neighbourhood analysis, the
            sales table's search index, the plots' points."""
            return (
                session.pending_tasks == 0
                and window.regions_view.runner.pending == 0
                and not window.sales_view.model.indexing
                and not window.sales_view.model.searching
                and not window.plots_view.collecting
            )

        phase(
            "open, read, fit, value, checks",
            lambda: session.load_sales(sales_path, model_path=model_path),
            lambda: session.sales is not None and session.fit is not None and quiet(),
        )
        view = window.sales_view
        phase(
            "first filter keystrokes ('heron') until filtered",
            lambda: view.filter_edit.setText("heron"),
            lambda: view.model.rowCount() < args.rows and quiet(),
        )
        phase(
            "clear the filter",
            lambda: view.filter_edit.setText(""),
            lambda: view.model.rowCount() == session.sales.n_used,
        )

        class settled:  # noqa: N801 (reads as a condition)
            """Done once the work is over and ``seconds`` have passed since the first ask
            (a tab drawing when shown)."""

            def __init__(self, seconds: float) -> None:
                self.seconds, self.t0 = seconds, None

            def __call__(self) -> bool:
                self.t0 = time.perf_counter() if self.t0 is None else self.t0
                waited = time.perf_counter() - self.t0
                return waited > self.seconds and quiet()

        for name in ("plots_view", "diagnostics_view", "comparables_view", "regions_view"):
            widget = getattr(window, name)
            tab = widget
            while tab is not None and window.centre_tabs.indexOf(tab) < 0:
                tab = tab.parentWidget()  # a scrolling tab holds the view in a viewport
            label = window.centre_tabs.tabText(window.centre_tabs.indexOf(tab)).replace("&", "")
            done = settled(1.0)
            phase(
                f"show the {label} tab", lambda t=tab: window.centre_tabs.setCurrentWidget(t), done
            )
        header = view.model.headerData
        price = next(
            c
            for c in range(view.model.columnCount())
            if header(c, Qt.Orientation.Horizontal, Qt.ItemDataRole.DisplayRole) == "Sale Price"
        )
        phase(
            "sort the sales by price (descending)",
            lambda: view.table.sortByColumn(price, Qt.SortOrder.DescendingOrder),
            settled(0.5),
        )
        spec = parse_model(MODEL.replace('    "bathrooms",\n', ""))
        fit_before = session.fit
        phase(
            "edit the model (drop a feature): refit, value, checks",
            lambda: (session.set_model(spec), session.refit_now()),
            lambda: session.fit is not fit_before and quiet(),
        )
        meter.timer.stop()
        faulthandler.cancel_dump_traceback_later()
        window.setWindowModified(False)  # no "save the valuation?" box to wait on
        window.close()
        session.shutdown()
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024  # KiB on Linux
    print(f"peak resident memory of the process: {peak:,.0f} MiB")
    return 0


if __name__ == "__main__":
    sys.exit(main())
