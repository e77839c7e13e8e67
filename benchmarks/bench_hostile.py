"""Hostile inputs of issue 15, each run in a fresh process: wall time, peak memory, outcome.

    .venv/bin/python benchmarks/bench_hostile.py

Every case must end within seconds and well under 1.5 GB with a one-line refusal or a
result. Files are generated into a temporary folder (tests/engine/hostile_files.py).
"""

from __future__ import annotations

import subprocess
import sys
import tempfile
import textwrap
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests" / "engine"))

import hostile_files  # noqa: E402

SAMPLE = ROOT / "sample_data" / "ashcombe_sales.csv"

CHILD = """
import resource, sys, time
t = time.perf_counter()
from appraise.cli import main
code = main(sys.argv[1:])
sys.stderr.flush()
peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
print(f"@@ {code} {time.perf_counter() - t:.3f} {peak:.0f}")
"""


def run(argv: list[str]) -> tuple[int, float, float, str]:
    p = subprocess.run(
        [sys.executable, "-c", CHILD, *argv], capture_output=True, text=True, timeout=600
    )
    line = next(x for x in p.stdout.splitlines() if x.startswith("@@ "))
    _, code, secs, mib = line.split()
    said = (p.stderr.strip().splitlines() or [""])[-1]
    return int(code), float(secs), float(mib), said


def _make_big_export(path: Path, rows: int) -> None:
    """The messy listing export of bench_import.py (137 MB at 2,000,000 rows), written by a
    process of its own: a child's peak memory counts its parent's (Linux keeps the high
    mark across fork and exec), so this one must not grow the parent."""
    code = (
        "import sys; from pathlib import Path; sys.path.insert(0, sys.argv[1]); "
        "from bench_import import make_export; make_export(Path(sys.argv[2]), int(sys.argv[3]))"
    )
    here = str(Path(__file__).resolve().parent)
    subprocess.run([sys.executable, "-c", code, here, str(path), str(rows)], check=True)


def main() -> None:
    with tempfile.TemporaryDirectory() as folder:
        d = Path(folder)

        def model(name: str, text: str) -> str:
            p = d / name
            p.write_text(textwrap.dedent(text), encoding="utf-8")
            return str(p)

        doubling = ['target = "price"', 'features = ["b40 / 1099511627776"]', "[derived]"]
        doubling += ['b0 = "living_area"'] + [f'b{k} = "b{k - 1} + b{k - 1}"' for k in range(1, 41)]
        chain = ['target = "price"', 'features = ["c350"]', "[derived]", 'c0 = "living_area"']
        chain += [f'c{k} = "c{k - 1} + 1"' for k in range(1, 351)]
        deep = d / "deep.json"
        deep.write_text('{"a": ' + "[" * 100_000 + "]" * 100_000 + "}", encoding="utf-8")
        big = d / "big.csv"
        _make_big_export(big, 2_000_000)
        tiny = d / "tiny.csv"
        tiny.write_text("id,price\na,300000\nb,310000\n", encoding="utf-8")
        head = hostile_files._HEAD + b"<sheetData>"
        quoted = hostile_files.workbook_with_sheet_xml(  # the far cell with single quotes
            d / "quoted.xlsx",
            head + b"<row r='1048576'><c r='XFD1048576'><v>1</v></c></row></sheetData></worksheet>",
        )
        wide = d / "wide.csv"  # a header of a million columns, no rows
        wide.write_text(",".join(f"c{i}" for i in range(1_000_000)) + "\n", encoding="utf-8")

        def strings_bomb():  # one sheet row repeated: 450 MB of XML stored in about 2 MB
            yield head
            row = b"<row><c t='inlineStr'><is><t>a</t></is></c></row>" * 100_000
            for _ in range(90):
                yield row
            yield b"</sheetData></worksheet>"

        bomb2 = hostile_files.workbook_with_sheet_xml(d / "bomb2.xlsx", strings_bomb())
        cases = [
            ("baseline: a 2-row CSV (start-up cost)", ["data", str(tiny)]),
            ("derived doubling 40 times", ["fit", str(SAMPLE), "-m", model("dbl.toml", "\n".join(doubling))]),
            ("350 chained derived variables", ["fit", str(SAMPLE), "-m", model("ch.toml", "\n".join(chain))]),
            ("XLSX, one cell at XFD1048576", ["data", str(hostile_files.far_cell_xlsx(d / "far.xlsx", honest_dimension=False))]),
            ("XLSX, 10,000,000 rows of sheet XML", ["data", str(hostile_files.many_rows_xlsx(d / "rows.xlsx", 10_000_000))]),
            ("XLSX zip bomb, 600 MiB unzipped", ["data", str(hostile_files.zip_bomb_xlsx(d / "bomb.xlsx", 600))]),
            ("XLSX, far cell written r='XFD1048576'", ["data", str(quoted)]),
            ("XLSX, 9,000,000 rows under 512 MiB", ["data", str(bomb2)]),
            ("CSV, a header of 1,000,000 columns", ["data", str(wide)]),
            ("CSV, 2,000,000 rows (messy export)", ["data", str(big)]),
            ("subject JSON nested 100,000 deep", ["value", str(SAMPLE), "-m", str(ROOT / "sample_data" / "ashcombe_model.toml"), "-s", str(deep)]),
        ]  # fmt: skip
        print(f"{'case':40} {'exit':>4} {'seconds':>8} {'peak MiB':>9}  last line")
        for name, argv in cases:
            code, secs, mib, said = run(argv)
            print(f"{name:40} {code:>4} {secs:>8.2f} {mib:>9.0f}  {said[:90]}")


if __name__ == "__main__":
    main()
