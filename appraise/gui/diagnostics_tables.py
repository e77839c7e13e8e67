"""What the checks tab shows in words and tables, from a
:class:`~appraise.engine.diagnostics.Diagnostics`: the figures of the summary strip
with their verdicts, the rows of the flagged-sales, terms and ratio-study tables, the
residual tests and accuracy as HTML, and the Qt table models.

The per-sale model keeps one numpy array per column and formats a cell only when Qt
asks for it; sorting is one ``argsort`` of a column, so 50,000 sales sort at once.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from html import escape

import numpy as np
import pandas as pd
from PySide6.QtCore import QAbstractTableModel, QModelIndex, QPersistentModelIndex, Qt
from PySide6.QtGui import QBrush, QColor

from appraise.engine.diagnostics import Diagnostics
from appraise.engine.diagnostics.coverage import OUTSIDE_POINTS, THIN_SEGMENT
from appraise.engine.spread import SPREAD_METHOD_TEXT
from appraise.report.diagnostics_section import PRB_CI_LEVEL
from appraise.report.labels import (
    RATIO_MEASURE_LABELS,
    RATIO_MEASURE_SHORT,
    term_label,
    without_source_tags,
)
from appraise.report.numbers import (
    MISSING,
    money,
    number,
    p_phrase,
    percent,
    pvalue,
    unscientific,
)

from .diagnostics_plots import FLAG_COLOUR, ascending_order, number_text, positions_by_row
from .plot_items import OKABE_ITO
from .table_sorting import SortableTableModel, stable_sort

WITHIN_COLOUR = OKABE_ITO["blue"]
OUTSIDE_COLOUR = OKABE_ITO["vermillion"]
INFO_COLOUR = "#8A8A8A"

VERDICT_MARKS = {
    "within": ("\u2713 within range", WITHIN_COLOUR, "#EEF4FA"),
    "outside": ("\u2717 outside range", OUTSIDE_COLOUR, "#FCEDE4"),
    "info": ("", INFO_COLOUR, "#F4F4F4"),
}
"""Verdict -> (words, colour of the mark and edge, tile background). Okabe-Ito blue and
vermillion stay apart under the common colour-vision deficiencies; the words carry the
verdict on their own."""

MEASURE_FORMATS = {"cod": ".2f", "ppe10": ".1f"}
"""Format of each ratio-study measure in the strip; the others get ``.3f``."""


# --- the strip ---------------------------------------------------------------------------------


@dataclass(frozen=True)
class SummaryItem:
    """One figure of the strip: its value, what it is judged against, and the verdict.

    ``verdict`` is "within", "outside" or "info" (a figure without a range).
    """

    key: str
    label: str
    value: str
    reference: str
    verdict: str
    detail: str = ""


def measure_text(name: str, value: float) -> str:
    """A ratio-study measure as the strip shows it (``COD`` to 2 decimals, ...)."""
    if value is None or not math.isfinite(value):
        return MISSING
    return format(value, MEASURE_FORMATS.get(name, ".3f"))


def summary_items(d: Diagnostics, currency: str = "$") -> tuple[SummaryItem, ...]:
    """The strip's figures: ratio study, accuracy, coverage, condition number, spread."""
    items = []
    rs = d.ratio_study
    for m in rs.measures:
        value = measure_text(m.name, m.value)
        if m.name == "ppe10" and value != MISSING:
            value += "%"
        if m.name == "prb" and math.isfinite(m.ci_low):
            value += (
                f" ({percent(PRB_CI_LEVEL)}: {measure_text(m.name, m.ci_low)} to "
                f"{measure_text(m.name, m.ci_high)})"
            )
        verdict = m.verdict if m.verdict in ("within", "outside") else "info"
        reference = f"range {m.range_text()}" if m.range_text() else "no range in the standard"
        long_name = RATIO_MEASURE_LABELS.get(m.name, m.label)
        detail = "; ".join(without_source_tags(t) for t in (long_name, m.source, m.note) if t)
        label = RATIO_MEASURE_SHORT.get(m.name, m.label)
        items.append(SummaryItem(m.name, label, value, reference, verdict, detail))
    loo, kf = d.loo, d.kfold
    items.append(
        SummaryItem(
            "loo_rmse",
            "leave-one-out RMSE",
            money(loo.rmse_price, currency),
            f"median abs. error {_pct(loo.mdape)}",
            "info",
            f"each sale valued by the model fitted without it; {loo.n_used} sales",
        )
    )
    items.append(
        SummaryItem(
            "kfold_rmse",
            f"{kf.folds}-fold RMSE",
            money(kf.rmse_price, currency),
            f"median abs. error {_pct(kf.mdape)}",
            "info",
            f"{kf.folds} folds, shuffle seed {kf.seed}",
        )
    )
    items.append(
        SummaryItem(
            "coverage",
            "inside own LOO interval",
            _pct(100 * loo.coverage),
            f"nominal {100 * loo.level:g}%",
            "outside" if loo.coverage_short else "within",
            "share of sales inside their own leave-one-out prediction interval; outside "
            "when more than two binomial standard errors below the nominal level",
        )
    )
    cond = d.collinearity.condition
    items.append(
        SummaryItem(
            "condition",
            "condition number",
            f"{cond.number:.1f}",
            f"threshold {cond.threshold:g}",
            "outside" if cond.exceeds else "within",
            cond.scaling,
        )
    )
    rt = d.residual_tests
    items.append(
        SummaryItem(
            "spread",
            "error spread",
            "uneven" if rt.heteroskedastic else "even",
            f"Breusch-Pagan (Koenker), {p_phrase(rt.koenker.p_value)}",
            "outside" if rt.heteroskedastic else "within",
            "\n".join(window_wording(x) for x in rt.suggestions)
            or "studentized Breusch-Pagan test finds no uneven spread",
        )
    )
    return tuple(items)


def spread_advice(d: Diagnostics) -> str:
    """What to do about uneven spread (robust errors, a log response), or ""."""
    rt = d.residual_tests
    if not rt.heteroskedastic:
        return ""
    tips = rt.suggestions[1:] or rt.suggestions
    return "Uneven spread: " + "; ".join(window_wording(t) for t in tips) + "."


WINDOW_CONTROLS: tuple[tuple[str, str], ...] = (
    ('cov_type = "HC3" in the model file', "choose HC3 in Standard errors (Model tab)"),
    ('cov_type = "HC1" in the model file', "choose HC1 in Standard errors (Model tab)"),
    ('response = "log"', "choose log price in Response (Model tab)"),
)
"""Advice written for the model file, and the control in the window that does the same."""


def window_wording(text: str) -> str:
    """Advice that names the window's control rather than a model-file line."""
    for file_words, window_words in WINDOW_CONTROLS:
        text = text.replace(file_words, window_words)
    return text


def _pct(x: float) -> str:
    return MISSING if x is None or not math.isfinite(x) else f"{x:.1f}%"


# --- table rows --------------------------------------------------------------------------------


def flagged_cells(d: Diagnostics) -> list[tuple[str, str, str]]:
    """Row, sale id and findings of each flagged sale, most influential first."""
    return [flagged_row(f) for f in d.flags]


def flagged_row(f) -> tuple[str, str, str]:
    """Row, sale id and findings of one flagged sale (a ``Flag`` of the diagnostics)."""
    return (
        str(f.row),
        f.sale_id or "",
        unscientific("; ".join(without_source_tags(x.text) for x in f.findings)),
    )


class LazyRows(Sequence):
    """``n`` table rows (or tooltips) made by ``make(k)`` only when a view asks for row
    ``k``, and kept: a county's tens of thousands of flagged sales are not all formatted
    when the checks arrive, only the ones scrolled to."""

    def __init__(self, n: int, make: Callable[[int], object]) -> None:
        self._n, self._make = n, make
        self._made: dict[int, object] = {}

    def __len__(self) -> int:
        return self._n

    def __getitem__(self, k):  # type: ignore[override]
        if isinstance(k, slice):
            return [self[i] for i in range(*k.indices(self._n))]
        if k < 0:
            k += self._n
        if not 0 <= k < self._n:
            raise IndexError(k)
        if k not in self._made:
            self._made[k] = self._make(k)
        return self._made[k]


def term_cells(d: Diagnostics) -> tuple[list[tuple[str, ...]], dict[tuple[int, int], str]]:
    """One row per model term: its variance inflation ((G)VIF), its standard-error
    inflation (GVIF^(1/(2 df))), the rule and the verdict."""
    cells, colours = [], {}
    for k, t in enumerate(d.collinearity.terms):
        verdict = "\u2717 redundant" if t.flagged else "\u2713 fine"
        cells.append(
            (
                term_label(t.expression),
                t.kind,
                str(t.df),
                number_text(t.gvif, ".4g"),
                number_text(t.gvif_root, ".3f"),
                t.rule,
                verdict,
            )
        )
        colours[(k, 6)] = OUTSIDE_COLOUR if t.flagged else WITHIN_COLOUR
    return cells, colours


def measure_cells(d: Diagnostics) -> tuple[list[tuple[str, ...]], dict, list[str]]:
    """Every ratio-study measure with its confidence interval, range, verdict and source."""
    cells, colours, tips = [], {}, []
    for k, m in enumerate(d.ratio_study.measures):
        ci = (
            f"{m.ci_low:.4f} to {m.ci_high:.4f}"
            if math.isfinite(m.ci_low) and math.isfinite(m.ci_high)
            else ""
        )
        words = VERDICT_MARKS[m.verdict][0] if m.verdict in ("within", "outside") else "no range"
        value = number_text(m.value, ".4f") + ("%" if m.name == "ppe10" else "")
        label = RATIO_MEASURE_LABELS.get(m.name, m.label)
        cells.append((label, value, ci, m.range_text(), words))
        if m.verdict in ("within", "outside"):
            colours[(k, 4)] = VERDICT_MARKS[m.verdict][1]
        tips.append("; ".join(without_source_tags(t) for t in (m.source, m.note) if t))
    return cells, colours, tips


def coverage_html(d: Diagnostics, verdict) -> list[str]:
    """The coverage of the leave-one-out intervals by segment, as an HTML table."""
    c = d.coverage
    if c is None or not c.segments:
        return []
    out = [
        "<h3>Coverage by segment</h3>",
        f"<p>{escape(SPREAD_METHOD_TEXT.get(c.spread, c.spread)).capitalize()}. Share of the "
        f"sales in each segment inside their own leave-one-out {100 * c.level:g}% interval; "
        f"more than {OUTSIDE_POINTS:g} points from nominal is marked, under "
        f"{THIN_SEGMENT} sales is thin. To change the spread, set <i>Interval spread</i> in "
        "the model editor.</p>",
        '<table border="1" cellspacing="0" cellpadding="3">',
        "<tr><th>Split by</th><th>Segment</th><th>Sales</th><th>Coverage</th><th>Verdict</th></tr>",
    ]
    for s in c.segments:
        mark = "thin" if s.thin else verdict(s.outside(c.level), "as nominal", "off nominal")
        out.append(
            "<tr>"
            + "".join(
                f"<td>{escape(x)}</td>" for x in (s.by, s.label, f"{s.n:,}", _pct(100 * s.coverage))
            )
            + f"<td>{mark}</td></tr>"
        )
    out.append("</table>")
    return out


def tests_html(d: Diagnostics, currency: str = "$") -> str:
    """Residual tests, accuracy and the warnings as HTML for the tests tab."""
    rt, loo, kf = d.residual_tests, d.loo, d.kfold
    k, o, j = rt.koenker, rt.original, rt.jarque_bera

    def row(cells: Sequence[str], mark: str = "") -> str:
        return "<tr>" + "".join(f"<td>{escape(c)}</td>" for c in cells) + f"<td>{mark}</td></tr>"

    def verdict(bad: bool, good_words: str, bad_words: str) -> str:
        words, colour, _bg = VERDICT_MARKS["outside" if bad else "within"]
        text = words[0] + " " + (bad_words if bad else good_words)
        return f'<b style="color:{colour}">{escape(text)}</b>'

    scale = "log price" if d.response == "log" else "price"
    out = [
        f"<h3>Residual tests (alpha {rt.alpha:g})</h3>",
        '<table border="1" cellspacing="0" cellpadding="3">',
        "<tr><th>Test</th><th>Statistic</th><th>df</th><th>p</th><th>Verdict</th></tr>",
        row(("Breusch-Pagan, Koenker's studentized form (n R²)", number(k.statistic, 4),
             str(k.df), pvalue(k.p_value)),
            verdict(rt.heteroskedastic, "even spread", "uneven spread")),
        row(("Breusch-Pagan, Koenker's form as an F test", number(k.f_statistic, 4),
             f"{k.df}, {d.n - k.df - 1}", pvalue(k.f_p_value))),
        row(("Breusch-Pagan, original form, ESS/2 (assumes normal errors)",
             number(o.statistic, 4), str(o.df), pvalue(o.p_value))),
        row((f"Jarque-Bera (skewness {j.skewness:.2f}, kurtosis {j.kurtosis:.2f})",
             number(j.statistic, 4), "2", pvalue(j.p_value)),
            verdict(rt.non_normal, "normal", "not normal")),
        "</table>",
        "<p>The verdict on spread uses the studentized form, which does not assume normal "
        "errors; a test without evidence at this alpha is marked as passed.</p>",
    ]  # fmt: skip
    if rt.suggestions:
        out.append(
            "<ul>"
            + "".join(f"<li>{escape(window_wording(s))}</li>" for s in rt.suggestions)
            + "</ul>"
        )
    out += [
        "<h3>Accuracy on sales left out of the fit</h3>",
        '<table border="1" cellspacing="0" cellpadding="3">',
        "<tr><th>Measure</th><th>Value</th><th>Reference</th><th></th><th>Verdict</th></tr>",
        row((f"PRESS ({scale})", number(loo.press, 5), "", "")),
        row(("Leave-one-out RMSE", money(loo.rmse_price, currency), "", "")),
        row(("Leave-one-out median absolute % error", _pct(loo.mdape), "", "")),
        row((f"{kf.folds}-fold RMSE (seed {kf.seed})", money(kf.rmse_price, currency), "", "")),
        row((f"{kf.folds}-fold median absolute % error", _pct(kf.mdape), "", "")),
        row(
            (
                f"Inside own leave-one-out {100 * loo.level:g}% interval ({loo.n_used} sales)",
                _pct(100 * loo.coverage),
                f"nominal {100 * loo.level:g}%",
                "",
            ),
            verdict(loo.coverage_short, "as nominal", "intervals too narrow"),
        ),
        "</table>",
    ]
    if kf.n_unpredictable:
        out.append(
            f"<p>{kf.n_unpredictable} sale(s) could not be predicted from the other folds.</p>"
        )
    out += coverage_html(d, verdict)
    if d.warnings:
        out.append("<h3>Warnings</h3><ul>")
        out += [f"<li>{escape(w)}</li>" for w in d.warnings]
        out.append("</ul>")
    return "\n".join(out)


def ratio_note(d: Diagnostics) -> str:
    """How many sales the ratio study used, the trim fences and the sales trimmed."""
    rs = d.ratio_study
    text = f"Ratio = leave-one-out value / sale price, {rs.n} sales"
    if rs.fences is None:
        return text + "; no trim."
    text += (
        f"; trim fences {rs.fences[0]:.3f} to {rs.fences[1]:.3f} (3 IQR beyond the quartiles): "
        f"{len(rs.trimmed)} trimmed"
    )
    if rs.trimmed:
        text += ": " + ", ".join(
            f"row {t.row}" + (f" ({t.sale_id})" if t.sale_id else "") + f" ratio {t.ratio:.3f}"
            for t in rs.trimmed
        )
    return text + ". Ranges: IAAO Standard on Ratio Studies (2013), single-family residential."


def condition_meaning(exceeds: bool) -> str:
    """What the condition number means for the value, and what would help."""
    if not exceeds:
        return "The features are distinct enough for each effect to be read on its own."
    return (
        "Some features nearly repeat one another: their separate effects (and their "
        "adjustments in a grid) are uncertain and can swing with a few sales, while the "
        "value of a subject like the sales usually holds; its interval already carries the "
        "uncertainty. What helps: drop or merge one of the near-duplicate terms named here, "
        "centre a number before squaring it (age minus a typical age), or add sales."
    )


def condition_text(d: Diagnostics) -> str:
    cond = d.collinearity.condition
    verdict = "above" if cond.exceeds else "below"
    text = (
        f"Condition number {cond.number:.1f}, {verdict} the threshold {cond.threshold:g} "
        f"({cond.scaling})."
    )
    for dep in cond.dependences:
        text += f" Near-dependence (index {dep.index:.1f}): {', '.join(dep.columns)}."
    text += " " + condition_meaning(cond.exceeds)
    return text + (
        " Variance inflation: the VIF of a one-column term, the generalized VIF of a group "
        "(Fox and Monette 1992); standard-error inflation: how many times wider the term's "
        "interval is because of the other terms, GVIF^(1/(2 df))."
    )


# --- table models ------------------------------------------------------------------------------
_ROOT = QModelIndex()
GREY = QColor(128, 128, 128)


def _money_cell(currency: str) -> Callable[[object], str]:
    return lambda v: money(v, currency)


def _fmt(spec: str) -> Callable[[object], str]:
    return lambda v: number_text(float(v), spec)


@dataclass(frozen=True)
class SaleColumn:
    header: str
    values: np.ndarray
    show: Callable[[object], str]
    numeric: bool = True


class SaleChecksModel(SortableTableModel, QAbstractTableModel):
    """Every sale of the fit with its measures; sorted on whole columns (numpy/pandas).

    Cells are formatted when Qt asks for them, so 50,000 sales cost 13 arrays, not
    650,000 items. ``Qt.UserRole`` of any cell gives the file row.
    """

    def __init__(self) -> None:
        super().__init__()
        self._columns: list[SaleColumn] = []
        self._rows = np.zeros(0, dtype=np.int64)
        self._flagged = np.zeros(0, dtype=bool)
        self._order = np.zeros(0, dtype=np.int64)
        self._where = np.zeros(0, dtype=np.int64)
        self._find: Callable[[int], int | None] = lambda row: None
        self._sort: tuple[int, Qt.SortOrder] | None = None

    def set_diagnostics(self, d: Diagnostics | None, currency: str = "$") -> None:
        self.beginResetModel()
        if d is None:
            self._columns, self._rows = [], np.zeros(0, dtype=np.int64)
            self._flagged = np.zeros(0, dtype=bool)
            self._find = lambda row: None
        else:
            infl, loo = d.influence, d.loo
            codes = np.full(d.n, "", dtype=object)
            at = np.fromiter((f.position for f in d.flags), dtype=np.intp, count=len(d.flags))
            codes[at] = [", ".join(f.codes) for f in d.flags]
            with np.errstate(divide="ignore", invalid="ignore"):
                ratio = loo.price_prediction / d.price
            cash = _money_cell(currency)
            self._rows = np.asarray(d.rows, dtype=np.int64)
            self._flagged = np.zeros(d.n, dtype=bool)
            self._flagged[at] = True
            self._columns = [
                SaleColumn("Row", self._rows, str),
                SaleColumn("Sale", np.asarray(d.sale_ids, dtype=object), _text, numeric=False),
                SaleColumn("Price", d.price, cash),
                SaleColumn("Leverage", infl.leverage, _fmt(".4f")),
                SaleColumn("Price gap in SEs", infl.student_internal, _fmt("+.2f")),
                SaleColumn("Price gap in SEs, fit without it", infl.student_external, _fmt("+.2f")),
                SaleColumn("Cook's distance", infl.cooks_distance, _fmt(".4g")),
                SaleColumn("DFFITS", infl.dffits, _fmt("+.3f")),
                SaleColumn("Leave-one-out value", loo.price_prediction, cash),
                SaleColumn("Price minus that value", d.price - loo.price_prediction, cash),
                SaleColumn("Ratio (value / price)", ratio, _fmt(".3f")),
                SaleColumn("Inside own interval", np.asarray(loo.inside, dtype=bool), _yes_no),
                SaleColumn("Flags", codes, _text, numeric=False),
            ]
            self._find = positions_by_row(d)
        self._apply_order()
        self.endResetModel()

    def _apply_order(self) -> None:
        n = len(self._rows)
        order = ascending_order(self._rows)
        if self._sort is not None and n and self._sort[0] < len(self._columns):
            col = self._columns[self._sort[0]]
            if col.numeric:
                keys = pd.Series(np.asarray(col.values, dtype=float))
            else:
                keys = pd.Series(col.values, dtype=object).map(
                    lambda v: None if v is None or v == "" else str(v).lower()
                )
            order = stable_sort(keys, self._sort[1] == Qt.SortOrder.DescendingOrder)
        self._order = np.asarray(order, dtype=np.int64)
        if n and self._order[0] == 0 and bool(np.all(np.diff(self._order) == 1)):
            self._where = self._order  # in file order: a position is its own place
        else:
            self._where = np.empty(n, dtype=np.int64)
            self._where[self._order] = np.arange(n)

    def position_of(self, row: int) -> int | None:
        """Where file row ``row`` is shown, or None."""
        i = self._find(row)
        return None if i is None else int(self._where[i])

    def row_at(self, position: int) -> int:
        return int(self._rows[self._order[position]])

    def rowCount(self, parent: QModelIndex | QPersistentModelIndex = _ROOT) -> int:  # noqa: N802
        return 0 if parent.isValid() else len(self._order)

    def columnCount(self, parent: QModelIndex | QPersistentModelIndex = _ROOT) -> int:  # noqa: N802
        return 0 if parent.isValid() else len(self._columns)

    def headerData(self, section: int, orientation: Qt.Orientation, role: int = 0):  # noqa: N802
        if role == Qt.ItemDataRole.DisplayRole and orientation == Qt.Orientation.Horizontal:
            return self._columns[section].header
        return None

    def data(self, index: QModelIndex | QPersistentModelIndex, role: int = 0):
        if not index.isValid():
            return None
        i = int(self._order[index.row()])
        col = self._columns[index.column()]
        if role == Qt.ItemDataRole.DisplayRole:
            return col.show(col.values[i])
        if role == Qt.ItemDataRole.ForegroundRole and self._flagged[i]:
            return QBrush(QColor(FLAG_COLOUR))
        if role == Qt.ItemDataRole.TextAlignmentRole and col.numeric:
            return int(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
        if role == Qt.ItemDataRole.UserRole:
            return int(self._rows[i])
        return None


def _text(v: object) -> str:
    return "" if v is None else str(v)


def _yes_no(v: object) -> str:
    return "yes" if v else "no"


class TextTableModel(QAbstractTableModel):
    """A small table of ready-made strings (flagged sales, terms, ratio measures).

    ``colours`` gives a foreground colour per cell where wanted (a verdict),
    ``muted`` the rows drawn grey, ``tips`` a tooltip per row.
    """

    def __init__(self, headers: Sequence[str], right: Sequence[int] = ()) -> None:
        super().__init__()
        self.headers = tuple(headers)
        self.right = frozenset(right)
        self.cells: list[tuple[str, ...]] = []
        self.colours: dict[tuple[int, int], str] = {}
        self.tips: list[str] = []
        self.muted: set[int] = set()

    def set_rows(
        self,
        cells: Sequence[tuple[str, ...]],
        *,
        colours: dict[tuple[int, int], str] | None = None,
        tips: Sequence[str] = (),
    ) -> None:
        self.beginResetModel()
        # lazy rows stay lazy (made when shown); others are copied as they are
        self.cells = cells if isinstance(cells, LazyRows) else [tuple(r) for r in cells]
        self.colours = dict(colours or {})
        self.tips = tips if isinstance(tips, LazyRows) else list(tips)
        self.muted = set()
        self.endResetModel()

    def set_muted(self, muted: set[int]) -> None:
        if muted != self.muted:
            self.muted = set(muted)
            if self.cells:
                last = self.index(len(self.cells) - 1, len(self.headers) - 1)
                self.dataChanged.emit(self.index(0, 0), last)

    def rowCount(self, parent: QModelIndex | QPersistentModelIndex = _ROOT) -> int:  # noqa: N802
        return 0 if parent.isValid() else len(self.cells)

    def columnCount(self, parent: QModelIndex | QPersistentModelIndex = _ROOT) -> int:  # noqa: N802
        return 0 if parent.isValid() else len(self.headers)

    def headerData(self, section: int, orientation: Qt.Orientation, role: int = 0):  # noqa: N802
        if role == Qt.ItemDataRole.DisplayRole and orientation == Qt.Orientation.Horizontal:
            return self.headers[section]
        return None

    def data(self, index: QModelIndex | QPersistentModelIndex, role: int = 0):
        if not index.isValid():
            return None
        r, c = index.row(), index.column()
        if role == Qt.ItemDataRole.DisplayRole:
            return self.cells[r][c]
        if role == Qt.ItemDataRole.ForegroundRole:
            if r in self.muted:
                return QBrush(GREY)
            colour = self.colours.get((r, c))
            return QBrush(QColor(colour)) if colour else None
        if role == Qt.ItemDataRole.ToolTipRole and r < len(self.tips):
            return self.tips[r] or None
        if role == Qt.ItemDataRole.TextAlignmentRole and c in self.right:
            return int(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
        return None
