"""Hostile sales files, model files and expressions: bounded work, exclusions with reasons,
only the documented error types.

Expected numbers: day counts come from :mod:`datetime` (the proleptic Gregorian calendar
of the standard library), powers of two are exact in binary floating point, and the
limits are the documented constants of :mod:`appraise.engine.limits`. Property tests
use Hypothesis with fixed example budgets (stated beside each) so CI stays fast.
"""

from __future__ import annotations

import codecs
import csv
import datetime as dt
import io
import sys
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

sys.path.insert(0, str(Path(__file__).resolve().parent))
import hostile_files  # noqa: E402

from appraise.engine import limits  # noqa: E402
from appraise.engine.design import learn_design  # noqa: E402
from appraise.engine.errors import (  # noqa: E402
    AppraiseError,
    DataError,
    ExpressionError,
    ModelFileError,
    SubjectError,
)
from appraise.engine.expressions import Call, Name, parse_expression, walk  # noqa: E402
from appraise.engine.functions import FUNCTIONS  # noqa: E402
from appraise.engine.importing import load_sales  # noqa: E402
from appraise.engine.modelspec import load_model, parse_model  # noqa: E402
from appraise.engine.plausibility import PlausibilityRules, decide_decimal_mark  # noqa: E402
from appraise.engine.settings import ImportSettings  # noqa: E402
from appraise.engine.subject import read_subject_attributes  # noqa: E402


def _csv(tmp_path: Path, rows: list[list[object]], name: str = "s.csv") -> Path:
    buf = io.StringIO()
    csv.writer(buf).writerows(rows)
    p = tmp_path / name
    p.write_text(buf.getvalue(), encoding="utf-8")
    return p


HEADER = ["id", "price", "sale_date", "living_area", "lot_area", "year_built"]


def _reasons(table) -> dict[str, str]:
    return {e.sale_id: e.reason for e in table.excluded}


# --- plausibility rules: every case of issue 15 -------------------------------------------
def test_implausible_values_are_excluded_naming_row_column_and_value(tmp_path):
    today = dt.date.today()
    rows = [
        HEADER,
        ["ok", "$412,500", "2024-05-01", "1800", "7000", "1990"],
        ["old", "$400,000", "1702-03-05", "1800", "7000", "1650"],
        ["y2099", "$400,000", "2099-01-01", "1800", "7000", "1990"],
        ["y2261", "$400,000", "2261-06-30", "1800", "7000", "1990"],
        ["e308", "1e308", "2024-05-01", "1800", "7000", "1990"],
        ["e15", "$1e15", "2024-05-01", "1800", "7000", "1990"],
        ["tiny", "1e-300", "2024-05-01", "1800", "7000", "1990"],
        ["neg_living", "$400,000", "2024-05-01", "-1500", "7000", "1990"],
        ["neg_lot", "$400,000", "2024-05-01", "1500", "-7000", "1990"],
        ["built_later", "$400,000", "2020-05-01", "1500", "7000", "2030"],
        ["presale", "$400,000", "2020-05-01", "1500", "7000", "2021"],
        ["ok2", "$398,000", (today - dt.timedelta(days=3)).isoformat(), "1700", "6000", "2001"],
    ]
    t = load_sales(_csv(tmp_path, rows))
    assert len(t.frame) + len(t.excluded) == t.source.rows_in_file == 12
    r = _reasons(t)
    assert set(t.frame["id"]) == {"ok", "presale", "ok2"}
    assert r["old"] == "sale date '1702-03-05' is before 1900-01-01"
    assert r["y2099"].startswith("sale date '2099-01-01' is after today plus 31 days")
    assert r["y2261"].startswith("sale date '2261-06-30' is after today")
    assert r["e308"] == "price '1e308' is above the plausible 1,000,000,000"
    assert r["e15"] == "price '$1e15' is above the plausible 1,000,000,000"
    assert r["tiny"] == "price '1e-300' is below 0.01"
    assert r["neg_living"] == "living area '-1500' is not positive"
    assert r["neg_lot"] == "lot area '-7000' is not positive"
    assert r["built_later"].startswith("year built '2030' is after the sale year 2020")
    assert any("1 sale was recorded before the year built" in n for n in t.notes)
    by_row = {e.row: e for e in t.excluded}
    assert by_row[3].column == "sale_date" and by_row[6].column == "price"  # file rows


def test_rules_are_settings_with_an_effective_date(tmp_path):
    rows = [HEADER, ["a", "500", "2024-05-01", "1", "1", "1990"]]
    rows += [
        ["b", "600", "2024-07-15", "2", "2", "1990"],
        ["c", "700", "2024-05-02", "3", "3", "1990"],
    ]
    rules = PlausibilityRules(
        reference_date=dt.date(2024, 6, 30), future_margin_days=0, min_price=100
    )
    t = load_sales(_csv(tmp_path, rows), rules=rules)
    assert set(t.frame["id"]) == {"a", "c"}
    assert _reasons(t)["b"] == (
        "sale date '2024-07-15' is after the effective date plus 0 days (2024-06-30)"
    )


def test_a_file_in_thousands_is_noted_not_excluded(tmp_path):
    # prices like Wooldridge's hprice1 (thousands of dollars): every price below 1,000
    rows = [HEADER] + [
        [f"k{i}", str(300 + i), "2024-05-01", "1500", "6000", "1990"] for i in range(5)
    ]
    t = load_sales(_csv(tmp_path, rows))
    assert len(t.frame) == 5
    assert any("taken to be stated in thousands" in n for n in t.notes)


def test_grouping_separator_decided_per_file_and_reported(tmp_path):
    rows = [["id", "price"]] + [[f"e{i}", f"${412 + i % 500}.500"] for i in range(598)]
    rows.append(["big", "$1.021.000"])
    t = load_sales(_csv(tmp_path, rows))
    assert t.frame["price"].iloc[0] == 412_500.0
    assert t.frame["price"].iloc[-1] == 1_021_000.0
    assert len(t.frame) == 599
    note = next(n for n in t.notes if n.startswith("decimal mark:"))
    assert "598 cell(s) such as '$412.500'" in note and "(the setting was '.')" in note


def test_ambiguous_cells_alone_keep_the_setting_and_say_so():
    d = decide_decimal_mark({"p": ["412.500", "399.000"]}, ".")
    assert d.mark == "." and d.ambiguous == 2
    assert "nothing in the file confirms it" in d.note and "412.5;" in d.note
    d = decide_decimal_mark({"p": ["412.500", "1,234.50"]}, ",")
    assert d.mark == "."  # one cell reads only with '.', none only with ','


def test_day_resolution_dates_do_not_overflow():
    f = pd.DataFrame({"d": pd.to_datetime(["2023-06-01", "1702-03-05"]), "x": [1.0, 2.0]})
    spec = learn_design(["years_between(d, '0001-01-01')", "months_between(d, '2026-06-30')"], f)
    m = spec.build(f).matrix
    # day counts from the standard library's proleptic Gregorian calendar
    days = (dt.date(2023, 6, 1) - dt.date(1, 1, 1)).days
    assert m[0, 1] == pytest.approx(days / 365.2425, rel=1e-12)
    back = (dt.date(1702, 3, 5) - dt.date(2026, 6, 30)).days
    assert m[1, 2] == pytest.approx(back / (365.2425 / 12), rel=1e-12)
    assert m[1, 2] < -3_890  # about -3,894 months, never a wrapped +3,122


# --- XLSX limits, checked before parsing ------------------------------------------------
@pytest.mark.parametrize("honest", [True, False])
def test_a_far_cell_is_refused_before_parsing(tmp_path, honest):
    f = hostile_files.far_cell_xlsx(tmp_path / "far.xlsx", honest_dimension=honest)
    assert f.stat().st_size < 10_000
    with pytest.raises(DataError) as info:
        load_sales(f)
    assert info.value.file == str(f)
    assert f"the limit is {limits.MAX_XLSX_CELLS:,} cells" in info.value.message


def test_ten_million_rows_of_sheet_xml_are_refused(tmp_path, monkeypatch):
    # the compression-ratio rule refuses this file first; lifted here to test the row count
    monkeypatch.setattr(limits, "MAX_XLSX_RATIO", 10**6)
    f = hostile_files.many_rows_xlsx(tmp_path / "rows.xlsx", 10_000_000)
    assert f.stat().st_size < 200_000
    with pytest.raises(DataError, match=f"the limit is {limits.MAX_XLSX_ROWS:,} rows"):
        load_sales(f)


def test_a_zip_bomb_is_refused_from_the_zip_directory(tmp_path, monkeypatch):
    # the real limit is 512 MiB; a 3 MiB bomb against a 2 MiB limit tests the same check
    monkeypatch.setattr(limits, "MAX_XLSX_UNCOMPRESSED", 2 << 20)
    f = hostile_files.zip_bomb_xlsx(tmp_path / "bomb.xlsx", 3)
    assert f.stat().st_size < 60_000
    with pytest.raises(DataError, match="unzips to .* bytes; the limit is 2,097,152 bytes"):
        load_sales(f)


def test_an_ordinary_workbook_still_reads(tmp_path):
    from openpyxl import Workbook

    wb = Workbook()
    wb.active.append(["id", "price", "living_area"])
    for i in range(20):
        wb.active.append([f"w{i}", 300_000 + i, 1500 + i])
    wb.save(tmp_path / "ok.xlsx")
    t = load_sales(tmp_path / "ok.xlsx")
    assert len(t.frame) == 20


# --- model, subject and role files -----------------------------------------------------------
def test_model_file_errors_are_model_file_errors(tmp_path):
    p = tmp_path / "m.toml"
    p.write_bytes(b'target = "price"\xff\n')
    with pytest.raises(ModelFileError, match="not UTF-8"):
        load_model(p)
    with pytest.raises(ModelFileError, match="nested 5,000 levels"):
        parse_model('target = "p"\nfeatures = ' + "[" * 5000 + "]" * 5000)
    # brackets inside strings and comments are not nesting
    spec = parse_model(
        'target = "price"  # [[[[\nfeatures = ["log(`a [b]`)"]\ntitle = "' + "[" * 80 + '"\n'
    )
    assert spec.title == "[" * 80


def test_subject_json_limits(tmp_path):
    p = tmp_path / "s.json"
    p.write_text('{"a": ' + "9" * 101 + "}", encoding="utf-8")
    with pytest.raises(SubjectError, match="101 digits; the limit is 100"):
        read_subject_attributes(p, ImportSettings())
    p.write_text('{"a": "' + "[" * 10_000 + '"}', encoding="utf-8")  # inside a string: fine
    assert read_subject_attributes(p, ImportSettings()) == {"a": "[" * 10_000}


def test_derived_variable_limits():
    frame = pd.DataFrame({"x": np.linspace(1, 2, 20)})
    derived = {"b0": "x"} | {f"b{k}": f"b{k - 1} + b{k - 1}" for k in range(1, 61)}
    spec = learn_design(["b60"], frame, derived=derived)
    assert spec.build(frame).matrix[0, 1] == 2.0**60  # x = 1 doubled 60 times, exact
    many = {f"v{k}": "x" for k in range(limits.MAX_DERIVED + 1)}
    with pytest.raises(ExpressionError, match="501 derived variables; the limit is 500"):
        learn_design(["x"], frame, derived=many)
    chain = {"c0": "x"} | {f"c{k}": f"c{k - 1} * 1" for k in range(1, 70)}
    with pytest.raises(ExpressionError, match="more than 64 deep"):
        learn_design(["c69"], frame, derived=chain)
    with pytest.raises(ExpressionError, match="cycle"):
        learn_design(["a"], frame, derived={"a": "b", "b": "a"})


# --- property tests: the expression language --------------------------------------------------
# Names an attacker might reach for, and syntax outside the whitelist.
DANGEROUS = [
    "__import__('os').system('x')",
    "eval('1')",
    "exec('x=1')",
    "open('/etc/passwd')",
    "getattr(x, 'y')",
    "x.__class__",
    "(lambda: 1)()",
    "[c for c in x]",
    "x[0]",
    "globals()",
    "compile('1', 'f', 'eval')",
    "x if x else x",
    "f'{x}'",
    "breakpoint()",
]
ATOMS = st.sampled_from(["x", "y", "`a b`", "1", "2.5", "1e5", "'2024-01-01'", "__x"])
FUNCS = st.sampled_from([*FUNCTIONS, "eval", "exec", "open", "__import__", "getattr", "print"])


@st.composite
def syntax_trees(draw, depth=0):
    if depth > 4 or draw(st.booleans()):
        return draw(ATOMS | st.sampled_from(DANGEROUS))
    kind = draw(st.sampled_from(["bin", "neg", "call", "kw", "bad"]))
    a = draw(syntax_trees(depth=depth + 1))
    b = draw(syntax_trees(depth=depth + 1))
    if kind == "bin":
        return f"({a} {draw(st.sampled_from(['+', '-', '*', '/', '**', '//', '%', '@', '&']))} {b})"
    if kind == "neg":
        return f"-{a}"
    if kind == "call":
        return f"{draw(FUNCS)}({a}, {b})"
    if kind == "kw":
        return f"{draw(FUNCS)}({a}, {draw(st.sampled_from(['ref', 'degree', 'x']))}={b})"
    return draw(st.sampled_from([f"{a}.real", f"{a}[{b}]", f"({a}, {b})", f"{a} < {b}"]))


def _check_tree(text: str) -> None:
    try:
        tree = parse_expression(text)
    except ExpressionError:
        return
    for node in walk(tree):  # only listed functions; no dunder names
        if isinstance(node, Call):
            assert node.func in FUNCTIONS
        if isinstance(node, Name):
            assert not node.name.startswith("__")
    frame = pd.DataFrame({"x": [1.0, 2.0, 3.0, 4.0], "y": [2.0, 1.0, 0.5, 3.0], "a b": [1.0] * 4})
    try:
        learn_design([text], frame).build(frame)
    except AppraiseError:
        pass


_EVENTS: list[str] = []
_WATCH = {"exec", "open", "compile", "os.system", "subprocess.Popen", "os.exec", "os.spawn"}
_PACKAGE = str(Path(__file__).resolve().parents[2] / "appraise")


def _audit(event: str, args) -> None:
    """Record code run from text, files opened and processes started by appraise itself
    or by this test (the frame that made the call), never a library's own lazy imports."""
    if not (_EVENTS and _EVENTS[0] == "on"):
        return
    if not (event in _WATCH or event.startswith("socket.")):
        return
    caller = sys._getframe(1).f_code.co_filename
    if caller.startswith(_PACKAGE) or caller == __file__:
        _EVENTS.append(f"{event} from {Path(caller).name}: {str(args[:2])[:80]}")


sys.addaudithook(_audit)  # audit hooks stay for the interpreter's life; idle unless "on"


def _watched(fn, text):
    _EVENTS[:] = ["on"]
    try:
        fn(text)
    finally:
        seen = _EVENTS[1:]
        _EVENTS[:] = []
    assert seen == [], (text, seen)


@settings(max_examples=200, deadline=None)  # 200 random strings: under a second
@given(st.text(max_size=60))
def test_random_text_only_ever_raises_expression_error(text):
    _watched(_check_tree, text)


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(syntax_trees())  # 200 random syntax trees mixing allowed and forbidden pieces: ~2 s
def test_random_syntax_trees_call_nothing_outside_the_whitelist(text):
    _watched(_check_tree, text)


@pytest.mark.parametrize("text", DANGEROUS)
def test_each_dangerous_expression_is_refused(text):
    with pytest.raises(ExpressionError):
        parse_expression(text)


# --- property tests: the importer -------------------------------------------------------------
CELLS = st.sampled_from(
    ["", "N/A", "$412,500", "412.500", "1.021.000", "-5", "1e308", "0", "(1,200)", "x",
     "2024-02-30", "2024-05-01", "31/12/2023", "1702-03-05", "2261-01-01", "\x1b[2J",
     "=1+1", "\u200b", "1,5", "  ", "yes", "no", "1500", "-1500", "9" * 400]
)  # fmt: skip
ENCODINGS = ["utf-8", "utf-8-sig", "utf-16", "cp1252", "latin-1"]


def _accounted(path: Path) -> None:
    try:
        t = load_sales(path)
    except AppraiseError:
        return  # a clear, typed refusal
    assert len(t.frame) + len(t.excluded) == t.source.rows_in_file
    assert all(e.reason and e.row >= 2 for e in t.excluded)
    assert len({e.row for e in t.excluded}) == len(t.excluded)


@settings(max_examples=60, deadline=None)  # 60 random tables in 5 encodings: ~3 s
@given(
    st.lists(st.lists(CELLS, min_size=6, max_size=7), min_size=1, max_size=25),
    st.sampled_from(ENCODINGS),
)
def test_random_tables_every_row_used_or_excluded_with_a_reason(rows, encoding):
    buf = io.StringIO()
    csv.writer(buf).writerows([HEADER, *rows])
    data = buf.getvalue().encode(encoding, errors="replace")
    with tempfile.TemporaryDirectory() as folder:
        p = Path(folder) / "s.csv"
        p.write_bytes(data)
        _accounted(p)


@settings(max_examples=60, deadline=None)  # 60 garbage files: under a second
@given(st.binary(max_size=400), st.sampled_from([".csv", ".xlsx", ".parquet"]))
def test_garbage_bytes_are_refused_or_accounted(data, suffix):
    header = b"id,price,living_area\n" if suffix == ".csv" else b""
    with tempfile.TemporaryDirectory() as folder:
        p = Path(folder) / f"g{suffix}"
        p.write_bytes(header + data)
        _accounted(p)


def test_utf16_and_bom_files_read(tmp_path):
    text = 'id,price,living_area\nu1,"$300,000",1500\nu2,"$320,000",1600\n'
    for enc, bom in [("utf-16-le", codecs.BOM_UTF16_LE), ("utf-8", codecs.BOM_UTF8)]:
        p = tmp_path / f"{enc}.csv"
        p.write_bytes(bom + text.encode(enc))
        assert load_sales(p).frame["price"].tolist() == [300_000.0, 320_000.0]


# --- property tests: model files, subjects and role maps with random values ----------------
_SAMPLE = Path(__file__).resolve().parents[2] / "sample_data"
_LEAF = (
    st.none()
    | st.booleans()
    | st.integers(-5, 5)
    | st.floats(allow_nan=True)
    | st.text(max_size=10)
    | st.sampled_from(["living_area", "log(lot_area)", "onehot(region)", "price", "HC3", "log"])
)
_VALUES = st.recursive(
    _LEAF,
    lambda inner: (
        st.lists(inner, max_size=3)
        | st.dictionaries(st.sampled_from(["id", "reason", "a", "x"]), inner, max_size=3)
    ),
    max_leaves=8,
)
_MODEL_KEYS = st.sampled_from(
    ["target", "response", "features", "derived", "level", "cov_type", "exclude", "intercept",
     "title", "effective_date"]
)  # fmt: skip


@pytest.fixture(scope="module")
def sample_fit():
    from appraise import pipeline

    sales = pipeline.load(_SAMPLE / "ashcombe_sales.csv")
    return sales, pipeline.fit(sales, pipeline.read_model(_SAMPLE / "ashcombe_model.toml"))


@settings(
    max_examples=50, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(st.dictionaries(_MODEL_KEYS, _VALUES, max_size=5))  # 50 random model files: ~2 s
def test_random_model_settings_fit_or_fail_clearly(sample_fit, data):
    from appraise import pipeline
    from appraise.engine.modelspec import model_from_dict

    sales, _ = sample_fit
    doc = {"target": "price", "features": ["living_area"], **data}
    try:
        fit = pipeline.fit(sales, model_from_dict(doc))
        pipeline.value(fit, {"living_area": 1800})
    except AppraiseError:
        pass


_SUBJECT_VALUES = (
    _LEAF
    | st.sampled_from(
        ["2024-01-01", "N/A", "1e308", "-5", "Heronmoor", "\x1b", "0001-01-01", "9999-12-31"]
    )
    | st.lists(st.integers(), max_size=2)
)


@settings(
    max_examples=50, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(st.dictionaries(st.sampled_from(
    ["Living Area (sq ft)", "living_area", "region", "Neighbourhood", "sale_date",
     "effective_date", "Year Built", "bathrooms", "unknown"]
), _SUBJECT_VALUES, max_size=8))  # fmt: skip
def test_random_subjects_value_or_fail_clearly(sample_fit, subject):  # 50 subjects: ~1 s
    from appraise import pipeline

    _, fit = sample_fit
    try:
        v = pipeline.value(fit, subject)
        if v is not None:
            v.to_dict()
    except AppraiseError:
        pass


@settings(max_examples=50, deadline=None)
@given(_VALUES)  # 50 random role-map documents: under a second
def test_random_role_maps_load_or_fail_clearly(doc):
    import json

    from appraise.engine.roles import load_role_map

    with tempfile.TemporaryDirectory() as folder:
        p = Path(folder) / "roles.json"
        p.write_text(json.dumps(doc), encoding="utf-8")
        try:
            load_role_map(p)
        except AppraiseError:
            pass


@pytest.mark.parametrize(
    "act",
    [
        lambda: eval("1 + 1"),  # noqa: S307 - the watcher must see this
        lambda: exec("x = 1"),  # noqa: S102
        lambda: open(tempfile.gettempdir() + "/appraise-audit-probe", "w").close(),  # noqa: SIM115
    ],
)
def test_the_audit_watcher_sees_code_run_from_text_and_files_opened(act):
    with pytest.raises(AssertionError):
        _watched(lambda _text: act(), "probe")


def test_dotted_keys_100000_deep_are_refused_before_parsing():
    # tomllib spends time and memory quadratic in the dots of one key: 100,000 would exhaust
    # memory; the pre-parse count refuses it at once
    with pytest.raises(ModelFileError, match="nested 100,001 levels deep; the limit is 64"):
        parse_model("a" + ".a" * 100_000 + ' = 1\ntarget = "p"\nfeatures = ["x"]\n')
    with pytest.raises(ModelFileError, match="nested 50,001 levels deep"):
        parse_model("[" + "a." * 50_000 + "a]\nx = 1\n")
    # dots inside numbers are not nesting
    with pytest.raises(ModelFileError, match="unknown setting"):
        parse_model('target = "p"\nfeatures = ["x"]\ny = [' + ", ".join(["1.5"] * 500) + "]\n")


def test_a_design_too_wide_or_too_large_is_refused_before_it_is_built(monkeypatch):
    from appraise.engine.errors import DesignError

    frame = pd.DataFrame({"id": [f"s{i}" for i in range(3000)], "x": np.arange(3000.0)})
    with pytest.raises(DesignError, match="3,001 design columns .* the limit is 2,000"):
        learn_design(["x", "onehot(id)"], frame)  # a level per sale: 2,999 columns
    monkeypatch.setattr(limits, "MAX_DESIGN_CELLS", 5_000)  # 3,000 sales x 2 columns
    with pytest.raises(DesignError, match="3,000 sales x 2 design columns = 6,000 cells"):
        learn_design(["x"], frame)


def test_a_parquet_file_declaring_too_many_cells_is_refused_from_its_footer(tmp_path, monkeypatch):
    import pyarrow as pa
    import pyarrow.parquet as pq

    # 2,000,000 equal prices compress to a few kilobytes; against a 1,000,000-cell limit
    # (the real one is 30,000,000) the footer alone refuses it
    p = tmp_path / "bomb.parquet"
    pq.write_table(pa.table({"price": pa.array(np.full(2_000_000, 300_000.0))}), p)
    assert p.stat().st_size < 100_000
    monkeypatch.setattr(limits, "MAX_PARQUET_CELLS", 1_000_000)
    with pytest.raises(DataError, match="2,000,000 rows x 1 columns .* the limit is 1,000,000"):
        load_sales(p)


# --- numbers too long to hold, cells too long to quote, too many columns ------------------


def test_a_number_too_long_for_a_float_is_excluded_not_used_as_infinity(tmp_path):
    """'9' x 400 reads as +inf (float overflow): an infinite price or area must break the
    plausibility rules like any absurd value (it was used, and the mean price was inf)."""
    path = tmp_path / "long.csv"
    path.write_text(
        "Sale ID,Sale Price,Living Area\n"
        f"A,{'9' * 400},1500\n"
        f"B,300000,{'9' * 400}\n"
        f"C,310000,-{'9' * 400}\n"
        "D,320000,1600\n",
        encoding="utf-8",
    )
    table = load_sales(path)
    assert table.frame["Sale ID"].tolist() == ["D"]
    reasons = {e.sale_id: e.reason for e in table.excluded}
    assert reasons["A"].startswith("price '") and "is above the plausible" in reasons["A"]
    assert "is above the plausible 100,000" in reasons["B"]
    assert reasons["C"].startswith("living area '-999") and "is not positive" in reasons["C"]
    assert "(401 characters)" in reasons["C"]  # quoted briefly


def test_a_huge_cell_is_quoted_briefly(tmp_path):
    path = tmp_path / "huge.csv"
    path.write_text(
        f"Sale ID,Sale Price\nA,1{'9' * 1_000_000}x\nB,300000\nB,310000\n", encoding="utf-8"
    )
    table = load_sales(path)
    (bad, again) = table.excluded
    assert len(bad.reason) < 200 and "(1,000,002 characters)" in bad.reason
    assert again.reason == "duplicate sale id 'B' (first seen on row 3)"


def test_too_many_columns_are_refused_before_any_is_cleaned(tmp_path):
    path = tmp_path / "wide.csv"
    n = limits.MAX_SALES_COLUMNS + 1
    path.write_text(
        ",".join(f"c{i}" for i in range(n - 1)) + ",price\n" + ",".join(["1"] * n) + "\n",
        encoding="utf-8",
    )
    with pytest.raises(DataError, match=r"the file has 2,001 columns; the limit is 2,000"):
        load_sales(path)


# the string patterns of the nesting count, written one character at a time: slow on long
# strings, but plainly right; the unrolled patterns in limits.py must cut the same spans
_JSON_STRING_PER_CHAR = r'"(?:[^"\\]|\\.)*"'
_TOML_SKIP_PER_CHAR = (
    r'"""[\s\S]*?"""|\'\'\'[\s\S]*?\'\'\'|"(?:[^"\\\n]|\\.)*"|\'[^\'\n]*\'|#[^\n]*'
)


@settings(max_examples=300, deadline=None)
@given(st.text(alphabet="ab\"\\\n{}[]#' .=", max_size=60))
def test_the_fast_string_patterns_cut_what_the_per_character_ones_cut(text):
    import re

    assert limits._JSON_STRING.sub("", text) == re.sub(_JSON_STRING_PER_CHAR, "", text, flags=re.S)
    assert limits._TOML_SKIP.sub("", text) == re.sub(_TOML_SKIP_PER_CHAR, "", text)


def test_a_subject_with_a_five_megabyte_value_is_refused_in_one_short_line(tmp_path):
    import json

    from appraise.engine.subject import read_subject_attributes

    path = tmp_path / "subject.json"
    path.write_text(json.dumps({"living_area": 1800, "region": "x" * 5_000_000}), "utf-8")
    assert read_subject_attributes(path)["region"] == "x" * 5_000_000  # read as it stands
    err = DataError(f"level '{'x' * 5_000_000}' is unknown", file="f" * 1000, column="c" * 500)
    assert len(str(err)) < 1000 and "(5,000,000 characters)" in str(err)
