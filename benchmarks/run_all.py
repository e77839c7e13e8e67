"""Every benchmark under ``benchmarks/``, one after the other, in one command.

    python benchmarks/run_all.py            # the full sizes (the README's table); long
    python benchmarks/run_all.py --smoke    # small sizes: checks that each one runs
    python benchmarks/run_all.py --only batch,import

Each ``bench_*.py`` runs in its own process, so one's memory does not weigh on the
next; their reports are printed as they come, with the wall time each took. Scripts
this file does not know are run with their defaults (in ``--smoke`` mode only when their
``--help`` offers ``--smoke``). The exit status is that of the first one that failed.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent

SMOKE_ARGS: dict[str, list[str]] = {
    "bench_import.py": ["--rows", "3000", "--runs", "1"],
    "bench_batch.py": ["--sales", "2000", "--subjects", "20000", "--regions", "20"],
    "bench_sample.py": ["--runs", "2"],
    "bench_diagnostics.py": [
        "--n",
        "300",
        "--repeat",
        "1",
        "--structured",
        "a",
        "--structured-rows",
        "3000",
        "--structured-regions",
        "45",
    ],
    "bench_fit.py": ["--case", "a", "--rows", "5000", "--regions", "30"],
    "bench_suggest.py": ["--sales", "400"],
}
"""Small sizes for a quick check that each benchmark runs (CI's smoke size)."""


def scripts(only: set[str] | None) -> list[Path]:
    found = sorted(HERE.glob("bench_*.py"))
    if only:
        found = [p for p in found if p.stem.removeprefix("bench_") in only]
    return found


def arguments(script: Path, smoke: bool) -> list[str] | None:
    """The arguments to run ``script`` with; None to leave it out."""
    if not smoke:
        return []
    if script.name in SMOKE_ARGS:
        return SMOKE_ARGS[script.name]
    helptext = subprocess.run(
        [sys.executable, str(script), "--help"], capture_output=True, text=True, check=False
    ).stdout
    return ["--smoke"] if "--smoke" in helptext else None


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--smoke", action="store_true", help="small sizes: does each one run?")
    ap.add_argument("--only", help="comma-separated names (import, batch, sample, ...)")
    args = ap.parse_args(argv)
    only = {s.strip() for s in args.only.split(",")} if args.only else None
    status = 0
    for script in scripts(only):
        extra = arguments(script, args.smoke)
        if extra is None:
            print(f"== {script.name}: no smoke size, left out\n", flush=True)
            continue
        print(f"== {script.name} {' '.join(extra)}".rstrip(), flush=True)
        t0 = time.perf_counter()
        code = subprocess.run([sys.executable, str(script), *extra], check=False).returncode
        print(f"== {script.name}: exit {code}, {time.perf_counter() - t0:.0f} s\n", flush=True)
        status = status or code
    return status


if __name__ == "__main__":
    sys.exit(main())
