"""benchmarks/bench_fit.py at a smoke size: every side runs, and the sides agree.

The one-pass floor is an independent few-line implementation (pyarrow, bincount, Cholesky):
the prediction interval it gives for the benchmark's subject must equal the one appraise's
structured path gives through ``FitResult.predict``; the statsmodels script must report the
same coefficient and standard error as appraise's JSON. No timing is asserted.
"""

from __future__ import annotations

import importlib.util
import json
import subprocess
import sys
from pathlib import Path

import pytest
from numpy.testing import assert_allclose

BENCH = Path(__file__).resolve().parents[1] / "benchmarks" / "bench_fit.py"


def _bench():
    spec = importlib.util.spec_from_file_location("bench_fit", BENCH)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.mark.slow
def test_every_side_runs_and_the_sides_agree(tmp_path):
    bench = _bench()
    results = bench.run_case("a", 3000, 45, "fit", tmp_path)
    by = {r["side"]: r for r in results}
    assert all(r.get("ok") for r in results), [r.get("err") for r in results]
    inside = by["appraise, inside one process"]["inside"]
    assert inside["path"].startswith("structured")
    floor = [float(v) for v in by["one-pass floor"]["out"].split()]
    assert_allclose([inside["low"], inside["high"]], floor[2:], rtol=1e-8)
    # appraise's own JSON against the statsmodels formula script: x01's coefficient and SE
    out = subprocess.run(
        bench.appraise_argv("fit", bench_files(tmp_path)), capture_output=True, check=True
    )
    terms = {t["name"]: t for t in json.loads(out.stdout)["terms"]}
    coef, se, _ = by["statsmodels formula script"]["out"].split()
    assert_allclose([terms["x01"]["coef"], terms["x01"]["se"]], [float(coef), float(se)], rtol=1e-8)
    assert_allclose(terms["x01"]["se"], floor[0], rtol=1e-8)


def bench_files(folder: Path) -> dict[str, Path]:
    return {
        k: folder / f"{k}.{ext}"
        for k, ext in (("sales", "parquet"), ("model", "toml"), ("subject", "json"))
    }


if __name__ == "__main__":  # pragma: no cover
    sys.exit(pytest.main([__file__, "-q"]))
