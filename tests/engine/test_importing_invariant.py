"""Property: every file row is used or excluded exactly once, for the reason it was built with.

Rows are generated from labelled kinds of cells (a good price, a price with a
letter in it, a blank date, a "No" flag, a repeated id...). The expected fate
of each row follows from those labels and the documented order of reasons, not
from parsing, so the check is independent of the parser.
"""

from __future__ import annotations

import csv
import io
import tempfile
from pathlib import Path

from hypothesis import given, settings
from hypothesis import strategies as st

from appraise.engine.importing import load_sales
from appraise.engine.roles import RoleMap
from appraise.engine.sales import ROW_COLUMN

HEADER = ["Sale ID", "Sale Price", "Sale Date", "Beds", "Arms Length"]
ROLES = RoleMap(
    {
        "sale_id": "Sale ID",
        "price": "Sale Price",
        "sale_date": "Sale Date",
        "bedrooms": "Beds",
        "arms_length": "Arms Length",
    }
)

GOOD_PRICES = st.integers(1_000, 5_000_000).flatmap(
    lambda v: st.sampled_from([(f"${v:,}", v), (str(v), v), (f"{v:,}.00", v), (f"USD {v}", v)])
)
# unreadable with either decimal mark, so they never sway the file's decimal-mark decision
BAD_PRICES = st.sampled_from(["call agent", "$4l2,000", "12..5", "4 12"])
# readable, but outside the plausibility rules' default range (1,000 to 1e9; never below 0.01)
IMPLAUSIBLE_PRICES = st.sampled_from(["$2,000,000,000", "1e15", "0.001"])
NO_PRICES = st.sampled_from(["", "N/A", "-", "null"])
NOT_POSITIVE = st.sampled_from(["0", "$0", "-5", "(1,200)"])

price_cell = st.one_of(
    GOOD_PRICES.map(lambda t: ("ok", t[0], float(t[1]))),
    BAD_PRICES.map(lambda s: ("bad", s, None)),
    NO_PRICES.map(lambda s: ("missing", s, None)),
    NOT_POSITIVE.map(lambda s: ("nonpositive", s, None)),
    IMPLAUSIBLE_PRICES.map(lambda s: ("implausible", s, None)),
)
date_cell = st.one_of(
    st.dates().filter(lambda d: 1900 <= d.year <= 2025).map(lambda d: ("ok", d.isoformat())),
    # readable, but before 1900 or after today plus a month (the plausibility rules)
    st.sampled_from(["1850-06-01", "1702-03-05", "2199-01-01"]).map(lambda s: ("implausible", s)),
    st.sampled_from(["", "n/a"]).map(lambda s: ("missing", s)),
    st.sampled_from(["31/02/2024", "soon", "2024-13-01"]).map(lambda s: ("bad", s)),
)
flag_cell = st.sampled_from(
    [("ok", "Yes"), ("ok", "arm's length"), ("ok", ""), ("no", "No"), ("no", "foreclosure"),
     ("bad", "maybe")]
)  # fmt: skip
id_cell = st.sampled_from(["S-1", "S-2", "S-3", "S-4", "", "S-5"])
beds_cell = st.sampled_from(["3", "2", "", "three"])


@st.composite
def sales_rows(draw):
    kind = draw(st.sampled_from(["sale"] * 8 + ["empty", "long"]))
    if kind == "empty":
        return "empty", [""] * len(HEADER), None
    price = draw(price_cell)
    date = draw(date_cell)
    flag = draw(flag_cell)
    sid = draw(id_cell)
    cells = [sid, price[1], date[1], draw(beds_cell), flag[1]]
    if kind == "long":
        return "long", [*cells, "spill"], None
    return (price[0], date[0], flag[0], sid), cells, price[2]


def expected_fate(rows) -> tuple[dict[int, str], dict[int, float]]:
    """file row -> reason word for excluded rows; file row -> price for used rows."""
    excluded: dict[int, str] = {}
    used: dict[int, float] = {}
    seen_ids: set[str] = set()
    for i, (labels, cells, price) in enumerate(rows):
        row = i + 2
        if labels == "long":
            excluded[row] = labels
            continue
        if not any(c.strip() for c in cells):  # nothing at all in it: an empty row
            excluded[row] = "empty"
            continue
        p, d, f, sid = labels
        if p != "ok":
            excluded[row] = "price"
        elif d != "ok":
            excluded[row] = "sale date"
        elif f == "no":
            excluded[row] = "not an arm's-length sale"
        elif f == "bad":
            excluded[row] = "arm's-length flag"
        elif sid and sid in seen_ids:
            excluded[row] = "duplicate sale id"
        else:
            if sid:
                seen_ids.add(sid)
            used[row] = price
    return excluded, used


@settings(max_examples=60, deadline=None)
@given(st.lists(sales_rows(), min_size=1, max_size=30))
def test_every_row_is_used_or_excluded_once_for_its_reason(rows):
    while rows and not any(c.strip() for c in rows[-1][1]):  # blank rows after the last sale
        rows = rows[:-1]
    if not rows:
        return
    buf = io.StringIO()
    csv.writer(buf).writerows([HEADER] + [cells for _, cells, _ in rows])
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "sales.csv"
        path.write_text(buf.getvalue(), encoding="utf-8")
        # roles given, not guessed: a generated column of bad dates must still be the sale
        # date (guessing from content would rightly decline it); the test is about rows
        table = load_sales(path, roles=ROLES)

    assert table.source.rows_in_file == len(rows)
    assert len(table.frame) + len(table.excluded) == table.source.rows_in_file
    excluded, used = expected_fate(rows)
    got_excluded = {e.row: e.reason for e in table.excluded}
    assert set(got_excluded) == set(excluded)
    for row, word in excluded.items():
        expected_start = {"empty": "empty row", "long": "too many values: 6 in a row"}.get(
            word, word
        )
        assert got_excluded[row].startswith(expected_start), (row, got_excluded[row])
    got_used = dict(zip(table.frame[ROW_COLUMN], table.frame["Sale Price"], strict=True))
    assert got_used == used
