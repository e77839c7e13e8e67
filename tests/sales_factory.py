"""Build a SalesTable straight from a DataFrame, for tests that start past the importer."""

from __future__ import annotations

import pandas as pd

from appraise.engine.roles import RoleMap
from appraise.engine.sales import ROW_COLUMN, SalesTable, SourceInfo


def sales_from_frame(frame: pd.DataFrame, roles: dict[str, str] | None = None) -> SalesTable:
    """The frame as the used rows of a sales table (file rows 2..n+1), nothing excluded."""
    f = frame.reset_index(drop=True).copy()
    f[ROW_COLUMN] = range(2, len(f) + 2)
    return SalesTable(
        frame=f,
        excluded=(),
        roles=RoleMap(dict(roles or {})),
        source=SourceInfo(
            path="<test frame>", sha256="0" * 64, format="frame", rows_in_file=len(f)
        ),
        area_unit="ft2",
    )
