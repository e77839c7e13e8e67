"""``appraise diagnose`` and ``appraise compare`` end to end on the shipped sample data."""

from __future__ import annotations

import contextlib
import io
import json
from pathlib import Path

import numpy as np
import pytest
import statsmodels.api as sm
from numpy.testing import assert_allclose
from statsmodels.stats.outliers_influence import OLSInfluence

from appraise.cli import main
from appraise.engine.modelspec import parse_model

SAMPLE = Path(__file__).resolve().parents[2] / "sample_data"
SALES = str(SAMPLE / "ashcombe_sales.csv")
MODEL = str(SAMPLE / "ashcombe_model.toml")
SIMPLE = str(SAMPLE / "ashcombe_model_simple.toml")


def _run(capsys, *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture(scope="module")
def diag_json():
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        code = main(["diagnose", SALES, "--model", MODEL, "--json", "--folds", "5", "--seed", "2"])
    assert code == 0
    return json.loads(buf.getvalue())


def test_json_sections_and_keys(diag_json):
    d = diag_json
    assert "not an appraisal" in d["caution"]
    assert {"response", "n", "p", "level", "settings", "thresholds", "sales", "flagged", "terms",
            "columns", "overall", "warnings"} <= set(d)  # fmt: skip
    assert d["response"] == "log" and d["level"] == 0.90  # ashcombe_model.toml
    assert d["settings"]["folds"] == 5 and d["settings"]["seed"] == 2
    assert d["overall"]["accuracy"]["kfold"]["folds"] == 5
    assert len(d["sales"]) == d["n"]
    sale_keys = {"row", "sale_id", "price", "leverage", "resid", "student_internal",
                 "student_external", "cooks_distance", "dffits", "loo_prediction", "loo_error",
                 "loo_low", "loo_high", "in_loo_interval", "loo_ratio", "kfold_prediction",
                 "flags"}  # fmt: skip
    assert set(d["sales"][0]) == sale_keys
    names = [m["name"] for m in d["overall"]["ratio_study"]["measures"]]
    assert names == ["median", "mean", "weighted_mean", "cod", "prd", "prb", "ppe10"]


def test_json_agrees_with_the_fit_and_the_hat_trace(capsys, diag_json):
    code, out, _ = _run(capsys, "fit", SALES, "--model", MODEL, "--json")
    assert code == 0
    assert json.loads(out)["n"] == diag_json["n"]
    # The leverages sum to p: the hat matrix is a projection of rank p (its trace).
    h = np.array([s["leverage"] for s in diag_json["sales"]])
    assert_allclose(h.sum(), diag_json["p"], rtol=1e-9)
    # The ratio on each sale is its LOO value over its price.
    s0 = diag_json["sales"][0]
    assert_allclose(s0["loo_ratio"], s0["loo_prediction"] / s0["price"], rtol=1e-12)


def test_every_exclusion_block_pastes_into_the_model_file(diag_json):
    text = Path(MODEL).read_text()
    for f in diag_json["flagged"]:
        spec = parse_model(text + "\n" + f["model_file_line"])
        assert spec.exclude[-1].sale_id == f["sale_id"]


def test_excluding_a_flagged_sale_takes_it_out(tmp_path, capsys, diag_json):
    first = diag_json["flagged"][0]
    model = tmp_path / "m.toml"
    model.write_text(Path(MODEL).read_text() + "\n" + first["model_file_line"])
    code, out, _ = _run(capsys, "diagnose", SALES, "--model", str(model), "--json")
    assert code == 0
    d = json.loads(out)
    assert d["n"] == diag_json["n"] - 1
    assert first["row"] not in {s["row"] for s in d["sales"]}


def test_text_output(capsys):
    code, out, _ = _run(capsys, "diagnose", SALES, "--model", MODEL, "--trim")
    assert code == 0
    for needle in ("Sales to look at", "[[exclude]]", "Redundant terms", "condition number",
                   "Breusch-Pagan", "Jarque-Bera", "leave-one-out", "Ratio study", "COD",
                   "PRB", "range 0.98 to 1.03", "not an appraisal"):  # fmt: skip
        assert needle in out, needle
    assert "no trim" not in out  # --trim was given


def test_missing_model_is_a_user_error(capsys, tmp_path):
    code, out, err = _run(capsys, "diagnose", SALES, "--model", str(tmp_path / "none.toml"))
    assert code == 2
    assert "none.toml" in err and "Traceback" not in err


def test_bad_fold_count_is_a_user_error(capsys):
    code, _, err = _run(capsys, "diagnose", SALES, "--model", MODEL, "--folds", "1")
    assert code == 2 and "folds" in err


def test_compare_ranks_and_reports(capsys):
    code, out, _ = _run(capsys, "compare", SALES, "--model", MODEL, "--model", SIMPLE, "--json")
    assert code == 0
    d = json.loads(out)
    models = d["models"]
    assert [m["rank"] for m in models] == [1, 2]
    rmse = [m["loo_rmse"] for m in models]
    assert rmse == sorted(rmse)
    assert {m["file"] for m in models} == {MODEL, SIMPLE}
    assert any("price scale" in w for w in d["warnings"])  # one log, one linear response
    code, out, _ = _run(capsys, "compare", SALES, "--model", MODEL, "--model", SIMPLE)
    assert code == 0 and "ashcombe_model_simple.toml" in out and "LOO RMSE" in out


def test_loo_leverage_of_a_small_model_matches_statsmodels(capsys, tmp_path):
    # A two-term linear model whose design is easy to rebuild from the JSON alone.
    model = tmp_path / "small.toml"
    model.write_text('target = "price"\nfeatures = ["living_area"]\n')
    code, out, _ = _run(capsys, "diagnose", SALES, "--model", str(model), "--json")
    assert code == 0
    d = json.loads(out)
    price = np.array([s["price"] for s in d["sales"]])
    resid = np.array([s["resid"] for s in d["sales"]])
    fitted = price - resid
    # With one regressor the fitted line is affine in living area, so the design can be
    # rebuilt from the fitted values themselves: [1, fitted] spans the same space.
    X = sm.add_constant(fitted)
    ref = OLSInfluence(sm.OLS(price, X).fit())  # statsmodels, same column space
    assert_allclose([s["leverage"] for s in d["sales"]], ref.hat_matrix_diag, rtol=1e-6)
    assert_allclose([s["cooks_distance"] for s in d["sales"]], ref.cooks_distance[0], rtol=1e-6)
