"""A typed number column gets its one format from a vectorised pass, the same as the
cell-by-cell decision."""

import numpy as np

from appraise.report.numbers import column_format


def test_typed_and_object_columns_get_the_same_format():
    for values in ([8822.0, 13981.0, np.nan], [1964.0, 2001.0, np.nan], [2.5, 10000.5]):
        typed = column_format(np.array(values))
        cells = column_format(list(values))
        for v in values:
            assert typed(v) == cells(v)
    assert column_format(np.array([8822.0, 13981.0]))(8822.0) == "8,822"
    assert column_format(np.array([1964, 2001]))(1964) == "1964"  # years stay bare
