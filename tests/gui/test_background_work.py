"""Loading and fitting run on workers: the window keeps responding, stale work is dropped.

These are behavioural checks (does the event loop keep turning, which result lands),
not timings. The 50,000-sale table is generated here with numpy.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from conftest import WAIT_MS
from PySide6.QtCore import QTimer
from PySide6.QtWidgets import QProgressDialog, QPushButton

from appraise.engine.modelspec import ModelSpec

N_BIG = 50_000
REGIONS = ("North End", "Riverside", "Hilltop", "Old Town", "Meadows")


@pytest.fixture(scope="module")
def big_sales(tmp_path_factory):
    """50,000 invented sales with a known log-linear price, saved as Parquet."""
    rng = np.random.default_rng(20240611)
    area = rng.uniform(700, 4000, N_BIG).round()
    lot = rng.uniform(2000, 40000, N_BIG).round()
    baths = rng.integers(1, 5, N_BIG)
    region = rng.choice(REGIONS, N_BIG)
    shift = (
        pd.Series(region)
        .map(dict(zip(REGIONS, (0.0, 0.05, 0.12, -0.04, 0.02), strict=True)))
        .to_numpy()
    )
    log_price = (
        11
        + 0.6 * np.log(area)
        + 0.1 * np.log(lot)
        + 0.04 * baths
        + shift
        + rng.normal(0, 0.15, N_BIG)
    )
    frame = pd.DataFrame(
        {
            "Sale ID": [f"G-{i:05d}" for i in range(N_BIG)],
            "Sale Price": np.round(np.exp(log_price), -2),
            "Living Area": area,
            "Lot Size": lot,
            "Baths": baths,
            "Neighbourhood": region,
        }
    )
    path = tmp_path_factory.mktemp("big") / "big_sales.parquet"
    frame.to_parquet(path, index=False)
    return path


BIG_SPEC = ModelSpec(
    target="price",
    features=("log(living_area)", "log(lot_area)", "bathrooms", "onehot(region)"),
    response="log",
)


def test_window_stays_responsive_while_50000_sales_refit(qtbot, window, big_sales):
    s = window.session
    with qtbot.waitSignals([s.loadFinished, s.fitFinished], timeout=WAIT_MS):
        s.load_sales(big_sales)
    assert s.sales.n_used == N_BIG
    assert window.sales_view.model.rowCount() == N_BIG
    qtbot.waitUntil(lambda: s.pending_tasks == 0, timeout=WAIT_MS)

    ticks: list[int] = []
    counting = {"on": False}
    timer = QTimer()
    timer.setInterval(20)
    timer.timeout.connect(lambda: ticks.append(1) if counting["on"] else None)
    timer.start()

    def started() -> None:
        counting["on"] = True
        ticks.clear()

    s.fitStarted.connect(started)
    s.fitFinished.connect(lambda _f: counting.update(on=False))
    try:
        with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
            s.set_model(BIG_SPEC)
    finally:
        timer.stop()
    assert s.fit.n == N_BIG and s.fit.spec == BIG_SPEC
    # the UI thread kept turning its event loop while the fit ran elsewhere
    assert len(ticks) > 0
    qtbot.waitUntil(lambda: s.pending_tasks == 0, timeout=WAIT_MS)


def test_cancelled_load_is_discarded(qtbot, window, big_sales):
    s = window.session
    s.load_sales(big_sales)
    # the load cannot have reported yet: its result is queued for this thread's event loop
    window._show_progress()
    dialog = window.findChild(QProgressDialog)
    assert dialog is not None and dialog.isVisible()
    cancel = dialog.findChild(QPushButton)
    with qtbot.waitSignal(s.loadCancelled, timeout=WAIT_MS):
        cancel.click()
    assert not s.is_loading
    qtbot.waitUntil(lambda: s.pending_tasks == 0, timeout=WAIT_MS)
    assert s.sales is None  # the finished read was dropped
    assert window.findChild(QProgressDialog) is None or not dialog.isVisible()


def test_stale_fit_never_lands(qtbot, session, big_sales):
    s = session
    with qtbot.waitSignals([s.loadFinished, s.fitFinished], timeout=WAIT_MS):
        s.load_sales(big_sales)
    qtbot.waitUntil(lambda: s.pending_tasks == 0, timeout=WAIT_MS)
    landed: list[ModelSpec] = []
    s.fitFinished.connect(lambda f: landed.append(f.spec))
    running: list[int] = []
    reported: list[int] = []
    s._fit_signals.started.connect(running.append)  # the worker has begun this generation
    s._fit_signals.stage.connect(lambda gen, stage, _p: reported.append(gen))
    first = BIG_SPEC
    second = ModelSpec(target="price", features=("living_area", "bathrooms"))
    s.set_model(first)
    s.refit_now()
    # once the first fit runs on a worker it cannot be taken back: it will report, late
    qtbot.waitUntil(lambda: len(running) == 1, timeout=WAIT_MS)
    s.set_model(second)
    s.refit_now()
    qtbot.waitUntil(lambda: s.pending_tasks == 0, timeout=WAIT_MS)
    assert running[0] in reported  # the stale fit did report...
    assert landed == [second]  # ...and was dropped
    assert s.fit.spec == second


def test_edits_in_a_burst_lead_to_one_refit(qtbot, window, sample_copy):
    s = window.session
    with qtbot.waitSignals([s.loadFinished, s.fitFinished], timeout=WAIT_MS):
        window.open_path(sample_copy, companions=False)
    qtbot.waitUntil(lambda: s.pending_tasks == 0, timeout=WAIT_MS)
    starts: list[int] = []
    s.fitStarted.connect(lambda: starts.append(1))
    editor = window.model_editor
    with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
        for percent in (91, 92, 93, 94, 95):  # five valid models in quick succession
            editor.level.setValue(percent)
        assert s.spec.level == 0.95
    assert starts == [1]
    assert s.fit.spec.level == 0.95
    qtbot.waitUntil(lambda: s.pending_tasks == 0, timeout=WAIT_MS)


def test_load_reports_measured_progress(qtbot, window, big_sales):
    s = window.session
    seen: list[tuple[int, str]] = []
    s.loadProgress.connect(lambda pct, msg: seen.append((pct, msg)))
    with qtbot.waitSignal(s.loadFinished, timeout=WAIT_MS):
        s.load_sales(big_sales)
    percents = [p for p, _ in seen]
    assert percents == sorted(percents) and percents[0] == 0 and percents[-1] == 100
    assert any("cleaning column 'Living Area'" in m for _, m in seen)
    qtbot.waitUntil(lambda: s.pending_tasks == 0, timeout=WAIT_MS)


def test_cancel_stops_the_reader_itself(big_sales):
    # The worker function, without Qt: once the job's cancel flag is set, the next
    # progress step raises Cancelled instead of reading on to the end.
    from appraise.engine.errors import Cancelled
    from appraise.gui.workers import LoadJob, run_load_job

    job = LoadJob(big_sales)
    stages: list[float] = []

    def report(stage, payload):
        stages.append(payload[0])
        if len(stages) == 3:
            job.cancel.set()

    with pytest.raises(Cancelled):
        run_load_job(job, report)
    assert len(stages) == 3 and max(stages) < 1.0


def test_shutdown_stops_a_running_read_and_waits_for_it(qtbot, big_sales):
    # Closing the window while a file is being read: the read is stopped at its next
    # step and no pool thread is left reporting to a session about to be destroyed.
    from appraise.gui.session import Session

    s = Session()
    started: list[int] = []
    s._load_signals.started.connect(started.append)
    s.load_sales(big_sales)
    qtbot.waitUntil(lambda: len(started) == 1, timeout=WAIT_MS)  # running on its thread
    s.shutdown()
    assert s._pool.activeThreadCount() == 0
    assert s.sales is None  # nothing of the stopped read landed
