"""Calibration and residual plots as reportlab drawings (vector, no raster, no matplotlib).

The charts take plain numbers, not records: the story works out what to draw
(points, the fitted curve and its band) and these functions only lay it out.
Concentration axes turn logarithmic when the standards span two decades or
more, so low levels of a wide range stay visible.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from reportlab.graphics import shapes
from reportlab.graphics.shapes import Drawing, Group
from reportlab.lib import colors
from reportlab.pdfbase.pdfmetrics import stringWidth

from calib.report.styles import INK, LINE, MUTED, REGULAR, register_fonts

__all__ = ["CurveBand", "PlotPoint", "calibration_chart", "nice_ticks", "residual_chart",
           "wants_log_axis"]



def _unchecked(cls: type) -> type:
    """``cls`` without reportlab's check of every attribute assignment.

    The check (a development aid) took two thirds of the time to build a chart,
    and a record of hundreds of analytes builds a thousand charts.  The shapes
    here are set by this module's tested code only; drawing them is unchanged.
    """
    return type(cls.__name__, (cls,), {"__setattr__": object.__setattr__,
                                       "__module__": __name__})


Line, Path, Polygon, PolyLine, Rect, String = (
    _unchecked(c) for c in (shapes.Line, shapes.Path, shapes.Polygon, shapes.PolyLine,
                            shapes.Rect, shapes.String))

POINT = colors.HexColor("#23466b")
EXCLUDED = colors.HexColor("#b04a00")
CURVE = colors.HexColor("#1c6e8c")
BAND = colors.HexColor("#cde2ea")

LABEL_SIZE = 6.5
_TITLE_SIZE = 7


@dataclass(frozen=True)
class PlotPoint:
    """One standard on a plot: concentration, y value (response or residual), used in the fit."""

    x: float
    y: float
    included: bool


@dataclass(frozen=True)
class CurveBand:
    """The fitted curve on a grid of concentrations, its confidence and prediction half-widths.

    ``prediction_half_width`` (for one new reading) is None when the record
    does not hold what it needs.
    """

    x: tuple[float, ...]
    yhat: tuple[float, ...]
    half_width: tuple[float, ...]
    confidence: float
    prediction_half_width: tuple[float, ...] | None = None


def nice_ticks(lo: float, hi: float, *, target: int = 5) -> tuple[float, ...]:
    """Round tick positions covering ``lo``–``hi``, steps of 1, 2, 2.5 or 5 × 10ⁿ.

    The first and last ticks enclose the range, so an axis drawn from them
    holds every value.

    Examples
    --------
    >>> nice_ticks(0.5, 10.0)
    (0.0, 2.0, 4.0, 6.0, 8.0, 10.0)
    >>> nice_ticks(-0.37, 0.41)
    (-0.4, -0.2, 0.0, 0.2, 0.4, 0.6)
    """
    if not (math.isfinite(lo) and math.isfinite(hi)):
        lo, hi = 0.0, 1.0
    if hi < lo:
        lo, hi = hi, lo
    # A span within rounding of the values themselves is one value: pad it like one.
    if hi - lo <= 64 * math.ulp(max(abs(lo), abs(hi))):
        pad = abs(lo) * 0.1 or 1.0
        lo, hi = lo - pad, hi + pad
    raw = (hi - lo) / max(target, 1)
    magnitude = 10.0 ** math.floor(math.log10(raw))
    step = next(m * magnitude for m in (1, 2, 2.5, 5, 10) if m * magnitude >= raw * 0.999)
    first = math.floor(lo / step + 1e-9)
    last = math.ceil(hi / step - 1e-9)
    # Round away the binary noise of k·step so labels and equality tests stay clean.
    digits = max(0, -math.floor(math.log10(step)) + 2)
    return tuple(round(k * step, digits) + 0.0 for k in range(first, last + 1))


def wants_log_axis(xs: Sequence[float]) -> bool:
    """True when every concentration is positive and they span at least a factor of 100.

    Examples
    --------
    >>> wants_log_axis([1, 10, 1000]), wants_log_axis([0.5, 10]), wants_log_axis([0, 1, 1000])
    (True, False, False)
    """
    values = [x for x in xs if math.isfinite(x)]
    return bool(values) and min(values) > 0 and max(values) / min(values) >= 100


class _Axis:
    """Maps data values onto a length of the drawing, linear or log10."""

    def __init__(self, ticks: Sequence[float], start: float, length: float, log: bool) -> None:
        self.ticks = tuple(ticks)
        self.log = log
        self.start = start
        self.length = length
        self._lo = self._t(self.ticks[0])
        self._span = (self._t(self.ticks[-1]) - self._lo) or 1.0

    def _t(self, v: float) -> float:
        return math.log10(v) if self.log else v

    def __call__(self, v: float) -> float:
        return self.start + (self._t(v) - self._lo) / self._span * self.length

    @classmethod
    def fit(cls, values: Sequence[float], start: float, length: float, *, log: bool = False,
            target: int = 5, symmetric: bool = False) -> _Axis:
        finite = [v for v in values if math.isfinite(v) and (v > 0 or not log)]
        if log and finite:
            low = math.floor(math.log10(min(finite)) + 1e-9)
            high = max(math.ceil(math.log10(max(finite)) - 1e-9), low + 1)
            return cls([10.0**k for k in range(low, high + 1)], start, length, True)
        lo, hi = (min(finite), max(finite)) if finite else (0.0, 1.0)
        if lo == hi and lo > 0:
            lo, hi = 0.0, 2 * hi  # a single value sits mid-axis above zero
        if symmetric:
            m = max(abs(lo), abs(hi)) * 1.1 or 1.0
            lo, hi = -m, m
        elif lo >= 0 and lo < 0.35 * hi:
            lo = 0.0  # show the origin when the data come near it
        return cls(nice_ticks(lo, hi, target=target), start, length, False)


def _tick_label(v: float, ticks: Sequence[float], log: bool) -> str:
    if log:
        return f"{v:g}"
    step = abs(ticks[1] - ticks[0]) if len(ticks) > 1 else 1.0
    biggest = max(abs(t) for t in ticks)
    if biggest >= 1e6 or step < 1e-4:
        return f"{v:.3g}"
    decimals = max(0, -math.floor(math.log10(step) + 1e-9))
    if abs(round(step * 10**decimals) - step * 10**decimals) > 1e-6:
        decimals += 1  # steps like 0.25
    text = f"{v:.{decimals}f}"
    return "0" if float(text) == 0 else text


def _text(x: float, y: float, text: str, *, size: float = LABEL_SIZE, anchor: str = "start",
          color: colors.Color = INK) -> String:
    return String(x, y, text, fontName=REGULAR, fontSize=size, fillColor=color, textAnchor=anchor)


def _frame(d: Drawing, xa: _Axis, ya: _Axis, *, x_title: str, y_title: str) -> None:
    x0, x1 = xa.start, xa.start + xa.length
    y0, y1 = ya.start, ya.start + ya.length
    d.add(Rect(x0, y0, x1 - x0, y1 - y0, fillColor=None, strokeColor=LINE, strokeWidth=0.5))
    for t in xa.ticks:
        px = xa(t)
        d.add(Line(px, y0, px, y0 - 2.5, strokeColor=INK, strokeWidth=0.5))
        d.add(_text(px, y0 - 9, _tick_label(t, xa.ticks, xa.log), anchor="middle"))
    for t in ya.ticks:
        py = ya(t)
        d.add(Line(x0, py, x0 - 2.5, py, strokeColor=INK, strokeWidth=0.5))
        d.add(_text(x0 - 4, py - 2.2, _tick_label(t, ya.ticks, ya.log), anchor="end"))
    d.add(_text((x0 + x1) / 2, y0 - 19, x_title, size=_TITLE_SIZE, anchor="middle"))
    label = Group(_text(0, 0, y_title, size=_TITLE_SIZE, anchor="middle"))
    label.transform = (0, 1, -1, 0, 7, (y0 + y1) / 2)
    d.add(label)


def _dots(d: Drawing, centres: Sequence[tuple[float, float]]) -> None:
    """Filled dots, all in one path: each a very short line with round caps.

    One path instead of a circle shape per standard keeps a plot to a few
    hundred PDF operators, which matters for records of hundreds of analytes.
    """
    if not centres:
        return
    points: list[float] = []
    for x, y in centres:
        points += [x - 0.01, y, x + 0.01, y]
    d.add(Path(points=points, operators=[0, 1] * len(centres), strokeColor=POINT,
               strokeWidth=4.2, strokeLineCap=1, fillColor=None))


def _diamond(d: Drawing, x: float, y: float) -> None:
    # Open, unlike the filled dots, so it stays distinct in black and white.
    s = 2.8
    d.add(Polygon([x - s, y, x, y + s, x + s, y, x, y - s], fillColor=colors.white,
                  strokeColor=EXCLUDED, strokeWidth=0.9))


def _markers(d: Drawing, xa: _Axis, ya: _Axis, points: Sequence[PlotPoint]) -> None:
    """Standards inside the axes: dots for those used, diamonds for those excluded."""
    shown = [p for p in points if math.isfinite(p.x) and math.isfinite(p.y)
             and (p.x > 0 or not xa.log) and (p.y > 0 or not ya.log)]
    _dots(d, [(xa(p.x), ya(p.y)) for p in shown if p.included])
    for p in shown:
        if not p.included:
            _diamond(d, xa(p.x), ya(p.y))


def _legend(d: Drawing, items: list[tuple[str, str]], x: float, y: float, width: float) -> None:
    """Legend rows below the plot; each item is (kind, label)."""
    col = x
    row_y = y
    for kind, label in items:
        w = 16 + stringWidth(label, REGULAR, LABEL_SIZE) + 10
        if col + w > x + width and col > x:
            col, row_y = x, row_y - 10
        cx, cy = col + 5, row_y + 2.2
        if kind == "included":
            _dots(d, [(cx, cy)])
        elif kind == "excluded":
            _diamond(d, cx, cy)
        elif kind == "off":
            _pinned(d, cx, cy + 1.6, up=True)
        elif kind == "curve":
            d.add(Line(col, cy, col + 11, cy, strokeColor=CURVE, strokeWidth=1.1))
        elif kind == "band":
            d.add(Rect(col, cy - 3, 11, 6, fillColor=BAND, strokeColor=None))
        elif kind == "prediction":
            d.add(Line(col, cy, col + 11, cy, strokeColor=CURVE, strokeWidth=0.6,
                       strokeDashArray=[3, 2]))
        elif kind == "zero":
            d.add(Line(col, cy, col + 11, cy, strokeColor=MUTED, strokeWidth=0.6,
                       strokeDashArray=[2, 1.5]))
        d.add(_text(col + 15, row_y, label, color=INK))
        col += w


def calibration_chart(
    points: Sequence[PlotPoint],
    band: CurveBand | None,
    *,
    width: float,
    height: float,
    x_title: str,
    y_title: str,
    log_x: bool = False,
) -> Drawing:
    """Standards against concentration with the fitted curve and its confidence band.

    Parameters
    ----------
    points : sequence of PlotPoint
        The standards; excluded ones are drawn as open diamonds.
    band : CurveBand or None
        Fitted curve and band half-width on a grid; None when there is no fit.
    width, height : float
        Size of the drawing in points.
    x_title, y_title : str
        Axis titles with their units.
    log_x : bool
        Logarithmic concentration axis; the response axis is then logarithmic
        too when every response is positive.

    Examples
    --------
    >>> pts = [PlotPoint(1.0, 2.1, True), PlotPoint(2.0, 3.9, True), PlotPoint(3.0, 7.5, False)]
    >>> band = CurveBand((1.0, 3.0), (2.0, 6.0), (0.2, 0.3), 0.95)
    >>> d = calibration_chart(pts, band, width=240, height=190, x_title="x", y_title="y")
    >>> (d.width, d.height)
    (240, 190)
    """
    register_fonts()
    legend_items = [("included", "Standard used in the fit")]
    if any(not p.included for p in points):
        legend_items.append(("excluded", "Standard excluded"))
    if band is not None:
        legend_items.append(("curve", "Fitted curve"))
        legend_items.append(("band", f"{band.confidence * 100:g} % confidence band of the mean"))
        if band.prediction_half_width is not None:
            legend_items.append(
                ("prediction", f"{band.confidence * 100:g} % prediction limits for one reading"))
    legend_rows = _legend_rows(legend_items, width - 40)
    bottom = 30 + 10 * legend_rows
    d = Drawing(width, height)
    xs = [p.x for p in points]
    ys = [p.y for p in points]
    # On a log concentration axis a log response axis keeps the low standards in view.
    log_y = log_x and bool(ys) and min(ys) > 0
    if band is not None:
        widest = band.prediction_half_width or band.half_width
        xs += list(band.x)
        ys += [m + h for m, h in zip(band.yhat, widest)]
        if not log_y:
            ys += [m - h for m, h in zip(band.yhat, widest)]
    xa = _Axis.fit(xs, 46, width - 54, log=log_x, target=6)
    ya = _Axis.fit(ys, bottom, height - bottom - 6, log=log_y, target=5)
    if band is not None and band.x:
        floor = ya.ticks[0]

        def at(x: float, y: float) -> tuple[float, float]:
            return xa(x), ya(max(y, floor) if log_y else y)

        upper = [at(x, m + h) for x, m, h in zip(band.x, band.yhat, band.half_width)]
        lower = [at(x, m - h) for x, m, h in zip(band.x, band.yhat, band.half_width)]
        outline = [c for xy in upper + lower[::-1] for c in xy]
        d.add(Polygon(outline, fillColor=BAND, strokeColor=None, strokeWidth=0))
        line = [c for x, m in zip(band.x, band.yhat) for c in at(x, m)]
        d.add(PolyLine(line, strokeColor=CURVE, strokeWidth=1.1))
        if band.prediction_half_width is not None:
            for sign in (1, -1):
                edge = [c for x, m, h in zip(band.x, band.yhat, band.prediction_half_width)
                        for c in at(x, m + sign * h)]
                d.add(PolyLine(edge, strokeColor=CURVE, strokeWidth=0.6,
                               strokeDashArray=[3, 2]))
    _frame(d, xa, ya, x_title=x_title, y_title=y_title)
    _markers(d, xa, ya, points)
    _legend(d, legend_items, 46, bottom - 38, width - 40)
    return d


def residual_chart(
    points: Sequence[PlotPoint],
    *,
    width: float,
    height: float,
    x_title: str,
    y_title: str,
    log_x: bool = False,
) -> Drawing:
    """Residuals (response − fitted) against concentration, with the zero line.

    The residual axis is scaled to the standards used in the fit; an excluded
    standard far off that scale is pinned to the edge as a triangle pointing
    the way it lies, so one bad injection does not flatten the others.

    Examples
    --------
    >>> d = residual_chart([PlotPoint(1.0, -0.1, True), PlotPoint(2.0, 0.2, True)],
    ...                    width=240, height=170, x_title="x", y_title="r")
    >>> d.height
    170
    """
    register_fonts()
    scale = [p.y for p in points if p.included] or [p.y for p in points]
    d = Drawing(width, height)
    xa = _Axis.fit([p.x for p in points], 46, width - 54, log=log_x, target=6)
    # The legend height is only known once we know whether anything is off scale.
    lo_hi = (min(scale), max(scale)) if scale else (0.0, 0.0)
    probe = _Axis.fit(list(lo_hi), 0, 1, target=4, symmetric=True)
    low, high = probe.ticks[0], probe.ticks[-1]
    off = [p for p in points if math.isfinite(p.y) and not low <= p.y <= high]
    legend_items = [("included", "Standard used in the fit")]
    if any(not p.included for p in points if p not in off):
        legend_items.append(("excluded", "Standard excluded"))
    if off:
        legend_items.append(("off", "Off scale (pinned to the edge)"))
    legend_items.append(("zero", "Zero"))
    bottom = 30 + 10 * _legend_rows(legend_items, width - 40)
    ya = _Axis(probe.ticks, bottom, height - bottom - 6, False)
    zero = ya(0.0)
    d.add(Line(xa.start, zero, xa.start + xa.length, zero, strokeColor=MUTED, strokeWidth=0.6,
               strokeDashArray=[2, 1.5]))
    _frame(d, xa, ya, x_title=x_title, y_title=y_title)
    _markers(d, xa, ya, [p for p in points if p not in off])
    for p in off:
        if math.isfinite(p.x) and (p.x > 0 or not log_x):
            _pinned(d, xa(p.x), ya(high if p.y > high else low), up=p.y > high)
    _legend(d, legend_items, 46, bottom - 38, width - 40)
    return d


def _pinned(d: Drawing, x: float, y: float, *, up: bool) -> None:
    s = 3.2 if up else -3.2
    d.add(Polygon([x - abs(s), y - s, x + abs(s), y - s, x, y], fillColor=colors.white,
                  strokeColor=EXCLUDED, strokeWidth=0.9))


def _legend_rows(items: list[tuple[str, str]], width: float) -> int:
    rows, used = 1, 0.0
    for _, label in items:
        w = 16 + stringWidth(label, REGULAR, LABEL_SIZE) + 10
        if used + w > width and used > 0:
            rows, used = rows + 1, 0.0
        used += w
    return rows
