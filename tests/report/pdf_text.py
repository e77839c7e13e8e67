"""Reading a PDF back with pypdf: text with whitespace collapsed, and image XObjects."""

from __future__ import annotations

from pathlib import Path

from pypdf import PdfReader


def squeeze(text: str) -> str:
    """Collapse runs of whitespace (pypdf returns tabs between separately placed words)."""
    return " ".join(text.split())


def page_texts(path: str | Path) -> list[str]:
    return [squeeze(p.extract_text() or "") for p in PdfReader(str(path)).pages]


def image_xobjects(path: str | Path) -> list[tuple[int, int]]:
    """(width, height) of every image XObject on every page, read from the page resources."""
    found = []
    for page in PdfReader(str(path)).pages:
        resources = page.get("/Resources")
        if resources is None:
            continue
        xobjects = resources.get_object().get("/XObject")
        if xobjects is None:
            continue
        for ref in xobjects.get_object().values():
            obj = ref.get_object()
            if obj.get("/Subtype") == "/Image":
                found.append((int(obj["/Width"]), int(obj["/Height"])))
    return found
