"""The model file from the window: save, open (undoable), a title, compare with another.

References: the TOML written is read back by the engine's own model-file reader; the
comparison is the one `appraise compare` prints (engine.diagnostics.compare_models on the
same fits), and the other model's coefficients are statsmodels OLS run directly.
"""

from __future__ import annotations

import numpy as np
import statsmodels.api as sm
from conftest import WAIT_MS, open_and_wait
from numpy.testing import assert_allclose

from appraise import pipeline
from appraise.engine.diagnostics import compare_models
from appraise.engine.modelspec import load_model


def _settle(qtbot, s):
    qtbot.waitUntil(lambda: s.pending_tasks == 0 and not s.is_busy, timeout=WAIT_MS)


def test_title_save_and_open_round_trip_and_undo(qtbot, window, sample_copy, tmp_path):
    s = window.session
    open_and_wait(qtbot, window, sample_copy, companions=True)
    window.model_editor.title.setText("Ashcombe Vale, checked")
    _settle(qtbot, s)
    assert s.spec.title == "Ashcombe Vale, checked"
    saved = tmp_path / "mine_model.toml"
    assert window.model_file.save_to(saved)
    assert load_model(saved) == s.spec
    # a smaller model from a file replaces it, as one step of the history
    small = tmp_path / "small_model.toml"
    small.write_text(
        'title = "size only"\ntarget = "price"\nresponse = "log"\nfeatures = ["log(living_area)"]\n',
        encoding="utf-8",
    )
    before = s.spec
    with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
        assert window.model_file.open_model(small)
    _settle(qtbot, s)
    assert s.spec.features == ("log(living_area)",)
    assert window.model_editor.title.text() == "size only"
    window.undo_action.trigger()
    _settle(qtbot, s)
    assert s.spec == before
    assert window.model_file.path == small  # save now writes to the file opened last


def test_compare_shows_what_appraise_compare_prints(qtbot, window, sample_copy, tmp_path):
    s = window.session
    open_and_wait(qtbot, window, sample_copy, companions=True)
    _settle(qtbot, s)
    other = tmp_path / "size_model.toml"
    other.write_text(
        'target = "price"\nresponse = "log"\nfeatures = ["log(living_area)", "bathrooms"]\n',
        encoding="utf-8",
    )
    window.model_file.compare_with(other)
    qtbot.waitUntil(lambda: window.model_file.dialog is not None, timeout=WAIT_MS)
    dialog = window.model_file.dialog
    assert dialog.isVisible() and dialog.table.rowCount() == 2
    other_fit = pipeline.fit(s.sales, load_model(other), s.user_exclusions)
    direct = compare_models(
        [s.fit, other_fit], ["this model", "size_model.toml"], s.diagnostic_settings
    )
    shown = dialog.comparison
    assert [r.label for r in shown.rows] == [r.label for r in direct.rows]
    assert_allclose(
        [r.loo_rmse for r in shown.rows], [r.loo_rmse for r in direct.rows], rtol=1e-12, atol=0
    )
    # the fuller model predicts the sample better out of sample
    assert shown.rows[0].label == "this model"
    assert dialog.table.item(0, 1).text() == "this model"
    assert dialog.table.item(0, 5).text().startswith("$")
    # the other model itself is statsmodels' fit on the same sales
    used = s.sales.frame.set_index("_row").loc[other_fit.rows]
    X = sm.add_constant(
        np.column_stack([np.log(used["Living Area (sq ft)"]), used["Baths"]]).astype(float)
    )
    ref = sm.OLS(np.log(used["Sale Price"].to_numpy(float)), X).fit()
    assert_allclose([t.coef for t in other_fit.terms], ref.params, rtol=1e-8, atol=0)
