"""The trend report: control charts of one analyte's slope, intercept and residual SD, as PDF.

Same fonts, table style and page furniture as the calibration record; the
footer names the archive state the charts were drawn from instead of a
record.  Each chart shows the points in run-date order, the baseline they
were judged against (shaded), the mean, the ±2s warning and ±3s action
limits, and an open diamond where a run rule fired.  The output depends on
its arguments only (reportlab's invariant mode).
"""

from __future__ import annotations

import datetime as dt
import functools
import io
import math
from collections import Counter
from collections.abc import Sequence
from dataclasses import dataclass
from xml.sax.saxutils import escape

from reportlab.graphics.shapes import Drawing, Line, PolyLine, Rect
from reportlab.lib import colors
from reportlab.lib.styles import ParagraphStyle
from reportlab.pdfbase.pdfmetrics import stringWidth
from reportlab.platypus import (
    BaseDocTemplate,
    Flowable,
    Frame,
    KeepTogether,
    PageTemplate,
    Paragraph,
    Spacer,
)

from calib.archive.control import RULES, ControlChart
from calib.archive.trend import QUANTITIES, AnalyteTrend
from calib.report.charts import LABEL_SIZE, _Axis, _diamond, _dots, _frame, _text
from calib.report.formatting import format_number
from calib.report.pages import PAGE_SIZES, Furniture, RecordCanvas, SectionMark, page_margins
from calib.report.styles import INK, MUTED, REGULAR, SHADE, Styles, get_styles, register_fonts
from calib.report.tables import TableMaker

__all__ = ["control_chart_drawing", "write_trend_pdf"]

ACTION = colors.HexColor("#8c2d19")
_WARNING = colors.HexColor("#b07a00")
PATH = colors.HexColor("#7d8fa3")
_CHART_HEIGHT = 160
_TITLE = "Control charts"


@dataclass(frozen=True)
class _TrendFurniture(Furniture):
    """Header and footer of a trend report; ``source`` says which archive state it shows."""

    source: str = ""

    def footer_text(self, page: int, pages: int) -> str:
        """The footer line.

        Examples
        --------
        >>> _TrendFurniture("Lab", "Control charts", "", "", "archive a.sqlite").footer_text(1, 2)
        'Control charts · archive a.sqlite · page 1 of 2'
        """
        return f"{self.document_title} · {self.source} · page {page} of {pages}"


def _legend(d: Drawing, *, x: float, y: float, width: float, shade_label: str, flagged: bool,
            limits: bool) -> int:
    """Legend rows below a chart; returns the number of rows drawn."""
    items = [("dot", "Accepted curve")]
    if flagged:
        items.append(("flag", "Run rule fired"))
    if limits:
        items += [("shade", shade_label), ("mean", "Mean"),
                  ("warn", "±2s warning"), ("action", "±3s action")]
    col, row_y, rows = x, y, 1
    for kind, label in items:
        w = 16 + stringWidth(label, REGULAR, LABEL_SIZE) + 10
        if col + w > x + width and col > x:
            col, row_y, rows = x, row_y - 10, rows + 1
        cx, cy = col + 5, row_y + 2.2
        if kind == "dot":
            _dots(d, [(cx, cy)])
        elif kind == "flag":
            _diamond(d, cx, cy)
        elif kind == "shade":
            d.add(Rect(col, cy - 3, 11, 6, fillColor=SHADE, strokeColor=None))
        else:
            color, dash, stroke = {"mean": (MUTED, None, 0.8), "warn": (_WARNING, [2.5, 1.5], 0.7),
                                   "action": (ACTION, None, 0.8)}[kind]
            d.add(Line(col, cy, col + 11, cy, strokeColor=color, strokeWidth=stroke,
                       strokeDashArray=dash))
        d.add(_text(col + 15, row_y, label, color=INK))
        col += w
    return rows


def _legend_rows(width: float, labels: Sequence[str]) -> int:
    rows, used = 1, 0.0
    for label in labels:
        w = 16 + stringWidth(label, REGULAR, LABEL_SIZE) + 10
        if used + w > width and used > 0:
            rows, used = rows + 1, 0.0
        used += w
    return rows


class _DateAxis:
    """Run dates along the x axis: day numbers, several runs of one day spread within it."""

    STEPS = (1, 2, 7, 14, 28, 56, 91, 182, 364, 728)

    def __init__(self, dates: Sequence[str], start: float, length: float) -> None:
        days = [dt.date.fromisoformat(d).toordinal() for d in dates]
        per_day = Counter(days)
        seen: Counter[int] = Counter()
        self.positions = []
        for day in days:
            seen[day] += 1
            self.positions.append(day - 0.5 + seen[day] / (per_day[day] + 1))
        self.lo = min(days) - 0.5
        self.hi = max(days) + 0.5
        self.start, self.length, self.log = start, length, False
        self.ticks: tuple[float, ...] = ()  # drawn by :meth:`draw`, with date labels
        register_fonts()
        width_of_label = stringWidth("2026-12-31", REGULAR, LABEL_SIZE) + 8
        room = max(1, int(length // width_of_label))
        span = self.hi - self.lo
        self.step = next((s for s in self.STEPS if span / s <= room), self.STEPS[-1])
        first = min(days)
        self.tick_days = [first + k * self.step for k in range(int(span // self.step) + 1)
                          if first + k * self.step <= max(days)]

    def __call__(self, v: float) -> float:
        return self.start + (v - self.lo) / (self.hi - self.lo) * self.length

    def draw(self, d: Drawing, y0: float) -> None:
        for day in self.tick_days:
            px = self(day)
            d.add(Line(px, y0, px, y0 - 2.5, strokeColor=INK, strokeWidth=0.5))
            d.add(_text(px, y0 - 9, dt.date.fromordinal(day).isoformat(), anchor="middle"))


def control_chart_drawing(chart: ControlChart, *, width: float, height: float, y_title: str,
                          baseline: int, dates: Sequence[str] | None = None,
                          span: tuple[int, int] | None = None,
                          shade_label: str | None = None) -> Drawing:
    """One control chart as a vector drawing.

    Parameters
    ----------
    chart : ControlChart
        Values, limits and rule hits; without limits only the points are drawn.
    width, height : float
        Size in points.
    y_title : str
        Title of the value axis.
    baseline : int
        Number of leading points that formed the baseline (shaded) when ``span`` is not given.
    dates : sequence of str, optional
        Run date (``YYYY-MM-DD``) of each point: the x axis is then the calendar,
        runs of one day spread across it; without them it is the point number.
    span : (int, int), optional
        First and one-past-last point of the baseline period, shaded.
    shade_label : str, optional
        Legend text of the shaded period.

    Examples
    --------
    >>> from calib.archive.control import control_chart
    >>> chart = control_chart([1.0, 1.1, 0.9, 1.0, 1.05, 0.95, 0.6], quantity="slope")
    >>> control_chart_drawing(chart, width=480, height=180, y_title="Slope", baseline=10).height
    180
    >>> days = [f"2026-11-{d:02d}" for d in (2, 3, 3, 5, 6, 9, 10)]
    >>> control_chart_drawing(chart, width=480, height=180, y_title="Slope", baseline=6,
    ...                       dates=days).width
    480
    """
    register_fonts()
    lim = chart.limits
    n = len(chart.values)
    if dates is not None and len(dates) != n:
        raise ValueError(f"dates: one per point needed ({n}); got {len(dates)}")
    if span is None:
        span = (0, min(baseline, n))
    shade_label = shade_label or f"Baseline (first {baseline})"
    labels = ["Accepted curve"] + (["Run rule fired"] if chart.flagged else [])
    if lim is not None:
        labels += [shade_label, "Mean", "±2s warning", "±3s action"]
    bottom = 30 + 10 * _legend_rows(width - 40, labels)
    d = Drawing(width, height)
    ys = [v for v in chart.values if math.isfinite(v)]
    if lim is not None:
        ys += [*lim.action, lim.mean]
    xa: _Axis | _DateAxis
    if dates:
        xa = _DateAxis(dates, 46, width - 46 - 26)
        xs = xa.positions
        x_title = "Run date"
    else:
        xa = _Axis.fit([0.0, float(max(n, 1))], 46, width - 46 - 26, target=min(max(n, 2), 10))
        xs = [i + 1.0 for i in range(n)]
        x_title = "Accepted curves in run-date order"
    ya = _Axis.fit(ys or [0.0, 1.0], bottom, height - bottom - 6, target=5)
    right = xa.start + xa.length
    if lim is not None and n and span[1] > span[0]:
        first, last = span[0], span[1] - 1
        gap_before = (xs[first] - xs[first - 1]) / 2 if first > 0 else 0.5
        gap_after = (xs[last + 1] - xs[last]) / 2 if last + 1 < n else 0.5
        x0 = max(xa.start, xa(xs[first] - min(gap_before, 0.5)))
        x1 = min(right, xa(xs[last] + min(gap_after, 0.5)))
        d.add(Rect(x0, ya.start, x1 - x0, ya.length, fillColor=SHADE, strokeColor=None))
        for k, color, dash in ((3, ACTION, None), (2, _WARNING, [2.5, 1.5])):
            for value, sign in zip(lim.limit(k), ("−", "+")):
                y = ya(value)
                if ya.start <= y <= ya.start + ya.length:
                    d.add(Line(xa.start, y, right, y, strokeColor=color, strokeWidth=0.7,
                               strokeDashArray=dash))
                    d.add(_text(right + 2, y - 2.2, f"{sign}{k}s", color=color))
        y = ya(lim.mean)
        d.add(Line(xa.start, y, right, y, strokeColor=MUTED, strokeWidth=0.8))
        d.add(_text(right + 2, y - 2.2, "mean", color=MUTED))
    _frame(d, xa, ya, x_title=x_title, y_title=y_title)  # type: ignore[arg-type]
    if isinstance(xa, _DateAxis):
        xa.draw(d, ya.start)
    flagged = set(chart.flagged_points())
    path: list[float] = []
    for i, v in enumerate(chart.values):
        if not math.isfinite(v):
            if len(path) > 2:
                d.add(PolyLine(path, strokeColor=PATH, strokeWidth=0.5))
            path = []
            continue
        path += [xa(xs[i]), ya(v)]
    if len(path) > 2:
        d.add(PolyLine(path, strokeColor=PATH, strokeWidth=0.5))
    _dots(d, [(xa(xs[i]), ya(v)) for i, v in enumerate(chart.values)
              if math.isfinite(v) and i not in flagged])
    for i in sorted(flagged):
        _diamond(d, xa(xs[i]), ya(chart.values[i]))
    _legend(d, x=46, y=bottom - 38, width=width - 40, shade_label=shade_label,
            flagged=chart.flagged, limits=lim is not None)
    return d


def _summary(trend: AnalyteTrend) -> str:
    n = len(trend.points)
    if not n:
        return "No accepted curve of this analyte is in the archive."
    first, last = trend.points[0].run_date, trend.points[-1].run_date
    instruments = sorted({p.instrument or "not stated" for p in trend.points})
    left = Counter(p.figures.verdict if "rejected" not in p.roles else "rejected at sign-off"
                   for p in trend.left_out)
    left_text = "; ".join(f"{k} {v}" for k, v in sorted(left.items()))
    return (f"{n} accepted curve{'s' if n != 1 else ''} from {first} to {last}; instrument "
            f"{', '.join(instruments)}. {trend.limits_text()}: mean ± 2s "
            "warning and ± 3s action limits, s the sample standard deviation. "
            + (f"Curves left out because they were not accepted: {left_text}. " if left else ""))


def _rules_text() -> str:
    listed = "; ".join(f"{rule}: {text}" for rule, text in RULES.items())
    return ("Run rules (common practice: Western Electric rules 1–4 and a trend rule): "
            f"{listed}. A point beyond 2s alone is a warning, not a flag. A flag says the "
            "calibration is changing; whether the method is still fit for purpose is for a "
            "qualified person to judge.")


def _para(text: str, style: ParagraphStyle) -> Paragraph:
    # Analyte names and notes come from spreadsheets: never read them as markup.
    return Paragraph(escape(text), style)


def _limits_table(trend: AnalyteTrend, tables: TableMaker) -> Flowable:
    # Flags not counting the curves the frozen baseline's reviewer excluded (already reviewed).
    rows = [["Quantity", "Mean", "SD", "−3s", "−2s", "+2s", "+3s", "Flags"]]
    spans = []
    for chart in trend.charts:
        lim = chart.limits
        if lim is None:
            spans.append(len(rows))
            rows.append([QUANTITIES[chart.quantity], "not evaluated: " + chart.reason,
                         "", "", "", "", "", ""])
            continue
        low3, high3 = lim.action
        low2, high2 = lim.warning
        rows.append([QUANTITIES[chart.quantity],
                     *(format_number(v) for v in (lim.mean, lim.sd, low3, low2, high2, high3)),
                     str(len(set(chart.flagged_points()) - trend.reviewed))])
    return tables.grid(rows, [0.16, 0.13, 0.11, 0.12, 0.12, 0.12, 0.12, 0.12],
                       right=range(1, 8), spans=spans)


def _charts(trend: AnalyteTrend, width: float, s: Styles) -> list[Flowable]:
    out: list[Flowable] = []
    for chart in trend.charts:
        label = QUANTITIES[chart.quantity]
        if not any(math.isfinite(v) for v in chart.values):
            out += [_para(label, s.heading), _para(chart.reason or "No values.", s.note)]
            continue
        drawing = control_chart_drawing(
            chart, width=width, height=_CHART_HEIGHT, y_title=label, baseline=trend.baseline,
            dates=[p.run_date for p in trend.points], span=trend.baseline_span,
            shade_label=trend.baseline_label)
        parts: list[Flowable] = [_para(label, s.heading), drawing]
        if chart.reason:
            parts.append(_para(f"Not evaluated: {chart.reason}.", s.note))
        out.append(KeepTogether(parts))
    return out


def _flags(trend: AnalyteTrend, tables: TableMaker, s: Styles) -> list[Flowable]:
    rows = [["Quantity", "Point", "Run date", "Record", "Value", "Rules that fired"]]
    for chart in trend.charts:
        for index in chart.flagged_points():
            p = trend.points[index]
            fired = chart.hits_text(index)
            if index in trend.reviewed and trend.frozen is not None:
                fired += f"; excluded from the baseline: {trend.frozen.exclusion(p.record_id)}"
            rows.append([QUANTITIES[chart.quantity], str(index + 1), p.run_date, p.record_id,
                         format_number(chart.values[index]), fired])
    if len(rows) == 1:
        return [_para("Run rules", s.heading), _para("No run rule fired on any chart.", s.body)]
    return [_para("Run rules that fired", s.heading),
            tables.grid(rows, [0.13, 0.06, 0.1, 0.16, 0.1, 0.45], right=(1, 4)), Spacer(1, 4)]


def _points(trend: AnalyteTrend, tables: TableMaker, s: Styles) -> list[Flowable]:
    if not trend.points:
        return []
    rows = [["Point", "Run date", "Record", "Phase", *QUANTITIES.values(), "Rules"]]
    for i, p in enumerate(trend.points):
        fired = [f"{c.quantity}: {', '.join(c.rules_at(i))}" for c in trend.charts
                 if c.rules_at(i)]
        rows.append([str(i + 1), p.run_date, p.record_id, trend.phase(i),
                     *(format_number(getattr(p.figures, q)) for q in QUANTITIES),
                     "; ".join(fired)])
    return [_para("Curves charted", s.heading),
            tables.grid(rows, [0.06, 0.1, 0.15, 0.11, 0.1, 0.1, 0.1, 0.28], right=(0, 4, 5, 6))]


def _baseline_paras(trend: AnalyteTrend, s: Styles) -> list[Flowable]:
    b = trend.frozen
    if b is None:
        return []
    text = (f"Frozen baseline (Phase I) established {b.established_at}, reviewed by "
            f"{b.reviewed_by}: {b.selection}.")
    if b.excluded:
        text += " Excluded: " + "; ".join(f"{c.record_id} ({c.run_date}): {c.reason}"
                                         for c in b.excluded) + "."
    if b.note:
        text += f" Reviewer's note: {b.note}"
    text += (" Later curves are monitored against these fixed limits (Phase II); a rule firing "
             "on an excluded curve is shown but was already reviewed.")
    return [_para(text, s.note)]


def _story(trend: AnalyteTrend, width: float) -> list[Flowable]:
    s = get_styles()
    tables = TableMaker(width)
    story: list[Flowable] = [
        SectionMark(trend.analyte),
        _para(f"{_TITLE}: {trend.analyte}", s.title),
        _para(_summary(trend), s.body),
        *_baseline_paras(trend, s),
        Spacer(1, 6),
        _limits_table(trend, tables),
        *_charts(trend, width, s),
        *_flags(trend, tables, s),
        _para(_rules_text(), s.note),
        *(_para(f"Note: {note}.", s.note) for note in trend.notes),
        *_points(trend, tables, s),
    ]
    return story


def write_trend_pdf(trend: AnalyteTrend, *, source: str, lab_name: str | None = None,
                    page_size: str = "A4") -> bytes:
    """Render the control charts of ``trend`` as a PDF report.

    Parameters
    ----------
    trend : AnalyteTrend
        The charts (:meth:`calib.archive.Archive.trend`).
    source : str
        Which archive state the charts show, printed in every footer, e.g.
        ``"archive records.sqlite up to seq 212 (3f9a1c2b77de04aa)"``.
    lab_name : str, optional
        Left of the header; the bundled report template's lab when None.
    page_size : str
        ``A4`` or ``Letter``.

    Returns
    -------
    bytes
        The PDF document; the same arguments give the same bytes.

    Examples
    --------
    >>> from calib.archive.trend import analyte_trend
    >>> pdf = write_trend_pdf(analyte_trend([], analyte="Nitrate-N"), source="archive a.sqlite")
    >>> pdf[:5]
    b'%PDF-'
    """
    if page_size not in PAGE_SIZES:
        raise ValueError(f"page_size must be one of {', '.join(PAGE_SIZES)}; got {page_size!r}")
    if lab_name is None:
        from calib.report.template import load_template

        lab_name = load_template().lab.name
    register_fonts()
    furniture = _TrendFurniture(lab_name=lab_name, document_title=_TITLE, record_id="",
                                digest="", source=source)
    buffer = io.BytesIO()
    doc = BaseDocTemplate(buffer, pagesize=PAGE_SIZES[page_size], invariant=1, pageCompression=1,
                          title=f"{_TITLE}: {trend.analyte}", author=lab_name,
                          subject=f"Trend of {trend.analyte}; {source}", creator="calib",
                          initialFontName=REGULAR, **page_margins())
    frame = Frame(doc.leftMargin, doc.bottomMargin, doc.width, doc.height, leftPadding=0,
                  rightPadding=0, topPadding=0, bottomPadding=0, id="body")
    doc.addPageTemplates([PageTemplate(id="trend", frames=[frame])])
    doc.build(_story(trend, doc.width),
              canvasmaker=functools.partial(RecordCanvas, furniture=furniture))
    return buffer.getvalue()
