"""Colours shared by the app's plots and the worksheet's figures (plain data, no Qt).

Okabe & Ito (2008), "Color Universal Design": eight colours told apart under the
common forms of colour-vision deficiency. Black is kept for the subject, so regions
draw from the other seven; after seven, colours repeat with another symbol.
"""

from __future__ import annotations

OKABE_ITO: dict[str, str] = {
    "orange": "#E69F00",
    "sky blue": "#56B4E9",
    "bluish green": "#009E73",
    "yellow": "#F0E442",
    "blue": "#0072B2",
    "vermillion": "#D55E00",
    "reddish purple": "#CC79A7",
    "black": "#000000",
}
REGION_COLOURS: tuple[str, ...] = tuple(v for k, v in OKABE_ITO.items() if k != "black")
REGION_SYMBOLS: tuple[str, ...] = ("o", "s", "t", "d", "p", "h")


def region_style(index: int) -> tuple[str, str]:
    """(hex colour, pyqtgraph symbol) of the ``index``-th region in sorted order."""
    n = len(REGION_COLOURS)
    return REGION_COLOURS[index % n], REGION_SYMBOLS[(index // n) % len(REGION_SYMBOLS)]


def rgba(hex_colour: str, alpha: int = 255) -> tuple[int, int, int, int]:
    """``"#0072B2"`` -> ``(0, 114, 178, alpha)``."""
    h = hex_colour.lstrip("#")
    return int(h[0:2], 16), int(h[2:4], 16), int(h[4:6], 16), alpha
