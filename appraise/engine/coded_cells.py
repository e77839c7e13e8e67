"""A column of cells held as codes into its distinct cells: how a large CSV stays small.

A CSV column read as Python strings costs about 55 bytes a cell; two million rows of ten
columns is over a gigabyte before anything is cleaned. :class:`CodedCells` keeps one
``int32`` code per cell and each distinct cell once, so a column costs four bytes a cell
plus its distinct texts. It is built chunk by chunk (:class:`ColumnCoder`), so the cells of
only one chunk are ever held as separate strings.

It answers what the importer asks of a column read from a file: its length, one cell
(``cells[i]``), the first cells (``cells[:k]``), blanking a misaligned row
(``cells[i] = None``) and its distinct cells with their codes in order of first
appearance (:meth:`CodedCells.factorized`), from which the cleaning works.
"""

from __future__ import annotations

from collections.abc import Iterator

import numpy as np
import pandas as pd

from .cell_columns import blank_mask


class CodedCells:
    """The cells of one column: ``uniques[codes[i]]``, or None where ``codes[i] == -1``."""

    __slots__ = ("codes", "uniques")

    def __init__(self, codes: np.ndarray, uniques: np.ndarray) -> None:
        self.codes = codes
        self.uniques = uniques

    def __len__(self) -> int:
        return len(self.codes)

    def __getitem__(self, key: int | slice) -> object:
        if isinstance(key, slice):
            codes = self.codes[key]
            return [None if c < 0 else self.uniques[c] for c in codes.tolist()]
        c = int(self.codes[key])
        return None if c < 0 else self.uniques[c]

    def __setitem__(self, i: int, value: None) -> None:
        if value is not None:
            raise TypeError("a coded cell can only be blanked (set to None)")
        self.codes[i] = -1

    def __iter__(self) -> Iterator[object]:
        return iter(self[:])

    def __repr__(self) -> str:
        return f"CodedCells({len(self)} cells, {len(self.uniques)} distinct)"

    def factorized(self) -> tuple[np.ndarray, np.ndarray]:
        """``(codes, uniques)`` as :func:`pandas.factorize` gives them for the cells.

        The distinct cells that occur, numbered by first appearance; -1 for a None cell.
        """
        present = self.codes >= 0
        c = self.codes[present]
        if len(c):  # already numbered by first appearance (Arrow's and the coder's
            # codes are, until a cell is blanked) with every distinct cell in use: as is
            top = np.maximum.accumulate(c)
            if int(top[-1]) == len(self.uniques) - 1 and int(np.diff(top, prepend=-1).max()) <= 1:
                return np.where(present, self.codes, -1).astype(np.intp), self.uniques
        if present.all():
            sub, order = pd.factorize(self.codes)
            return sub.astype(np.intp, copy=False), self.uniques[np.asarray(order)]
        out = np.full(len(self.codes), -1, dtype=np.intp)
        sub, order = pd.factorize(self.codes[present])
        out[present] = sub
        return out, self.uniques[np.asarray(order)]


class ColumnCoder:
    """Builds the :class:`CodedCells` of ``width`` columns from chunks of their cells.

    Each chunk's cells are factorised at once (codes and the chunk's distinct cells);
    :meth:`finish` factorises the chunks' distinct cells together, so each distinct cell
    is held once and the codes count first appearances through the whole file.
    """

    def __init__(self, width: int) -> None:
        self.width = width
        self.rows = 0
        self._parts: list[list[tuple[np.ndarray, np.ndarray]]] = [[] for _ in range(width)]

    def add(self, columns: list[np.ndarray]) -> None:
        """One chunk: ``width`` object arrays of the same length (str cells; a None or
        NaN cell, which pandas gives for the missing end of a short row, is held as
        ``""``)."""
        if len(columns) != self.width:
            raise ValueError(f"a chunk of {len(columns)} columns for {self.width}")
        for parts, cells in zip(self._parts, columns, strict=True):
            codes, uniques = pd.factorize(cells, use_na_sentinel=True)
            uniques = np.asarray(uniques, dtype=object)
            if len(codes) and codes.min() < 0:
                at = np.flatnonzero(uniques == "")
                if not len(at):
                    uniques, at = np.append(uniques, np.array([""], dtype=object)), [len(uniques)]
                codes = np.where(codes < 0, at[0], codes)
            parts.append((codes.astype(np.int32), uniques))
        self.rows += len(columns[0]) if columns else 0

    def finish(self) -> list[CodedCells]:
        """The columns (the chunks are let go)."""
        out = []
        for parts in self._parts:
            if not parts:
                out.append(CodedCells(np.zeros(0, np.int32), np.zeros(0, dtype=object)))
                continue
            chunk_uniques = np.concatenate([u for _, u in parts])
            remap, uniques = pd.factorize(chunk_uniques, use_na_sentinel=True)
            remap = remap.astype(np.int32)
            pieces, offset = [], 0
            for codes, u in parts:
                mapped = remap[offset : offset + len(u)]
                pieces.append(np.where(codes >= 0, mapped[np.maximum(codes, 0)], -1))
                offset += len(u)
            codes = np.concatenate(pieces).astype(np.int32, copy=False)
            out.append(CodedCells(codes, np.asarray(uniques, dtype=object)))
            parts.clear()  # the chunk arrays are no longer needed
        return out


def last_filled_row(columns: list[CodedCells]) -> int:
    """Position of the last row holding anything but white space in any column (-1: none)."""
    last = -1
    for col in columns:
        filled = ~np.append(blank_mask(col.uniques), True)[col.codes[last + 1 :]]
        hits = np.flatnonzero(filled)
        if len(hits):
            last += 1 + int(hits[-1])
    return last


def cut(columns: list[CodedCells], start: int, stop: int) -> list[CodedCells]:
    """The rows ``start`` to ``stop`` (not included) of each column."""
    return [CodedCells(c.codes[start:stop].copy(), c.uniques) for c in columns]
