"""Coverage of the leave-one-out intervals by segment, beside the nominal level.

An interval can be right on average and wrong for the cheap, the old or one
neighbourhood's houses. The sales are split three ways: by fifth of predicted price
(quintiles of the fitted values, so a fifth holds sales the model prices alike), by region
(the ``region`` role) and by one term the user picks (a column or role: fifths when it
is numeric, its levels otherwise). In each segment the share of sales inside their own
leave-one-out interval is set beside the nominal level; a segment more than
:data:`OUTSIDE_POINTS` percentage points away is marked (common practice for a
reviewer's first look, not a test: with 50 sales in a segment the binomial standard
error at 90% is already 4 points, so small segments are marked as thin instead).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import pandas as pd

OUTSIDE_POINTS = 5.0
"""A segment whose coverage is further than this from nominal (percentage points) is marked."""

THIN_SEGMENT = 30
"""Fewer sales than this in a segment: its coverage is shown but marked thin, not judged."""


@dataclass(frozen=True)
class Segment:
    """The coverage in one segment."""

    by: str
    """What the sales were split by: "predicted price", "region" or a term."""
    label: str
    n: int
    inside: int

    @property
    def coverage(self) -> float:
        return self.inside / self.n if self.n else float("nan")

    def outside(self, level: float) -> bool:
        return self.n >= THIN_SEGMENT and abs(100 * (self.coverage - level)) > OUTSIDE_POINTS

    @property
    def thin(self) -> bool:
        return self.n < THIN_SEGMENT


@dataclass(frozen=True)
class SegmentCoverage:
    """Coverage by segment of one fit's leave-one-out intervals."""

    level: float
    spread: str
    """The spread method of the intervals ("constant" or "modelled")."""
    segments: tuple[Segment, ...]

    def worst(self) -> Segment | None:
        """The judged (not thin) segment furthest from the nominal level."""
        judged = [s for s in self.segments if not s.thin]
        return max(judged, key=lambda s: abs(s.coverage - self.level)) if judged else None

    def outside(self) -> tuple[Segment, ...]:
        return tuple(s for s in self.segments if s.outside(self.level))

    def to_dict(self) -> dict:
        worst = self.worst()
        return {
            "nominal": self.level,
            "spread": self.spread,
            "outside_points": OUTSIDE_POINTS,
            "thin_below": THIN_SEGMENT,
            "segments": [
                {
                    "by": s.by,
                    "segment": s.label,
                    "n": s.n,
                    "coverage": s.coverage,
                    "outside": s.outside(self.level),
                    "thin": s.thin,
                }
                for s in self.segments
            ],
            "worst": None
            if worst is None
            else {"by": worst.by, "segment": worst.label, "coverage": worst.coverage},
        }


def fifths(values: np.ndarray, unit: str = "") -> np.ndarray:
    """Label each value with its fifth ("1 of 5 (lowest)" ... "5 of 5 (highest)")."""
    values = np.asarray(values, dtype=float)
    out = np.full(values.shape, None, dtype=object)
    ok = np.isfinite(values)
    if ok.sum() < 5:
        return out
    # ranks as pandas' rank(method="first") gives them: ties in order of appearance
    order = np.argsort(values[ok], kind="stable")
    ranks = np.empty(len(order), dtype=float)
    ranks[order] = np.arange(1, len(order) + 1)
    k = np.minimum((5 * (ranks - 1) / ok.sum()).astype(int), 4)
    names = np.array(["1 of 5 (lowest)", "2 of 5", "3 of 5", "4 of 5", "5 of 5 (highest)"], object)
    out[ok] = names[k]
    return out


def coverage_by_segment(
    inside: np.ndarray,
    usable: np.ndarray,
    splits: Mapping[str, np.ndarray],
    *,
    level: float,
    spread: str,
) -> SegmentCoverage:
    """Coverage in each segment of each split.

    Parameters
    ----------
    inside:
        Sale inside its own leave-one-out interval.
    usable:
        Sale has a leave-one-out interval (leverage below 1).
    splits:
        ``{name: label per sale}``; a None label leaves the sale out of that split.
    """
    inside = np.asarray(inside, dtype=bool)
    usable = np.asarray(usable, dtype=bool)
    segments: list[Segment] = []
    for by, labels in splits.items():
        labels = np.asarray(labels, dtype=object)
        keep = usable & ~pd.isna(labels)
        if not keep.any():
            continue
        # each distinct label hashed by pandas, counted with bincount (a county's split is
        # a million labels and a handful of segments); labels alike as text are one
        codes, uniques = pd.factorize(labels[keep])
        n = np.bincount(codes, minlength=len(uniques))
        hits = np.bincount(codes, weights=inside[keep], minlength=len(uniques))
        by_text: dict[str, list[int]] = {}
        for u, count, hit in zip(uniques, n.tolist(), hits.tolist(), strict=True):
            tally = by_text.setdefault(str(u), [0, 0])
            tally[0] += count
            tally[1] += round(hit)
        for label in sorted(by_text):
            segments.append(Segment(by, label, by_text[label][0], by_text[label][1]))
    return SegmentCoverage(level=float(level), spread=spread, segments=tuple(segments))


__all__ = [
    "OUTSIDE_POINTS",
    "THIN_SEGMENT",
    "Segment",
    "SegmentCoverage",
    "coverage_by_segment",
    "fifths",
]
