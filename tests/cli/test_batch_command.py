"""``appraise batch`` end to end on the sample (Ashcombe Vale): CSV and Parquet out, one row
per subject in input order, the caution beside the file; user errors exit 2."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pyarrow.parquet as pq
import pytest
from numpy.testing import assert_allclose

from appraise.cli import main

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
