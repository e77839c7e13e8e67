"""Settings passed into the engine. No global state: callers build one and pass it."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

DateOrder = Literal["ISO", "DMY", "MDY"]
AreaUnit = Literal["ft2", "m2"]
DecimalMark = Literal[".", ","]

SQFT_PER_M2 = 10.763910416709722  # 1 m = 3.28083989501 ft exactly (0.3048 m per ft)


@dataclass(frozen=True)
class ImportSettings:
    """How to read a sales export.

    decimal:
        "." for ``412,500.00``; "," for ``412.500,00``.
    date_order:
        How to read an ambiguous date such as ``03/04/2024``. "ISO" means only
        unambiguous dates are accepted and an ambiguous one is an error naming the
        row; "DMY"/"MDY" resolve it and the number resolved is reported.
    area_unit:
        The unit the file's living and lot areas are in; kept with the table.
    sheet:
        For .xlsx: the sheet name or 0-based index (default the first sheet).
    currency_symbol:
        Stripped from money cells in addition to the common ones ($, EUR, GBP...).
    """

    decimal: DecimalMark = "."
    date_order: DateOrder = "ISO"
    area_unit: AreaUnit = "ft2"
    sheet: str | int = 0
    currency_symbol: str = "$"
