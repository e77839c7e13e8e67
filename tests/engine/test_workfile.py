"""The workfile: round trip, atomic save, refusals with clear messages, reproduced numbers.

Sources of expected values: SHA-256 digests are recomputed with :mod:`hashlib`
on the bytes the test wrote (FIPS 180-4 via the standard library), JSON error
positions are where the test itself damaged the text, and file sizes come from
the operating system (``os.stat``). No number is copied from the code under test.
"""

from __future__ import annotations

import base64
import datetime as dt
import hashlib
import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from appraise.engine.errors import WorkfileError
from appraise.engine.modelspec import ModelSpec
from appraise.engine.settings import ImportSettings
from appraise.engine.workfile import (
    SCHEMA_VERSION,
    EmbeddedSales,
    WorkfileState,
    json_safe,
    load_workfile,
    save_workfile,
)

CSV_TEXT = (
    "Sale ID,Sale Price,Sale Date,Living Area,Region\n"
    'A-1,"$250,000",2024-01-10,1400,North\n'
    'A-2,"$310,500",2024-02-11,1720,North\n'
    'A-3,"$199,000",2024-03-02,1100,South\n'
)


def _state(sales_file: Path | None = None, **kw) -> WorkfileState:
    data = CSV_TEXT.encode("utf-8")
    base = dict(
        sales_sha256=hashlib.sha256(data).hexdigest(),
        sales_path="sales.csv",
        sales_absolute_path=str(sales_file) if sales_file else "/nowhere/sales.csv",
        embedded_sales=EmbeddedSales("sales.csv", data),
        import_settings={
            "decimal": ".",
            "date_order": "ISO",
            "area_unit": "ft2",
            "sheet": 0,
            "currency_symbol": "$",
        },
        roles={"price": "Sale Price", "living_area": "Living Area", "sale_id": "Sale ID"},
        user_exclusions=({"row": 3, "id": "A-2", "reason": "sold to a neighbour"},),
        model=ModelSpec(target="price", features=("living_area",)).to_dict(),
        subject={"living_area": 1500.0, "region": "North", "effective_date": "2024-06-30"},
        settings={"currency_symbol": "$", "page_size": "A4"},
        last_results={
            "fit": {"r2": 0.8123456789012345, "terms": [{"coef": -19.315}]},
            "valuation": {"estimate": 336706.7},
        },
        created="2026-06-30T09:00:00+00:00",
    )
    base.update(kw)
    return WorkfileState(**base)


# --- round trip ------------------------------------------------------------------------------


def test_round_trip_gives_back_the_same_state(tmp_path):
    path = tmp_path / "valuation.appraise.json"
    written = save_workfile(path, _state())
    again = load_workfile(path)
    assert again == written
    # floats survive exactly: JSON carries repr(float), which round-trips (Python docs, repr)
    assert again.last_results["fit"]["r2"] == 0.8123456789012345
    assert again.embedded_sales.data == CSV_TEXT.encode("utf-8")
    assert again.location == str(path)
    # saved is stamped at save time, created kept
    assert written.created == "2026-06-30T09:00:00+00:00"
    saved = dt.datetime.fromisoformat(written.saved)
    assert abs((dt.datetime.now(dt.UTC) - saved).total_seconds()) < 3600


def test_the_file_is_plain_json_with_format_and_schema(tmp_path):
    path = tmp_path / "w.json"
    save_workfile(path, _state())
    doc = json.loads(path.read_text(encoding="utf-8"))
    assert doc["format"] == "appraise-workfile"
    assert doc["schema_version"] == 1
    assert doc["sales"]["sha256"] == hashlib.sha256(CSV_TEXT.encode()).hexdigest()
    assert base64.b64decode(doc["sales"]["embedded"]["data"]) == CSV_TEXT.encode()
    assert doc["user_exclusions"] == [{"row": 3, "id": "A-2", "reason": "sold to a neighbour"}]


def test_saving_again_replaces_the_file_and_leaves_no_temporary_files(tmp_path):
    path = tmp_path / "w.json"
    save_workfile(path, _state())
    save_workfile(path, _state(settings={"currency_symbol": "EUR"}))
    assert load_workfile(path).settings == {"currency_symbol": "EUR"}
    assert sorted(p.name for p in tmp_path.iterdir()) == ["w.json"]


def test_json_safe_turns_dates_numpy_and_missing_values_into_plain_json():
    out = json_safe(
        {
            "when": pd.Timestamp("2024-03-05"),
            "day": dt.date(2024, 3, 5),
            "area": np.float64(1500.5),
            "beds": np.int64(3),
            "flag": np.bool_(True),
            "gap": float("nan"),
            "missing": pd.NaT,
            "list": (1, np.float32(2.5)),
        }
    )
    assert out == {
        "when": "2024-03-05T00:00:00",
        "day": "2024-03-05",
        "area": 1500.5,
        "beds": 3,
        "flag": True,
        "gap": None,
        "missing": None,
        "list": [1, 2.5],
    }
    assert json.loads(json.dumps(out, allow_nan=False)) == out


# --- atomic save -----------------------------------------------------------------------------


def test_a_state_that_cannot_be_serialised_leaves_the_old_file_untouched(tmp_path):
    path = tmp_path / "w.json"
    save_workfile(path, _state())
    before = path.read_bytes()
    bad = _state(settings={"palette": {"North", "South"}})  # a set has no JSON form
    with pytest.raises(WorkfileError, match=r"settings\.palette is a set"):
        save_workfile(path, bad)
    assert path.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["w.json"]


_WRITE_UNDER_LIMIT = """
import resource, signal, sys
from pathlib import Path
from appraise.engine.workfile import EmbeddedSales, WorkfileState, save_workfile
from appraise.engine.errors import WorkfileError
signal.signal(signal.SIGXFSZ, signal.SIG_IGN)  # get EFBIG instead of being killed
limit = int(sys.argv[2])
resource.setrlimit(resource.RLIMIT_FSIZE, (limit, resource.RLIM_INFINITY))
state = WorkfileState(sales_sha256="0" * 64, model={"target": "price"},
                      sales_absolute_path="/x.csv",
                      settings={"padding": "x" * (4 * limit)})
try:
    save_workfile(Path(sys.argv[1]), state)
except WorkfileError as exc:
    print("WorkfileError:", exc)
    sys.exit(3)
sys.exit(0)
"""


@pytest.mark.skipif(not hasattr(os, "fork"), reason="RLIMIT_FSIZE is POSIX only")
def test_a_write_that_fails_half_way_leaves_the_old_file_untouched(tmp_path):
    """A real failure in the middle of writing: the process may not grow any file
    beyond a size limit (setrlimit RLIMIT_FSIZE, POSIX), so the write of the
    temporary file stops with EFBIG after part of the text is on disk."""
    path = tmp_path / "w.json"
    save_workfile(path, _state())
    before = path.read_bytes()
    limit = 2 * len(before)  # the new text is larger than this; the old file is smaller
    proc = subprocess.run(
        [sys.executable, "-c", _WRITE_UNDER_LIMIT, str(path), str(limit)],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert proc.returncode == 3, proc.stderr
    assert "previous file is unchanged" in proc.stdout
    assert path.read_bytes() == before
    assert load_workfile(path).settings == _state().settings  # still the old, readable file
    assert sorted(p.name for p in tmp_path.iterdir()) == ["w.json"]


def test_a_folder_that_does_not_exist_is_a_clear_error(tmp_path):
    with pytest.raises(WorkfileError, match="cannot write in this folder"):
        save_workfile(tmp_path / "no" / "such" / "w.json", _state())


# --- refusals --------------------------------------------------------------------------------


def test_a_newer_schema_is_refused_naming_both_versions(tmp_path):
    path = tmp_path / "w.json"
    save_workfile(path, _state())
    doc = json.loads(path.read_text())
    doc["schema_version"] = SCHEMA_VERSION + 1
    doc["app_version"] = "9.0.0"
    path.write_text(json.dumps(doc))
    with pytest.raises(WorkfileError) as info:
        load_workfile(path)
    msg = str(info.value)
    assert f"schema {SCHEMA_VERSION + 1}" in msg
    assert f"schema {SCHEMA_VERSION} at most" in msg
    assert "9.0.0" in msg and str(path) in msg


def test_damaged_json_names_the_line_and_column(tmp_path):
    path = tmp_path / "w.json"
    save_workfile(path, _state())
    lines = path.read_text().splitlines()
    # break the line holding "saved": drop its trailing comma
    k = next(i for i, line in enumerate(lines) if line.lstrip().startswith('"saved"'))
    lines[k] = lines[k].rstrip(",")
    path.write_text("\n".join(lines) + "\n")
    with pytest.raises(WorkfileError) as info:
        load_workfile(path)
    # the parser notices on the next line, at its first non-blank character
    expected_col = len(lines[k + 1]) - len(lines[k + 1].lstrip()) + 1
    assert f"line {k + 2}, column {expected_col}" in str(info.value)
    assert info.value.file == str(path)


@pytest.mark.parametrize(
    ("edit", "message"),
    [
        (lambda d: d.update(format="something-else"), "not an appraise workfile"),
        (lambda d: d.pop("model"), "'model' is missing"),
        (lambda d: d.update(schema_version="1"), "schema_version"),
        (lambda d: d["sales"].update(sha256="abc"), "not a SHA-256"),
        (lambda d: d["user_exclusions"][0].pop("reason"), r"user_exclusions\[0\]\.reason"),
        (lambda d: d["user_exclusions"][0].update(row=True), r"must be int, not bool"),
        (lambda d: d["sales"]["embedded"].update(data="!!!"), "not valid base64"),
    ],
)
def test_a_tampered_workfile_is_refused_with_the_key_named(tmp_path, edit, message):
    path = tmp_path / "w.json"
    save_workfile(path, _state())
    doc = json.loads(path.read_text())
    edit(doc)
    path.write_text(json.dumps(doc))
    with pytest.raises(WorkfileError, match=message):
        load_workfile(path)


def test_embedded_bytes_that_do_not_match_their_hash_are_refused(tmp_path):
    path = tmp_path / "w.json"
    save_workfile(path, _state())
    doc = json.loads(path.read_text())
    changed = CSV_TEXT.replace("250,000", "520,000").encode()
    doc["sales"]["embedded"]["data"] = base64.b64encode(changed).decode()
    path.write_text(json.dumps(doc))
    with pytest.raises(WorkfileError) as info:
        load_workfile(path)
    # both digests recomputed here with hashlib
    assert hashlib.sha256(changed).hexdigest() in str(info.value)
    assert hashlib.sha256(CSV_TEXT.encode()).hexdigest() in str(info.value)


def test_missing_workfile_and_non_utf8_are_clear_errors(tmp_path):
    with pytest.raises(WorkfileError, match="workfile not found"):
        load_workfile(tmp_path / "absent.json")
    bad = tmp_path / "bin.json"
    bad.write_bytes(b'{"format": "\xff"}')
    with pytest.raises(WorkfileError, match="not UTF-8"):
        load_workfile(bad)


# --- restoring against real sales: the sample data through the real importer -------------------

SAMPLE = Path(__file__).resolve().parents[2] / "sample_data"


def _valuation(
    folder: Path, *, embed: bool, exclude_row: int = 120, sales_name="ashcombe_sales.csv"
):
    """Read, fit and value the sample as the app does; return what a workfile is made from."""
    from appraise.engine.fitting import fit_model
    from appraise.engine.importing import load_sales
    from appraise.engine.modelspec import load_model
    from appraise.engine.sales import Exclusion
    from appraise.engine.subject import read_subject
    from appraise.engine.valuation import value_subject
    from appraise.engine.workfile import make_state

    data = folder / "data"
    data.mkdir(parents=True, exist_ok=True)
    sales_path = data / sales_name
    shutil.copyfile(SAMPLE / sales_name, sales_path)
    settings = ImportSettings()
    sales = load_sales(sales_path, settings)
    spec = load_model(SAMPLE / "ashcombe_model.toml")
    subject = json.loads((SAMPLE / "subject.json").read_text(encoding="utf-8"))
    excl = (Exclusion(exclude_row, None, "sold between relatives", source="user"),)
    fit = fit_model(sales, spec, user_exclusions=excl)
    val = value_subject(fit, read_subject(subject, sales, settings))
    work = folder / "work"
    work.mkdir(exist_ok=True)
    wpath = work / "ashcombe.appraise.json"
    state = make_state(
        sales=sales,
        spec=spec,
        subject=subject,
        import_settings=settings,
        user_exclusions=excl,
        settings={"page_size": "A4"},
        fit=fit,
        valuation=val,
        workfile_path=wpath,
        embed=embed,
    )
    save_workfile(wpath, state)
    return wpath, sales_path, fit, val


def _reopen(wpath: Path):
    from appraise.engine.fitting import fit_model
    from appraise.engine.subject import read_subject
    from appraise.engine.valuation import value_subject
    from appraise.engine.workfile import import_settings_from_dict, restore

    state = load_workfile(wpath)
    sales, spec, subject, excl = restore(state)
    settings = import_settings_from_dict(state.import_settings)
    fit = fit_model(sales, spec, user_exclusions=excl)
    val = value_subject(fit, read_subject(subject, sales, settings))
    return state, sales, fit, val


def test_reopening_reproduces_every_number_exactly(tmp_path):
    from appraise.engine.workfile import check_reproduced

    wpath, sales_path, fit, val = _valuation(tmp_path, embed=False)
    doc = json.loads(wpath.read_text())
    # stored relative to the workfile (path arithmetic by os.path, independently)
    assert doc["sales"]["path"] == Path(os.path.relpath(sales_path, wpath.parent)).as_posix()
    assert doc["sales"]["path"] == "../data/ashcombe_sales.csv"
    assert doc["sales"]["sha256"] == hashlib.sha256(sales_path.read_bytes()).hexdigest()
    assert doc["sales"]["embedded"] is None

    state, sales, fit2, val2 = _reopen(wpath)
    assert check_reproduced(state, fit2, val2) == []
    # same machine, same code: bit-for-bit the same numbers
    assert np.array_equal(fit2.params, fit.params)
    assert fit2.rows.tolist() == fit.rows.tolist()
    assert (val2.estimate, val2.low, val2.high) == (val.estimate, val.low, val.high)
    assert [e.row for e in fit2.excluded if e.source == "user"] == [120]


def test_the_workfile_and_its_sales_can_move_together(tmp_path):
    wpath, _, _, val = _valuation(tmp_path / "before", embed=False)
    shutil.move(tmp_path / "before", tmp_path / "after")
    _, sales, _, val2 = _reopen(tmp_path / "after" / "work" / wpath.name)
    assert (
        Path(sales.source.path).resolve()
        == (tmp_path / "after" / "data" / "ashcombe_sales.csv").resolve()
    )
    assert val2.estimate == val.estimate


def test_a_changed_sales_file_is_refused_naming_both_hashes(tmp_path):
    from appraise.engine.workfile import restore

    wpath, sales_path, _, _ = _valuation(tmp_path, embed=False)
    before = hashlib.sha256(sales_path.read_bytes()).hexdigest()
    text = sales_path.read_text(encoding="utf-8")
    sales_path.write_text(text.replace('"$307,500"', '"$308,500"', 1), encoding="utf-8")
    after = hashlib.sha256(sales_path.read_bytes()).hexdigest()
    assert before != after
    with pytest.raises(WorkfileError) as info:
        restore(load_workfile(wpath))
    assert before in str(info.value) and after in str(info.value)
    assert info.value.file == str(sales_path.resolve())


def test_a_missing_sales_file_is_refused_naming_it(tmp_path):
    from appraise.engine.workfile import restore

    wpath, sales_path, _, _ = _valuation(tmp_path, embed=False)
    sales_path.unlink()
    with pytest.raises(WorkfileError) as info:
        restore(load_workfile(wpath))
    assert str(sales_path.resolve()) in str(info.value)
    assert "does not embed" in str(info.value)


@pytest.mark.parametrize("damage", ["delete", "change"])
def test_embedded_sales_stand_in_for_a_missing_or_changed_file(tmp_path, damage):
    from appraise.engine.workfile import check_reproduced

    wpath, sales_path, _, val = _valuation(tmp_path, embed=True)
    original = hashlib.sha256(sales_path.read_bytes()).hexdigest()
    if damage == "delete":
        sales_path.unlink()
    else:
        sales_path.write_text("Sale ID,Sale Price\nX,1\n", encoding="utf-8")
    state, sales, fit2, val2 = _reopen(wpath)
    assert check_reproduced(state, fit2, val2) == []
    assert val2.estimate == val.estimate
    assert sales.source.sha256 == original
    note = sales.notes[-1]
    assert note.startswith("sales read from the copy embedded in the workfile")
    if damage == "change":
        assert hashlib.sha256(sales_path.read_bytes()).hexdigest() in note


def test_an_embedded_workbook_is_read_as_a_workbook(tmp_path):
    wpath, sales_path, _, val = _valuation(tmp_path, embed=True, sales_name="ashcombe_sales.xlsx")
    sales_path.unlink()
    state, sales, _, val2 = _reopen(wpath)
    assert state.embedded_sales.name == "ashcombe_sales.xlsx"
    assert sales.source.format == "xlsx"
    assert val2.estimate == val.estimate


def test_check_reproduced_reports_numbers_beyond_one_in_a_billion(tmp_path):
    from appraise.engine.workfile import check_reproduced

    wpath, _, fit, val = _valuation(tmp_path, embed=False)
    doc = json.loads(wpath.read_text())
    r2 = doc["last_results"]["fit"]["r2"]
    doc["last_results"]["fit"]["r2"] = r2 * (1 + 1e-6)
    est = doc["last_results"]["valuation"]["estimate"]
    doc["last_results"]["valuation"]["estimate"] = est * (1 + 1e-12)  # within tolerance
    doc["last_results"]["fit"]["terms"][3]["name"] = "renamed"
    wpath.write_text(json.dumps(doc))
    diffs = check_reproduced(load_workfile(wpath), fit, val)
    assert len(diffs) == 2, diffs
    assert diffs[0].startswith("fit.r2: stored ")
    assert diffs[1].startswith('fit.terms[3].name: stored "renamed"')


def test_a_user_exclusion_of_a_row_the_sales_lack_is_refused(tmp_path):
    from appraise.engine.workfile import restore

    wpath, _, _, _ = _valuation(tmp_path, embed=False)
    doc = json.loads(wpath.read_text())
    doc["user_exclusions"][0]["row"] = 52  # excluded at import (blank price, sample README)
    wpath.write_text(json.dumps(doc))
    with pytest.raises(WorkfileError) as info:
        restore(load_workfile(wpath))
    assert info.value.row == 52


def test_restoring_judges_sale_dates_by_the_analysis_effective_date(tmp_path):
    """A sale two months after the subject's effective date is excluded on reopening (the
    plausibility rule's reference is the analysis's date of value, not today); moved to a
    later effective date it is used."""
    from appraise.engine.workfile import restore

    text = CSV_TEXT + 'A-4,"$260,000",2024-09-01,1450,South\n'
    data = text.encode("utf-8")
    common = dict(
        sales_sha256=hashlib.sha256(data).hexdigest(),
        embedded_sales=EmbeddedSales("sales.csv", data),
        user_exclusions=(),
        roles={"price": "Sale Price", "sale_date": "Sale Date", "sale_id": "Sale ID"},
    )
    early = restore(_state(**common))  # the subject's effective date is 2024-06-30
    assert [(e.row, e.reason) for e in early.sales.excluded] == [
        (5, "sale date '2024-09-01' is after the effective date plus 31 days (2024-07-31)")
    ]
    later = _state(**common, subject={"living_area": 1500.0, "effective_date": "2024-12-31"})
    assert restore(later).sales.excluded == ()
