"""The neighbourhood section: region effects, tests, groups, slopes and the ratio study by
stratum, as plain worksheet content (tables of display strings with the raw values behind).

The same tables serve the worksheet, the terminal text (:mod:`.regions_text`) and the
desktop tab, so every front end prints the same figures in the same words. The subject's
region is marked in every table where it appears.
"""

from __future__ import annotations

from ..engine.regions import (
    NICE_STEPS_KM,
    Estimate,
    Percent,
    RegionAnalysis,
    alpha_text,
    analyse_regions,
    has_region_term,
)
from .content import Block, Facts, Notice, Paragraph, Table
from .labels import without_source_tags
from .numbers import MISSING, fixed, integer, money, money_rate, number, pvalue, signed_percent

TIER_JUDGED = ("median", "cod")
"""Measures read against the ranges within a price tier (see :func:`strata_table`)."""

SUBJECT_MARK = " (subject)"
REFERENCE_MARK = " (reference)"

EFFECT_NOTE = (
    "Effects hold every other feature of the model fixed: the same house, in another region. "
    "Intervals at {level}; p values and intervals use the fit's {cov} covariance."
)


def level_text(level: float) -> str:
    """An interval level as a percentage with the decimals it needs: 95%, 99.9%."""
    return alpha_text(100 * level) + "%"


def level_name(ra: RegionAnalysis, level: str) -> str:
    """A region's label with its marks: reference, subject."""
    out = level
    if level == ra.term.reference:
        out += REFERENCE_MARK
    if ra.subject_region is not None and level == ra.subject_region:
        out += SUBJECT_MARK
    return out


def _pct(p: Percent | None) -> str:
    return MISSING if p is None else signed_percent(100 * p.value, 3)


def _pct_interval(p: Percent | None) -> str:
    if p is None:
        return MISSING
    return f"{signed_percent(100 * p.low, 3)} to {signed_percent(100 * p.high, 3)}"


def _amount(ra: RegionAnalysis, x: float, currency: str) -> str:
    return number(x, 4) if ra.response == "log" else money(x, currency)


def _interval(ra: RegionAnalysis, e: Estimate, currency: str) -> str:
    if e.low != e.low:  # NaN
        return MISSING
    return f"{_amount(ra, e.low, currency)} to {_amount(ra, e.high, currency)}"


def _raw(e: Estimate | Percent) -> str:
    """An interval's bounds at full precision, for the spreadsheet export."""
    return f"{e.low!r} to {e.high!r}"


def effects_table(ra: RegionAnalysis, currency: str = "$") -> Table:
    """One row per region, lowest effect first.

    For a log response the coefficient and its SE share a cell and the interval is given as
    percentages only (the log-scale bounds are in the export and the JSON), so the table
    fits a printed page.
    """
    log = ra.response == "log"
    if log:
        cols = [
            "Region",
            "Sales",
            "Effect (SE)",
            "p",
            "% effect",
            f"{level_text(ra.level)} interval",
        ]
        cols += ["Kennedy", "vs average", "Letters"]
    else:
        cols = ["Region", "Sales", "Effect", "SE", f"{level_text(ra.level)} interval", "p"]
        cols += ["vs average", "Letters"]
    rows, values = [], []
    for e in ra.sorted_effects():
        name = level_name(ra, e.level) + (" (thin)" if e.thin else "")
        if not e.estimable and not e.reference:
            name += " (one sale: not estimable)"
        ref = e.reference
        p = MISSING if ref else pvalue(e.effect.p)
        letters = ra.groups.letters_of(e.level)
        if log:
            se = "" if ref or e.effect.se != e.effect.se else f" ({number(e.effect.se, 3)})"
            row = [
                name,
                integer(e.count),
                number(e.effect.value, 4) + se,
                p,
                _pct(e.percent),
                MISSING if ref else _pct_interval(e.percent),
                MISSING if ref or e.percent is None else _pct_kennedy(e.percent),
                _pct(e.coded_percent),
                letters,
            ]
            val = [
                e.level,
                e.count,
                e.effect.value,
                e.effect.p,
                e.percent.value if e.percent else None,
                _raw(e.percent) if e.percent else None,
                e.percent.kennedy if e.percent else None,
                e.coded.value,
                letters,
            ]
        else:
            row = [
                name,
                integer(e.count),
                money(e.effect.value, currency),
                MISSING if ref else money(e.effect.se, currency),
                MISSING if ref else _interval(ra, e.effect, currency),
                p,
                money(e.coded.value, currency),
                letters,
            ]
            val = [
                e.level,
                e.count,
                e.effect.value,
                e.effect.se,
                _raw(e.effect),
                e.effect.p,
                e.coded.value,
                letters,
            ]
        rows.append(tuple(row))
        values.append(tuple(val))
    return Table(
        "region_effects",
        "Region effects against " + ra.term.reference,
        tuple(cols),
        tuple(rows),
        tuple(values),
        ("l",) + ("r",) * (len(cols) - 2) + ("l",),
        note=EFFECT_NOTE.format(level=level_text(ra.level), cov=ra.cov_type)
        + (
            " Effect: the coefficient (log scale) with its SE; % effect = e^b - 1 with its "
            "interval; Kennedy (1981): e^(b - Var(b)/2) - 1."
            if log
            else ""
        )
        + " 'vs average': the effect against the unweighted average of all regions. Regions "
        "sharing a letter cannot be told apart.",
    )


def _pct_kennedy(p: Percent) -> str:
    return MISSING if p.kennedy is None else signed_percent(100 * p.kennedy, 3)


def pairwise_table(ra: RegionAnalysis, currency: str = "$") -> Table:
    """Every pair of regions: difference, interval, raw and Holm-adjusted p."""
    log = ra.response == "log"
    cols = (
        "First",
        "Second",
        "Difference",
        f"{level_text(ra.level)} interval",
        "p",
        "p (Holm)",
        "Differ",
    )
    rows, values = [], []
    for c in ra.pairwise:
        diff = _pct(c.percent) if log else money(c.difference.value, currency)
        interval = _pct_interval(c.percent) if log else _interval(ra, c.difference, currency)
        rows.append(
            (
                level_name(ra, c.first),
                level_name(ra, c.second),
                diff,
                interval,
                pvalue(c.difference.p),
                pvalue(c.p_holm),
                "yes" if c.differ else "no",
            )
        )
        values.append(
            (
                c.first,
                c.second,
                c.difference.value,
                _raw(c.difference),
                c.difference.p,
                c.p_holm,
                c.differ,
            )
        )
    return Table(
        "region_pairs",
        "Pairwise differences between regions",
        cols,
        tuple(rows),
        tuple(values),
        ("l", "l", "r", "r", "r", "r", "l"),
        note=(
            "Differences are first minus second"
            + (" as % of the second's price" if log else "")
            + f"; 'Differ' when the Holm-adjusted p is below {alpha_text(1 - ra.level)}."
        ),
    )


def slope_tables(ra: RegionAnalysis, currency: str = "$") -> list[Table]:
    """One table per ``x * onehot(region)`` feature: the slope of x in each region."""
    out = []
    log = ra.response == "log"
    for k, s in enumerate(ra.slopes):
        cols = ["Region", "Sales", "Slope", "SE", f"{level_text(ra.level)} interval"]
        has_ppu = log and any(r.price_per_unit is not None for r in s.slopes)
        if has_ppu:
            cols += ["Price per unit at median price", "interval"]
        rows, values = [], []
        for r in s.slopes:
            fmt = (lambda v: number(v, 4)) if log else (lambda v: money_rate(v, currency))
            row = [
                level_name(ra, r.level),
                integer(r.count),
                fmt(r.slope.value),
                fmt(r.slope.se),
                f"{fmt(r.slope.low)} to {fmt(r.slope.high)}",
            ]
            val: list = [r.level, r.count, r.slope.value, r.slope.se, _raw(r.slope)]
            if has_ppu:
                p = r.price_per_unit
                row += [
                    MISSING if p is None else money_rate(p.value, currency),
                    MISSING
                    if p is None
                    else f"{money_rate(p.low, currency)} to {money_rate(p.high, currency)}",
                ]
                val += [None if p is None else p.value, None if p is None else _raw(p)]
            rows.append(tuple(row))
            values.append(tuple(val))
        t = s.equal_slopes
        out.append(
            Table(
                f"region_slopes_{k + 1}",
                f"Slope of {s.factor} by region ({s.unit})",
                tuple(cols),
                tuple(rows),
                tuple(values),
                ("l",) + ("r",) * (len(cols) - 1),
                note=f"From {s.expression}. Same slope everywhere: F = {fixed(t.statistic, 2)} "
                f"on {t.df_num} and {t.df_den} df, p {pvalue(t.p_value)}."
                + (
                    " Price per unit = slope x the region's median sale price (median held fixed)."
                    if has_ppu
                    else ""
                ),
            )
        )
    return out


def area_price_table(ra: RegionAnalysis, currency: str = "$") -> Table | None:
    """Price per unit of living area at each region's typical sale."""
    if not ra.area_prices:
        return None
    rows, values = [], []
    for a in sorted(ra.area_prices, key=lambda a: a.per_unit.value):
        e = a.per_unit
        rows.append(
            (
                level_name(ra, a.level),
                a.base,
                integer(a.area),
                money(a.value, currency),
                money_rate(e.value, currency),
                money_rate(e.se, currency),
                f"{money_rate(e.low, currency)} to {money_rate(e.high, currency)}",
            )
        )
        values.append((a.level, a.base, a.area, a.value, e.value, e.se, _raw(e)))
    return Table(
        "region_area_prices",
        f"Price per unit of living area ({ra.area_column}) by region",
        (
            "Region",
            "Typical sale",
            "Area",
            "Estimate",
            "Per unit",
            "SE",
            f"{level_text(ra.level)} interval",
        ),
        tuple(rows),
        tuple(values),
        ("l", "l", "r", "r", "r", "r", "r"),
        note="The model's change in price for one more unit of living area, at the sale with "
        "the median fitted value in each region (every term reading the area counts; "
        "delta method for a log response, Duan's factor held fixed).",
    )


def strata_table(ra: RegionAnalysis) -> Table | None:
    """The leave-one-out ratio study overall, by region and by price tier."""
    st = ra.strata
    if st is None:
        return None
    names = ("median", "cod", "prd", "prb")
    cols = ("Stratum", "Sales", "Median ratio", "COD", "PRD", "PRB", "Outside the ranges")
    rows, values = [], []

    def add(label: str, study, thin: bool, judged: tuple[str, ...] = names) -> None:
        ms = [study.get(n) for n in names]
        outside = [m.label for m in ms if m.verdict == "outside" and m.name in judged]
        rows.append(
            (
                label + (" (thin)" if thin else ""),
                integer(study.n),
                fixed(ms[0].value, 3),
                fixed(ms[1].value, 1),
                fixed(ms[2].value, 3),
                fixed(ms[3].value, 3),
                "too few sales to judge" if thin else (", ".join(outside) or "none"),
            )
        )
        values.append((label, study.n, *[m.value for m in ms], ", ".join(outside)))

    add("All sales", st.overall, False)
    for s in st.by_region:
        add("Region " + level_name(ra, s.label), s.study, s.thin)
    for s in st.by_tier:
        lo = "" if s.price_low is None else money(s.price_low)
        hi = "" if s.price_high is None else money(s.price_high)
        span = f"up to {hi}" if not lo else (f"above {lo}" if not hi else f"{lo} to {hi}")
        add(f"Price {s.label} ({span})", s.study, s.thin, TIER_JUDGED)
    m = {x.name: x for x in st.overall.measures}
    ranges = "; ".join(f"{m[n].label} {m[n].range_text()}" for n in names if m[n].range_text())
    return Table(
        "region_strata",
        "Ratio study by region and price tier (leave-one-out values)",
        cols,
        tuple(rows),
        tuple(values),
        ("l", "r", "r", "r", "r", "r", "l"),
        note=f"Ranges ({without_source_tags(m['cod'].source)}): {ranges}. Tiers: {st.tier_method}. "
        f"A stratum with fewer than {st.min_sales} sales is thin. Tiers cut by sale price lean "
        "high in the lowest tier and low in the highest even for a fair model; within a tier "
        "the price range is cut short, so its PRD and PRB are shown but not judged.",
    )


def region_blocks(ra: RegionAnalysis, currency: str = "$") -> tuple[Block, ...]:
    """Blocks of the neighbourhood section."""
    j = ra.joint
    facts = [
        ("Region term", ra.term.expression),
        ("Reference region", ra.term.reference),
        ("Regions", integer(len(ra.term.levels))),
        (
            "All region effects zero?",
            f"F = {fixed(j.statistic, 2)} on {j.df_num} and {j.df_den} df, p {pvalue(j.p_value)}",
        ),
        ("Groups that cannot be told apart", _groups_text(ra)),
    ]
    if ra.subject_region is not None:
        facts.insert(2, ("Subject's region", ra.subject_region))
    blocks: list[Block] = [Facts(tuple(facts)), effects_table(ra, currency)]
    blocks.append(Paragraph("How the groups are formed: " + ra.groups.method + "."))
    if ra.pairwise:
        blocks.append(pairwise_table(ra, currency))
    area = area_price_table(ra, currency)
    if area is not None:
        blocks.append(area)
    blocks.extend(slope_tables(ra, currency))
    if ra.centroids:
        blocks.append(centroid_table(ra))
    if ra.premium is not None:
        blocks.append(premium_table(ra, currency))
    st = strata_table(ra)
    if st is not None:
        blocks.append(st)
    if ra.warnings:
        blocks.append(Notice("warning", tuple(ra.warnings), "Warnings"))
    return tuple(blocks)


def neighbourhood_blocks(fit, valuation=None, currency: str = "$") -> tuple[Block, ...]:
    """The worksheet's neighbourhood section for ``fit`` (the subject of ``valuation``
    marked), or () when the model has no region term."""
    if not has_region_term(fit):
        return ()
    subject = getattr(valuation, "subject", None) or None
    return region_blocks(analyse_regions(fit, subject=subject), currency)


def _groups_text(ra: RegionAnalysis) -> str:
    if not ra.groups.groups:  # too many regions to test every pair
        return ra.groups.method
    return (
        "; ".join("{" + ", ".join(g) + "}" for g in ra.groups.groups)
        + f" (at {alpha_text(1 - ra.level)})"
    )


def centroid_table(ra: RegionAnalysis) -> Table:
    has_subject = any(c.subject_km is not None for c in ra.centroids)
    cols = ("Region", "Sales", "Latitude", "Longitude") + (
        ("Subject's distance (km)",) if has_subject else ()
    )
    rows = []
    for c in ra.centroids:
        row = (
            level_name(ra, c.level),
            integer(c.count),
            fixed(c.latitude, 5),
            fixed(c.longitude, 5),
        )
        if has_subject:
            row += (fixed(c.subject_km, 2),)
        rows.append(row)
    return Table(
        "region_centroids",
        "Region centres (mean position of the sales)",
        cols,
        tuple(rows),
        align=("l",) + ("r",) * (len(cols) - 1),
    )


def premium_table(ra: RegionAnalysis, currency: str = "$", rows_at_most: int = 11) -> Table:
    """The location effect at every k-th distance, k chosen for at most ``rows_at_most`` rows."""
    p = ra.premium
    assert p is not None
    log = ra.response == "log"
    kms = [pt.km for pt in p.points]
    step = kms[1] - kms[0] if len(kms) > 1 else 1.0
    shown = next(
        (s for s in NICE_STEPS_KM if s >= step and kms[-1] / s <= rows_at_most - 1), kms[-1]
    )
    every = max(1, round(shown / step))
    rows = []
    for pt in p.points[::every]:
        if log:
            rows.append((fixed(pt.km, 1), _pct(pt.percent), _pct_interval(pt.percent)))
        else:
            rows.append(
                (fixed(pt.km, 1), money(pt.change, currency),
                 f"{money(pt.low, currency)} to {money(pt.high, currency)}")
            )  # fmt: skip
    return Table(
        "location_effect",
        "Location: change from the centre with distance",
        ("Distance (km)", "Change", f"{level_text(p.level)} band"),
        tuple(rows),
        align=("r", "r", "r"),
        note=f"For {'the subject' if p.base == 'subject' else p.base}, moved along a line from the centre "
        f"({fixed(p.centre[0], 4)}, {fixed(p.centre[1], 4)}); terms that change: "
        + ", ".join(p.columns)
        + "."
        + ("" if p.subject_km is None else f" The subject is {fixed(p.subject_km, 2)} km out."),
    )


__all__ = [
    "area_price_table",
    "centroid_table",
    "effects_table",
    "level_name",
    "level_text",
    "neighbourhood_blocks",
    "pairwise_table",
    "premium_table",
    "region_blocks",
    "slope_tables",
    "strata_table",
]
