"""Tampered, truncated and random workfiles: one clear WorkfileError, never another exception.

Expected values come from the test's own edits (the key it broke is the key the message
must name) and from the operating system (which files exist after a killed save).
"""

from __future__ import annotations

import base64
import copy
import hashlib
import json
import multiprocessing
import os
import random
import signal
import time
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from appraise.engine.errors import WorkfileError
from appraise.engine.modelspec import ModelSpec
from appraise.engine.workfile import (
    EmbeddedSales,
    WorkfileState,
    load_workfile,
    load_workfile_text,
    restore,
    save_workfile,
)
from appraise.engine.workfile_schema import plain_sales_file, safe_base_name

CSV_TEXT = (
    "Sale ID,Sale Price,Sale Date,Living Area\n"
    'H-1,"$250,000",2024-01-10,1400\n'
    'H-2,"$310,500",2024-02-11,1720\n'
    'H-3,"$199,000",2024-03-02,1100\n'
    'H-4,"$275,000",2024-03-20,1500\n'
)


def _state(**kw) -> WorkfileState:
    data = CSV_TEXT.encode("utf-8")
    base = dict(
        sales_sha256=hashlib.sha256(data).hexdigest(),
        sales_path="sales.csv",
        sales_absolute_path="/nowhere/sales.csv",
        embedded_sales=EmbeddedSales("sales.csv", data),
        import_settings={"decimal": ".", "date_order": "ISO", "area_unit": "ft2", "sheet": 0},
        roles={"price": "Sale Price", "living_area": "Living Area", "sale_id": "Sale ID"},
        user_exclusions=({"row": 3, "id": "H-2", "reason": "sold to a neighbour"},),
        model=ModelSpec(target="price", features=("living_area",)).to_dict(),
        subject={"living_area": 1500.0},
        settings={"page_size": "A4"},
        last_results=None,
        created="2026-06-30T09:00:00+00:00",
    )
    base.update(kw)
    return WorkfileState(**base)


def _doc(tmp_path: Path) -> tuple[Path, dict]:
    path = tmp_path / "w.appraise.json"
    save_workfile(path, _state())
    return path, json.loads(path.read_text(encoding="utf-8"))


TAMPERED = [
    (lambda d: d["import_settings"].update(decimal=5), "import_settings.decimal"),
    (lambda d: d["import_settings"].update(area_unit="acres"), "import_settings.area_unit"),
    (lambda d: d["import_settings"].update(currency_symbol=7), "import_settings.currency_symbol"),
    (lambda d: d["import_settings"].update(date_order="XYZ"), "import_settings.date_order"),
    (lambda d: d["import_settings"].update(sheet=[1]), "import_settings.sheet"),
    (lambda d: d["import_settings"].update(colour="red"), "import_settings.colour"),
    (lambda d: d["settings"].update(checks=[1, 2]), "settings.checks"),
    (lambda d: d["settings"].update(checks={"alpha": "often"}), "settings.checks"),
    (lambda d: d["settings"].update(checks={"nonsense": 1}), "settings.checks"),
    (lambda d: d.update(comparables={"weights": ["heavy"]}), "comparables"),
    (lambda d: d.update(comparables={"filters": {"count": 0}}), "comparables"),
    (lambda d: d["roles"].update(wizard="Sale ID"), "roles.'wizard'"),
    (lambda d: d["roles"].update(price=["Sale Price"]), "'roles' must map each role"),
    (lambda d: d["subject"].update(living_area={"deep": 1}), "subject.living_area"),
    (lambda d: d["user_exclusions"][0].update(row=-4), "user_exclusions[0].row"),
    (lambda d: d["user_exclusions"][0].update(reason="x" * 20_000), "user_exclusions[0].reason"),
    (lambda d: d["sales"].update(path="a\x00b.csv"), "sales.path"),
    (lambda d: d.update(created=12), "created"),
    (
        lambda d: (
            d["sales"].update(path=None, absolute_path=None),
            d["sales"]["embedded"].update(name="sales.exe"),
        ),
        "no sales-file suffix",
    ),
]


@pytest.mark.parametrize(("edit", "key"), TAMPERED)
def test_a_tampered_workfile_is_refused_naming_the_key(tmp_path, edit, key):
    path, doc = _doc(tmp_path)
    edit(doc)
    path.write_text(json.dumps(doc), encoding="utf-8")
    with pytest.raises(WorkfileError) as info:
        load_workfile(path)
    assert key in str(info.value), str(info.value)
    assert info.value.file == str(path)


@pytest.mark.parametrize(
    ("name", "expected"),
    [
        ("", "sales.csv"),
        (".", "sales.csv"),
        ("..", "sales.csv"),
        ("../../../etc/cron.d/x.csv", "x.csv"),
        ("C:\\Users\\x\\sales.csv", "sales.csv"),
        ("sa\x00les.csv", "sales.csv"),
        (".hidden.csv", "hidden.csv"),
        ("y" * 300 + ".csv", "y" * 96 + ".csv"),
    ],
)
def test_an_embedded_file_name_is_reduced_to_a_safe_base_name(tmp_path, name, expected):
    assert safe_base_name(name, fallback_suffix=".csv") == expected
    path, doc = _doc(tmp_path)
    doc["sales"]["embedded"]["name"] = name
    path.write_text(json.dumps(doc), encoding="utf-8")
    state = load_workfile(path)
    assert state.embedded_sales.name == expected
    restored = restore(state)  # reads the embedded copy: the recorded paths do not exist
    assert restored.sales.source.sha256 == hashlib.sha256(CSV_TEXT.encode()).hexdigest()


def test_a_recorded_path_to_a_non_sales_file_is_never_read(tmp_path):
    secret = tmp_path / "secret"
    secret.write_text("not for you\n", encoding="utf-8")
    link = tmp_path / "looks_like.csv"
    link.symlink_to(secret)
    assert not plain_sales_file(secret) and not plain_sales_file(link)
    digest = hashlib.sha256(secret.read_bytes()).hexdigest()
    for recorded in ("secret", "looks_like.csv", "../" * 8 + "etc/passwd"):
        path, doc = _doc(tmp_path)
        doc["sales"].update(path=recorded, absolute_path=None, embedded=None)
        path.write_text(json.dumps(doc), encoding="utf-8")
        state = load_workfile(path)
        with pytest.raises(WorkfileError) as info:
            restore(state)
        assert "not a plain sales file" in str(info.value)
        assert digest not in str(info.value)  # the file was not even hashed
        asked: list[Path] = []

        def confirm(p: Path, asked: list[Path] = asked) -> bool:
            asked.append(p)
            return True

        with pytest.raises(WorkfileError):  # confirmed, read, and then its hash does not match
            restore(state, confirm=confirm)
        assert asked
    # with an embedded copy the hint is skipped and the note says why
    path, doc = _doc(tmp_path)
    doc["sales"].update(path="secret", absolute_path=None)
    path.write_text(json.dumps(doc), encoding="utf-8")
    restored = restore(load_workfile(path))
    assert "is not a plain sales file and was not read" in restored.sales.notes[-1]


def test_deep_nesting_and_huge_integers_are_refused_before_parsing(tmp_path):
    path = tmp_path / "deep.appraise.json"
    path.write_text('{"format": "appraise-workfile", "x": ' + "[" * 100_000 + "]" * 100_000 + "}")
    with pytest.raises(WorkfileError, match="nested 100,001 levels deep; the limit is 64"):
        load_workfile(path)
    path.write_text('{"format": "appraise-workfile", "schema_version": ' + "9" * 5001 + "}")
    with pytest.raises(WorkfileError, match="5001 digits"):
        load_workfile(path)


def _leaf_paths(doc, prefix=()):
    if isinstance(doc, dict):
        for k, v in doc.items():
            yield from _leaf_paths(v, (*prefix, k))
    elif isinstance(doc, list):
        for i, v in enumerate(doc):
            yield from _leaf_paths(v, (*prefix, i))
    yield prefix


WRONG_VALUES = st.one_of(
    st.none(),
    st.booleans(),
    st.integers(-(10**6), 10**6),
    st.floats(allow_nan=False),
    st.text(max_size=5),
    st.lists(st.integers(), max_size=2),
    st.dictionaries(st.text(max_size=3), st.integers(), max_size=2),
)


def _valid_bytes() -> bytes:
    import tempfile

    with tempfile.TemporaryDirectory() as folder:
        p = Path(folder) / "w.appraise.json"
        save_workfile(p, _state())
        return p.read_bytes()


VALID = _valid_bytes()
VALID_DOC = json.loads(VALID)
LEAVES = [p for p in _leaf_paths(VALID_DOC) if p]


# 150 wrong-typed values, 100 truncations and 100 random documents: about 2 s in all.
@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.sampled_from(LEAVES), WRONG_VALUES)
def test_any_value_replaced_by_a_wrong_one_loads_or_fails_clearly(where, value):
    doc = copy.deepcopy(VALID_DOC)
    target = doc
    for k in where[:-1]:
        target = target[k]
    target[where[-1]] = value
    try:
        state = load_workfile_text(json.dumps(doc).encode(), "w.appraise.json")
    except WorkfileError as exc:
        assert str(exc).startswith("w.appraise.json: ")
        return
    assert isinstance(state, WorkfileState)


@settings(max_examples=100, deadline=None)
@given(st.integers(0, len(VALID.rstrip()) - 1))  # the final newline alone is not damage
def test_a_truncated_workfile_fails_clearly(cut):
    with pytest.raises(WorkfileError):
        load_workfile_text(VALID[:cut], "w.appraise.json")


JSON_VALUES = st.recursive(
    st.none() | st.booleans() | st.integers() | st.floats() | st.text(max_size=8),
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(st.text(max_size=8), inner),
    max_leaves=20,
)


@settings(max_examples=100, deadline=None)
@given(JSON_VALUES, st.booleans())
def test_a_random_json_document_fails_clearly(value, marked):
    if marked and isinstance(value, dict):
        value = {"format": "appraise-workfile", "schema_version": 1, **value}
    with pytest.raises(WorkfileError):
        load_workfile_text(json.dumps(value).encode(), "w.appraise.json")


# --- a save killed at a random moment ------------------------------------------------------
def _save_forever(path: str, ready) -> None:  # runs in the child process
    big = os.urandom(2 << 20)  # a 2 MiB embedded copy makes each save take a while
    state = _state(
        sales_sha256=hashlib.sha256(big).hexdigest(), embedded_sales=EmbeddedSales("s.csv", big)
    )
    ready.set()
    while True:
        save_workfile(path, state)


KILLS = 6


@pytest.mark.slow  # six child processes, each killed mid-save: 5 to 15 s
@pytest.mark.skipif(os.name != "posix", reason="fork and SIGKILL are POSIX")
def test_kill_during_save_leaves_a_loadable_file_and_no_orphans(tmp_path):
    path = tmp_path / "w.appraise.json"
    save_workfile(path, _state())
    ctx = multiprocessing.get_context("fork")
    rng = random.Random(20261203)
    removed = kept = 0
    for _ in range(KILLS):
        ready = ctx.Event()
        child = ctx.Process(target=_save_forever, args=(str(path), ready))
        child.start()
        assert ready.wait(30)
        time.sleep(rng.uniform(0.0, 0.15))
        os.kill(child.pid, signal.SIGKILL)
        child.join()
        state = load_workfile(path)  # the previous or the new file, never a broken one
        assert state.format == "appraise-workfile"
        removed += sum("removed" in s for s in state.recovered)
        kept += sum("kept as" in s for s in state.recovered)
        assert not [p for p in tmp_path.iterdir() if p.name.endswith(".tmp")]
    # each kill left at most one temporary file, and every one was dealt with (by the next
    # open here, or by the next child's save, which cleans up what a dead writer left)
    recovered = list(tmp_path.glob("w.appraise.recovered-*.json"))
    assert kept <= len(recovered) <= KILLS and removed + kept <= KILLS
    for p in recovered:
        assert load_workfile(p).format == "appraise-workfile"


def test_a_live_save_s_temporary_file_is_left_alone(tmp_path):
    path = tmp_path / "w.appraise.json"
    save_workfile(path, _state())
    live = tmp_path / f".{path.name}.{os.getpid()}.abc.tmp"  # this process: alive, and fresh
    live.write_bytes(b'{"format": "appr')
    gone = tmp_path / f".{path.name}.999999999.abc.tmp"  # no such process
    gone.write_bytes(b'{"format": "appr')
    state = load_workfile(path)
    assert live.exists() and not gone.exists()
    assert any(gone.name in s for s in state.recovered)


def test_embedded_bytes_are_base64_in_the_file(tmp_path):
    path, doc = _doc(tmp_path)
    assert base64.b64decode(doc["sales"]["embedded"]["data"]) == CSV_TEXT.encode()


def test_a_workfile_whose_model_doubles_40_times_reopens_and_fits(tmp_path):
    from appraise.engine.fitting import fit_model

    derived = {"b0": "living_area"} | {f"b{k}": f"b{k - 1} + b{k - 1}" for k in range(1, 41)}
    spec = ModelSpec(target="price", features=("b40 / 1099511627776",), derived=derived)
    path = tmp_path / "w.appraise.json"
    save_workfile(path, _state(model=spec.to_dict(), user_exclusions=()))
    restored = restore(load_workfile(path))
    fit = fit_model(restored.sales, restored.spec)
    # b40 / 2**40 is living_area exactly (powers of two are exact in binary floating point)
    plain = fit_model(restored.sales, ModelSpec(target="price", features=("living_area",)))
    assert fit.terms[1].coef == pytest.approx(plain.terms[1].coef, rel=1e-12)


def test_an_oversized_workfile_is_refused_before_it_is_read(tmp_path, monkeypatch):
    from appraise.engine import workfile

    path = tmp_path / "w.appraise.json"
    save_workfile(path, _state())
    monkeypatch.setattr(workfile, "MAX_WORKFILE_BYTES", 100)  # the real limit is 256 MiB
    with pytest.raises(WorkfileError, match="bytes; the limit is 100"):
        load_workfile(path)
