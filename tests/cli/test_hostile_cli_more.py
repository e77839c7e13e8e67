"""More hostile files through the command line, variations the first hostile tests lacked.

Each case failed before its fix (a traceback, a hang, a silent use of a bad value) and must
now end with exit 2 and one line naming the file (and the field, row or column), or with
the bad rows excluded by row number. Expected values are properties of the files written
here (their names, the rows and limits they break); no number is taken from elsewhere.
"""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import json  # noqa: E402
from pathlib import Path  # noqa: E402

import pytest  # noqa: E402

from appraise.cli import main  # noqa: E402

SAMPLE = Path(__file__).resolve().parents[2] / "sample_data"
SALES = str(SAMPLE / "ashcombe_sales.csv")
MODEL = str(SAMPLE / "ashcombe_model.toml")
SUBJECT = str(SAMPLE / "subject.json")


def _fails(capsys, argv: list[str], *needles: str) -> str:
    capsys.readouterr()
    assert main(argv) == 2
    err = capsys.readouterr().err
    lines = err.strip().splitlines()
    assert len(lines) == 1, err  # one line, no traceback, no warning
    assert lines[0].startswith("appraise: error: ")
    for n in needles:
        assert n in lines[0], (n, lines[0])
    return lines[0]


def _model(tmp_path: Path, text: str) -> str:
    p = tmp_path / "m.toml"
    p.write_text(text, encoding="utf-8")
    return str(p)


# --- dates at the ends of the calendar ----------------------------------------------------
def test_a_subject_dated_9999_12_31_is_refused_not_overflowed(tmp_path, capsys):
    # the plausibility rules added 31 days to the effective date: OverflowError
    subject = json.loads(Path(SUBJECT).read_text(encoding="utf-8"))
    subject["effective_date"] = "9999-12-31"
    s = tmp_path / "s.json"
    s.write_text(json.dumps(subject), encoding="utf-8")
    _fails(
        capsys, ["value", SALES, "-m", MODEL, "-s", str(s)], str(s), "effective_date", "1678-2261"
    )


@pytest.mark.parametrize(
    ("value", "needle"),
    [
        ('"0000-00-00"', "outside the years"),  # was ignored: no effective date at all
        ('"2023-02-29"', "is not a date"),  # was ignored
        ('"9999-12-31"', "outside the years"),  # was accepted
        ("0001-01-01", "outside the years"),  # a TOML date: every sale after it, traceback
        ("1979-05-27T07:32:00Z", "must be a date"),  # a TOML date-time: traceback
        ("20240101", "must be a date"),  # an integer, read as text
    ],
)
def test_a_model_effective_date_that_is_no_date_is_refused(tmp_path, capsys, value, needle):
    m = _model(
        tmp_path, f'target = "price"\nfeatures = ["living_area"]\neffective_date = {value}\n'
    )
    _fails(capsys, ["fit", SALES, "-m", m], m, "'effective_date'", needle)


def test_every_sale_excluded_is_one_line_not_a_traceback(tmp_path, capsys):
    # learn_design got an empty frame: "cannot reshape array of size 0"
    rules = tmp_path / "rules.toml"
    rules.write_text("earliest_sale = 2099-01-01\n", encoding="utf-8")
    line = _fails(
        capsys, ["fit", SALES, "-m", MODEL, "--plausibility", str(rules)], SALES, "no sale is left"
    )
    assert "all 606 rows are excluded" in line  # the sample file has 606 rows
    sales = tmp_path / "two.csv"
    sales.write_text("id,price,living_area\na,300000,1500\nb,310000,1600\n", encoding="utf-8")
    m = _model(
        tmp_path,
        'target = "price"\nfeatures = ["living_area"]\n'
        'exclude = [{id = "a", reason = "gift"}, {id = "b", reason = "gift"}]\n',
    )
    _fails(capsys, ["fit", str(sales), "-m", m], str(sales), "all 2 rows are excluded", "gift 2")


# --- workbooks ----------------------------------------------------------------------------
def test_a_workbook_with_a_damaged_style_is_one_line_without_warnings(tmp_path, capsys):
    # openpyxl printed a UserWarning (two lines) and then a TypeError traceback
    import zipfile

    from openpyxl import Workbook

    base = tmp_path / "base.xlsx"
    wb = Workbook()
    wb.active.append(["price", "living_area"])
    wb.active.append([300_000, 1_500])
    wb.save(base)
    bad = tmp_path / "bad.xlsx"
    styles = (
        b'<?xml version="1.0"?><styleSheet xmlns="http://schemas.openxmlformats.org/'
        b'spreadsheetml/2006/main"><fills count="1"><fill/></fills></styleSheet>'
    )
    with zipfile.ZipFile(base) as src, zipfile.ZipFile(bad, "w") as out:
        for info in src.infolist():
            data = styles if info.filename == "xl/styles.xml" else src.read(info.filename)
            out.writestr(info, data)
    _fails(capsys, ["data", str(bad)], str(bad), "cannot be read as an .xlsx workbook")


# --- what the terminal shows ----------------------------------------------------------------
def test_a_sale_id_that_swallowed_the_file_is_one_cut_line(tmp_path, capsys):
    # an unclosed quote makes the rest of the file one sale id: it was printed whole, line
    # breaks and all (here 2,000 lines; a 200 MB id printed 200 MB)
    body = "".join(f"s{i},{300_000 + i},2024-01-02,1500\n" for i in range(2_000))
    f = tmp_path / "quote.csv"
    f.write_text('id,price,sale_date,living_area\n"s,1,2024-01-01,1500\n' + body, encoding="utf-8")
    capsys.readouterr()
    assert main(["data", str(f)]) == 0
    out = capsys.readouterr().out
    line = next(x for x in out.splitlines() if x.startswith("  row 2 ("))
    assert line.endswith("): price is missing [price]")
    assert "\\n" in line and "characters)" in line and len(line) < 200
    assert "s1999,301999" not in out  # the swallowed rows are not printed


# --- which file to open ---------------------------------------------------------------------
def test_an_expression_error_names_the_model_file(tmp_path, capsys):
    # "appraise: error: in 'open(...)': unknown function 'open'" named no file at all
    m = _model(tmp_path, 'target = "price"\nfeatures = ["open(\'/etc/passwd\')"]\n')
    _fails(capsys, ["fit", SALES, "-m", m], f"error: {m}: in 'open('/etc/passwd')'", "'open'")
    m = _model(tmp_path, 'target = "price"\nfeatures = ["a"]\n[derived]\na = "b"\nb = "a"\n')
    _fails(capsys, ["value", SALES, "-m", m, "-s", SUBJECT], f"error: {m}: ", "a -> b -> a")


def test_a_subject_the_model_cannot_value_names_the_subject_file(tmp_path, capsys):
    # "appraise: error: column 'Living Area (sq ft)': cannot value the subject: ..." named
    # the sales' column but not the subject file
    subject = json.loads(Path(SUBJECT).read_text(encoding="utf-8"))
    subject["living_area"] = -1_840
    s = tmp_path / "s.json"
    s.write_text(json.dumps(subject), encoding="utf-8")
    _fails(
        capsys,
        ["value", SALES, "-m", MODEL, "-s", str(s)],
        f"error: {s}, column 'Living Area (sq ft)': cannot value the subject",
    )


# --- exports --------------------------------------------------------------------------------
def _ids_file(tmp_path: Path) -> Path:
    rows = ["id,price,sale_date,living_area"]
    noise = [3, -5, 8, 0, -2, 6, -7, 1, 4, -3]  # thousands: the fit must not be exact
    rows += [
        f"\x1b[31mS{i}\x07,{300_000 + 9_000 * i + 1_000 * noise[i]},2024-0{1 + i % 5}-15,"
        f"{1_400 + 97 * i}"
        for i in range(10)
    ]
    f = tmp_path / "s.csv"
    f.write_text("\n".join(rows) + "\n", encoding="utf-8")
    return f


def test_the_html_worksheet_shows_control_characters_as_escapes(tmp_path, capsys):
    # sale ids and the currency went into the HTML with their raw ESC and BEL bytes
    sales = _ids_file(tmp_path)
    m = _model(tmp_path, 'target = "price"\nfeatures = ["living_area"]\n')
    s = tmp_path / "subject.json"
    s.write_text('{"living_area": 1500}', encoding="utf-8")
    html = tmp_path / "w.html"
    argv = ["report", str(sales), "-m", m, "-s", str(s), "-o", str(tmp_path / "w.pdf")]
    argv += ["--html", str(html), "--no-diagnostics", "--currency", "\x1b[2J$"]
    capsys.readouterr()
    assert main(argv) == 0
    text = html.read_text(encoding="utf-8")
    assert "\x1b" not in text and "\x07" not in text
    assert "\\x1b[2J$" in text  # the currency as the file and the option gave it, visibly


def test_a_conflicting_option_fails_before_anything_is_written(tmp_path, capsys):
    # "--sales-out needs the model check" came after the PDF, HTML and tables were written
    sales = _ids_file(tmp_path)
    m = _model(tmp_path, 'target = "price"\nfeatures = ["living_area"]\n')
    s = tmp_path / "subject.json"
    s.write_text('{"living_area": 1500}', encoding="utf-8")
    pdf = tmp_path / "w.pdf"
    argv = ["report", str(sales), "-m", m, "-s", str(s), "-o", str(pdf), "--no-diagnostics"]
    _fails(capsys, [*argv, "--sales-out", str(tmp_path / "x.csv")], "--sales-out needs")
    assert not pdf.exists()


def test_a_subject_of_100000_attributes_is_refused(tmp_path, capsys):
    # each key became a column of a one-row frame: 13 s and 540 MB before any check
    subject = json.loads(Path(SUBJECT).read_text(encoding="utf-8"))
    subject.update({f"k{i}": i for i in range(100_000)})
    s = tmp_path / "s.json"
    s.write_text(json.dumps(subject), encoding="utf-8")
    _fails(
        capsys,
        ["value", SALES, "-m", MODEL, "-s", str(s)],
        str(s),
        "100,012 attributes; the limit is 2,000",
    )


# --- options ----------------------------------------------------------------------------------
@pytest.mark.parametrize("when", ["9999-99-99", "2023-02-29", "1500-01-01"])
def test_an_effective_date_option_that_is_no_date_is_one_line(tmp_path, capsys, when):
    # report --effective-date 9999-99-99 raised DateParseError after the fit
    pdf = tmp_path / "w.pdf"
    argv = ["report", SALES, "-m", MODEL, "-s", SUBJECT, "-o", str(pdf), "--effective-date", when]
    _fails(capsys, argv, f"--effective-date '{when}' is not a date")
    _fails(capsys, ["grid", SALES, "-m", MODEL, "-s", SUBJECT, "--effective-date", when], when)
    assert not pdf.exists()


def test_a_level_option_out_of_range_names_no_file(capsys):
    # "subject.json: level must be strictly between 0 and 1" blamed the subject file
    line = _fails(capsys, ["value", SALES, "-m", MODEL, "-s", SUBJECT, "--level", "1.5"])
    assert line == "appraise: error: --level must be strictly between 0 and 1, not 1.5"


def test_a_tables_dir_that_is_a_file_fails_before_the_pdf(tmp_path, capsys):
    taken = tmp_path / "taken"
    taken.write_text("x", encoding="utf-8")
    pdf = tmp_path / "w.pdf"
    argv = ["report", SALES, "-m", MODEL, "-s", SUBJECT, "-o", str(pdf), "--tables-dir", str(taken)]
    _fails(capsys, argv, str(taken), "names a file, not a folder")
    assert not pdf.exists()


def test_a_roll_lacking_a_column_names_the_roll(tmp_path, capsys):
    # "column 'Living Area (sq ft)': the subjects file lacks column(s)..." named no file
    roll = tmp_path / "roll.csv"
    roll.write_text("foo,bar\n1,2\n", encoding="utf-8")
    argv = ["batch", SALES, "-m", MODEL, "--subjects", str(roll), "-o", str(tmp_path / "o.csv")]
    _fails(capsys, argv, f"error: {roll}, column ", "lacks column(s)")


def test_file_names_too_long_for_the_system_are_one_line(tmp_path, capsys):
    # OSError "File name too long" from Path.exists() was a traceback; a PDF name too long
    # failed in Qt after the fit, with a warning on stderr and no file named
    long = "a" * 300
    _fails(capsys, ["data", str(tmp_path / f"{long}.csv")], "cannot be opened (File name too long)")
    pdf = tmp_path / f"{long}.pdf"
    argv = ["report", SALES, "-m", MODEL, "-s", SUBJECT, "-o", str(pdf), "--no-diagnostics"]
    _fails(capsys, argv, "the file name is too long")
