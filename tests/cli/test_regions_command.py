"""``appraise regions`` end to end on the sample town, checked against statsmodels run
directly on the same sales with the model written as a statsmodels formula (features
computed here with numpy: haversine distance with R = 6371.0088 km, age, months), and
against ``multipletests(method="holm")``.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from statsmodels.stats.multitest import multipletests

from appraise import pipeline
from appraise.cli import main

SAMPLE = Path(__file__).resolve().parents[2] / "sample_data"
SALES = str(SAMPLE / "ashcombe_sales.csv")
MODEL = str(SAMPLE / "ashcombe_model.toml")
SUBJECT = str(SAMPLE / "subject.json")
RTOL = 1e-8


def _run(capsys, *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture(scope="module")
def reference():
    """statsmodels on the sales the fit used, the sample model as a formula."""
    sales = pipeline.load(SALES)
    fit = pipeline.fit(sales, pipeline.read_model(MODEL))
    f, r = fit.frame, sales.roles.column
    lat = np.radians(f[r("latitude")].to_numpy(float))
    lon = np.radians(f[r("longitude")].to_numpy(float))
    lat0, lon0 = np.radians(44.0412), np.radians(-71.3021)
    a = np.sin((lat - lat0) / 2) ** 2 + np.cos(lat) * np.cos(lat0) * np.sin((lon - lon0) / 2) ** 2
    days = (f[r("sale_date")] - pd.Timestamp("2026-06-30")).dt.total_seconds() / 86400
    d = pd.DataFrame(
        {
            "price": f[r("price")].to_numpy(float),
            "la": f[r("living_area")].to_numpy(float),
            "lot": f[r("lot_area")].to_numpy(float),
            "age": 2026 - f[r("year_built")].to_numpy(float),
            "baths": f[r("bathrooms")].to_numpy(float),
            "dist": 2 * 6371.0088 * np.arcsin(np.sqrt(a)),
            "months": days.to_numpy(float) / (365.2425 / 12),
            "cond": f[r("condition")].astype(str).to_numpy(),
            "region": f[r("region")].astype(str).to_numpy(),
        }
    )
    rhs = (
        "np.log(la) + dist + I(la * dist) + age + I(age ** 2) + np.maximum(age - 90, 0)"
        " + np.log(lot) + baths + C(cond, Treatment('average')) + months"
    )
    treat = smf.ols(f"np.log(price) ~ {rhs} + C(region, Treatment('Old Mill'))", d).fit(
        cov_type="HC1", use_t=True
    )
    summ = smf.ols(f"np.log(price) ~ {rhs} + C(region, Sum)", d).fit(cov_type="HC1", use_t=True)
    return treat, summ


@pytest.fixture(scope="module")
def sample_json():
    import contextlib
    import io

    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        code = main(["regions", SALES, "--model", MODEL, "--subject", SUBJECT, "--json"])
    assert code == 0
    return json.loads(buf.getvalue())


def test_json_keys(sample_json):
    d = sample_json
    assert {
        "effects", "joint_test", "pairwise", "groups", "slopes", "strata", "centroids",
        "location_premium", "region_term", "subject_region", "warnings", "caution",
    } <= set(d)  # fmt: skip
    assert d["region_term"]["reference"] == "Old Mill"
    assert d["subject_region"] == "Tanners Row"
    e = d["effects"][0]
    assert {"level", "count", "effect", "coded", "percent", "coded_percent", "thin"} <= set(e)
    assert {"value", "se", "low", "high", "t", "p"} <= set(e["effect"])
    assert {"value", "low", "high", "kennedy"} <= set(e["percent"])
    assert {"by_region", "by_tier", "overall", "tier_edges"} <= set(d["strata"])
    assert d["area_prices"]["column"] == "Living Area (sq ft)"
    assert len(d["area_prices"]["regions"]) == 6
    assert "not an appraisal" in d["caution"]
    assert sum(e["count"] for e in d["effects"]) == d["n"] == 598  # README: 598 used


def test_effects_agree_with_statsmodels(sample_json, reference):
    treat, summ = reference
    for e in sample_json["effects"]:
        if e["reference"]:
            continue
        name = f"C(region, Treatment('Old Mill'))[T.{e['level']}]"
        got = e["effect"]
        assert got["value"] == pytest.approx(treat.params[name], rel=RTOL)
        assert got["se"] == pytest.approx(treat.bse[name], rel=RTOL)
        assert got["p"] == pytest.approx(treat.pvalues[name], rel=RTOL, abs=1e-300)
        lo, hi = treat.conf_int(alpha=0.05).loc[name]
        assert (got["low"], got["high"]) == pytest.approx((lo, hi), rel=RTOL)
    levels = sorted(e["level"] for e in sample_json["effects"])
    coded = {e["level"]: e["coded"] for e in sample_json["effects"]}
    for lv in levels[:-1]:
        name = f"C(region, Sum)[S.{lv}]"
        assert coded[lv]["value"] == pytest.approx(summ.params[name], rel=RTOL)
        assert coded[lv]["se"] == pytest.approx(summ.bse[name], rel=RTOL)


def test_joint_test_and_pairwise_agree_with_statsmodels(sample_json, reference):
    treat, _ = reference
    names = list(treat.params.index)
    region = [n for n in names if n.startswith("C(region")]
    R = np.array([[1.0 if m == n else 0.0 for m in names] for n in region])
    ft = treat.f_test(R)
    j = sample_json["joint_test"]
    assert j["f"] == pytest.approx(float(np.squeeze(ft.fvalue)), rel=RTOL)
    assert j["p_value"] == pytest.approx(float(ft.pvalue), rel=RTOL, abs=1e-300)
    raw = []
    for c in sample_json["pairwise"]:
        g = np.zeros(len(names))
        for lv, sign in ((c["first"], 1.0), (c["second"], -1.0)):
            if lv != "Old Mill":
                g[names.index(f"C(region, Treatment('Old Mill'))[T.{lv}]")] += sign
        tt = treat.t_test(g)
        assert c["difference"]["value"] == pytest.approx(float(np.squeeze(tt.effect)), rel=RTOL)
        assert c["difference"]["se"] == pytest.approx(float(np.squeeze(tt.sd)), rel=RTOL)
        raw.append(float(np.squeeze(tt.pvalue)))
    holm = multipletests(raw, method="holm")[1]
    assert [c["p_holm"] for c in sample_json["pairwise"]] == pytest.approx(
        list(holm), rel=RTOL, abs=1e-300
    )


def test_true_effects_inside_the_intervals_on_the_shipped_sample(sample_json):
    # the generator's truth (sample_data/generate.py NEIGHBOURHOODS), Old Mill = 0
    truth = {"Tanners Row": -0.06, "Heronmoor": 0.09, "Copper Hill": 0.16,
             "Westbrook Flats": -0.14, "Saltmarsh End": -0.21}  # fmt: skip
    for e in sample_json["effects"]:
        if not e["reference"]:
            assert e["effect"]["low"] <= truth[e["level"]] <= e["effect"]["high"], e["level"]


def test_text_output_marks_the_subject_and_carries_the_caution(capsys):
    code, out, _ = _run(capsys, "regions", SALES, "--model", MODEL, "--subject", SUBJECT)
    assert code == 0
    assert "Tanners Row (subject)" in out and "Old Mill (reference)" in out
    assert "Pairwise differences between regions" in out
    assert "Ratio study by region and price tier" in out
    assert "not an appraisal" in out
    assert "e-0" not in out and "e+0" not in out  # no scientific notation


def test_a_model_without_regions_is_a_user_error(capsys, tmp_path):
    model = tmp_path / "m.toml"
    model.write_text('target = "price"\nfeatures = ["living_area"]\n')
    code, _, err = _run(capsys, "regions", SALES, "--model", str(model))
    assert code == 2
    assert "no onehot" in err


def test_a_bad_level_is_refused(capsys):
    code, _, err = _run(capsys, "regions", SALES, "--model", MODEL, "--level", "95")
    assert code == 2
    assert "between 0 and 1" in err


def test_worksheet_has_a_neighbourhood_section_with_the_subject_marked(tmp_path):
    from appraise.report.content import Table
    from appraise.report.worksheet import build_worksheet

    sales = pipeline.load(SALES)
    fit = pipeline.fit(sales, pipeline.read_model(MODEL))
    ws = build_worksheet(fit, pipeline.value(fit, SUBJECT))
    section = ws.section("neighbourhoods")
    assert section is not None
    tables = {b.key: b for b in section.blocks if isinstance(b, Table)}
    assert {"region_effects", "region_pairs", "region_strata"} <= set(tables)
    marked = [r[0] for r in tables["region_effects"].rows if "(subject)" in r[0]]
    assert marked == ["Tanners Row (subject)"]
    # the linear sample model prints its effects in money
    simple = pipeline.fit(sales, pipeline.read_model(str(SAMPLE / "ashcombe_model_simple.toml")))
    linear = build_worksheet(simple, pipeline.value(simple, SUBJECT)).section("neighbourhoods")
    effects = next(b for b in linear.blocks if isinstance(b, Table) and b.key == "region_effects")
    assert any(r[2].startswith(("$", "-$")) for r in effects.rows)
    # a model without a region term gets no such section
    model = tmp_path / "plain.toml"
    model.write_text('target = "price"\nfeatures = ["living_area", "bathrooms"]\n')
    plain = pipeline.fit(sales, pipeline.read_model(model))
    assert build_worksheet(plain, pipeline.value(plain, SUBJECT)).section("neighbourhoods") is None


def test_another_onehot_term_can_be_named(capsys):
    code, out, _ = _run(
        capsys, "regions", SALES, "--model", MODEL, "--term", "Condition", "--json", "--trim"
    )
    assert code == 0
    d = json.loads(out)
    assert d["region_term"]["reference"] == "average"
    assert sorted(e["level"] for e in d["effects"]) == [
        "average", "excellent", "fair", "good", "poor",
    ]  # fmt: skip
    assert d["strata"]["overall"]["trim"] is True
    # the generator's condition effects (sample_data/generate.py), average = 0
    truth = {"poor": -0.18, "fair": -0.08, "good": 0.06, "excellent": 0.12}
    for e in d["effects"]:
        if not e["reference"]:
            assert e["effect"]["low"] <= truth[e["level"]] <= e["effect"]["high"], e["level"]


def test_location_effect_agrees_with_statsmodels_t_test(sample_json, reference):
    treat, _ = reference
    prem = sample_json["location_premium"]
    assert prem["base"] == "subject" and prem["columns"] == ["dist_km", "living_area * dist_km"]
    names = list(treat.params.index)
    area = 1840.0  # the subject's living area (sample_data/subject.json)
    for pt in prem["points"][1:]:
        g = np.zeros(len(names))
        g[names.index("dist")] = pt["km"]
        g[names.index("I(la * dist)")] = area * pt["km"]
        tt = treat.t_test(g)
        assert pt["change"] == pytest.approx(float(np.squeeze(tt.effect)), rel=RTOL)
        lo, hi = np.squeeze(tt.conf_int(alpha=0.05))
        assert (pt["low"], pt["high"]) == pytest.approx((lo, hi), rel=RTOL)
        assert pt["percent"]["value"] == pytest.approx(np.expm1(pt["change"]), rel=1e-12)


def test_an_extreme_level_is_written_out(capsys):
    code, out, _ = _run(capsys, "regions", SALES, "--model", MODEL, "--level", "0.9999")
    assert code == 0
    assert "99.99% interval" in out and "Holm-adjusted p < 0.0001" in out
    assert "e-0" not in out and "100% interval" not in out
