"""Column roles: which column is the price, the sale date, the living area...

Roles are suggested from header names and always overridable. A role map can be
saved to and read from JSON so the same export layout is read the same way again.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType

# Role name -> one-line description. The order is the order shown to the user.
ROLES: Mapping[str, str] = MappingProxyType(
    {
        "price": "Sale price",
        "sale_date": "Date the sale closed",
        "living_area": "Gross living area",
        "lot_area": "Lot (site) area",
        "year_built": "Year built",
        "bedrooms": "Bedrooms",
        "bathrooms": "Bathrooms",
        "latitude": "Latitude (decimal degrees)",
        "longitude": "Longitude (decimal degrees)",
        "region": "Neighbourhood, district or zone",
        "condition": "Condition or quality rating",
        "arms_length": "Arm's-length flag (yes/no)",
        "sale_id": "Sale identifier",
    }
)

REQUIRED_ROLES: tuple[str, ...] = ("price",)


@dataclass(frozen=True)
class RoleMap:
    """role -> column header. Roles absent from the mapping are unassigned."""

    columns: Mapping[str, str] = field(default_factory=dict)

    def column(self, role: str) -> str | None:
        return self.columns.get(role)
