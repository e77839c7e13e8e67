"""``appraise batch`` end to end on the sample (Ashcombe Vale): CSV and Parquet out, one row
per subject in input order, the caution beside the file; user errors exit 2."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pyarrow.parquet as pq
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from appraise.cli import main
from appraise.commands.batch import csv_bytes

SAMPLE = Path(__file__).resolve().parents[2] / "sample_data"
SALES = str(SAMPLE / "ashcombe_sales.csv")
MODEL = str(SAMPLE / "ashcombe_model.toml")


def _run(capsys, *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture()
def subjects(tmp_path) -> Path:
    subject = json.loads((SAMPLE / "subject.json").read_text())
    rows = [dict(subject, id=f"R-{i}") for i in range(9)]
    rows[4]["living_area"] = "about 1,800"  # not a number: not valued, with the reason
    path = tmp_path / "roll.csv"
    pd.DataFrame(rows).to_csv(path, index=False)
    return path


def test_csv_out_matches_appraise_value(capsys, subjects, tmp_path):
    out = tmp_path / "values.csv"
    code, text, _ = _run(
        capsys,
        "batch",
        SALES,
        "--model",
        MODEL,
        "--subjects",
        str(subjects),
        "-o",
        str(out),
        "--chunk-rows",
        "4",
    )
    assert code == 0
    assert "9 subjects: 8 valued, 1 not valued" in text
    assert "not an appraisal" in text
    got = pd.read_csv(out, keep_default_na=False)
    assert list(got["id"]) == [f"R-{i}" for i in range(9)]
    assert list(got["row"]) == list(range(2, 11))
    assert "'about 1,800' is not a number" in got.loc[4, "reason"]
    assert got.loc[4, "estimate"] == ""
    code, text, _ = _run(
        capsys,
        "value",
        SALES,
        "--model",
        MODEL,
        "--subject",
        str(SAMPLE / "subject.json"),
        "--json",
    )
    one = json.loads(text)
    valued = got.drop(index=4)
    # The CSV holds six decimals: equal to the one-subject command to that precision.
    assert_allclose(valued["estimate"].astype(float), one["estimate"], atol=1e-6, rtol=0)
    assert_allclose(valued["low"].astype(float), one["interval"]["low"], atol=1e-6, rtol=0)
    assert_allclose(valued["high"].astype(float), one["interval"]["high"], atol=1e-6, rtol=0)
    assert_allclose(valued["median"].astype(float), one["median"], atol=1e-6, rtol=0)
    about = (tmp_path / "values.csv.about.txt").read_text()
    assert "not an appraisal" in about and "rows: 9; valued: 8" in about
    assert not (tmp_path / "values.csv.partial").exists()
    assert "e+" not in out.read_text()  # no scientific notation in the file a person opens


def test_parquet_out_carries_the_caution(capsys, subjects, tmp_path):
    out = tmp_path / "values.parquet"
    code, _, _ = _run(
        capsys,
        "batch",
        SALES,
        "--model",
        MODEL,
        "--subjects",
        str(subjects),
        "-o",
        str(out),
        "--level",
        "0.8",
        "--chunk-rows",
        "2",
    )
    assert code == 0
    table = pq.read_table(out)
    assert b"not an appraisal" in table.schema.metadata[b"caution"]
    frame = table.to_pandas()
    assert len(frame) == 9 and (frame["level"] == 0.8).all()
    assert frame["reason"].tolist().count("") == 8


@pytest.mark.parametrize(
    ("extra", "message"),
    [
        (["-o", "values.txt"], "a .csv or .parquet file"),
        (["-o", "values.csv", "--id-column", "Parcel"], "no column 'Parcel'"),
    ],
)
def test_user_errors_exit_2(capsys, subjects, tmp_path, extra, message):
    extra = [str(tmp_path / e) if e.startswith("values") else e for e in extra]
    code, _, err = _run(
        capsys, "batch", SALES, "--model", MODEL, "--subjects", str(subjects), *extra
    )
    assert code == 2
    assert message in err
    assert not list(tmp_path.glob("values*"))


def test_missing_model_input_exits_2(capsys, tmp_path):
    subject = json.loads((SAMPLE / "subject.json").read_text())
    del subject["lot_area"]
    path = tmp_path / "roll.csv"
    pd.DataFrame([subject]).to_csv(path, index=False)
    code, _, err = _run(
        capsys,
        "batch",
        SALES,
        "--model",
        MODEL,
        "--subjects",
        str(path),
        "-o",
        str(tmp_path / "v.csv"),
    )
    assert code == 2
    assert "lacks column(s) the model needs" in err


# --- the CSV writer: pandas' to_csv(float_format="%.6f") byte for byte, built in Arrow -------
_TEXT = st.one_of(
    st.none(),
    st.lists(
        st.sampled_from(["a", ",", '"', "\n", "\r", " ", "é", ";", "x y", ""]), max_size=4
    ).map("".join),
)
_NUMBER = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.floats(min_value=-5e9, max_value=5e9),
    st.integers(-(10**6), 10**6).map(lambda k: k / 128),  # ties of the sixth decimal: k/128
    st.integers(-(10**4), 10**4).map(lambda k: k / 2e6),
    # near ties: x * 1e6 rounds to k + 0.5 in floating point, the exact product does not
    st.integers(-(10**7), 10**7).map(lambda k: (k + 0.5) / 1e6),
    st.sampled_from([0.0, -0.0, 5e-7, -5e-7, 1e-9, -1e-9, 3999999999.9999995, 4e9]),
)


@settings(max_examples=150, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 10**9), _TEXT, _NUMBER, _NUMBER), max_size=12))
def test_csv_bytes_are_pandas_to_csv_bytes(rows):
    frame = pd.DataFrame(rows, columns=["row", "id", "estimate", "low"])
    frame = frame.astype({"row": "int64", "estimate": "float64", "low": "float64"})
    for ids in (frame["id"].astype(object), frame["id"].astype("str")):
        chunk = frame.assign(id=ids)
        for header in (True, False):
            want = chunk.to_csv(index=False, header=header, float_format="%.6f").encode()
            assert csv_bytes(chunk, header) == want


def test_csv_bytes_leave_other_columns_to_pandas():
    assert csv_bytes(pd.DataFrame({"when": pd.to_datetime(["2026-01-02"])}), True) is None
    assert csv_bytes(pd.DataFrame({"mixed": [1, "a"]}, dtype=object), True) is None
