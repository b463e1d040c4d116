"""The PDF's charts as inline SVG: the same drawings, rendered for the page."""

from __future__ import annotations

import re
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    from reportlab.graphics.shapes import Drawing

    from calib.archive import AnalyteTrend
    from calib.checks.evaluate import CurveAssessment

__all__ = ["curve_charts", "drawing_svg", "trend_charts"]

_GRID = 80
_WIDTH, _HEIGHT = 380, 280
_QUANTITIES = {"slope": "Slope b", "intercept": "Intercept a", "residual_sd": "Residual SD"}


_STYLE = re.compile(r'\sstyle="([^"]*)"')
_PROPERTY = re.compile(r"^[a-z-]+$")


def _attributes(match: re.Match[str]) -> str:
    """An SVG ``style="..."`` as presentation attributes.

    The page's Content-Security-Policy allows no inline style, so the chart's
    colours, strokes and fonts travel as attributes, which it does not govern.

    Examples
    --------
    >>> _STYLE.sub(_attributes, '<path style="stroke: rgb(10%,43%,54%); fill: None;"/>')
    '<path stroke="rgb(10%,43%,54%)" fill="none"/>'
    """
    out = []
    for part in match.group(1).split(";"):
        name, _, value = part.partition(":")
        name, value = name.strip().lower(), value.strip()
        if not (name and value and _PROPERTY.match(name)) or '"' in value:
            continue
        out.append(f' {name}="{"none" if value.lower() == "none" else value}"')
    return "".join(out)


def drawing_svg(drawing: Drawing, *, label: str) -> str:
    """``drawing`` as an ``<svg>`` element with ``label`` as its accessible name."""
    from xml.sax.saxutils import quoteattr

    from reportlab.graphics import renderSVG

    text = renderSVG.drawToString(drawing)
    text = _STYLE.sub(_attributes, text[text.index("<svg"):])
    return re.sub(r"^<svg\b", f"<svg role=\"img\" aria-label={quoteattr(label)}", text, count=1)


def curve_charts(curve: CurveAssessment, *, unit_x: str = "", unit_y: str = "") -> list[str]:
    """Calibration plot (confidence and prediction bands) and residual plot of ``curve``."""
    from calib.report.charts import (
        CurveBand,
        PlotPoint,
        calibration_chart,
        residual_chart,
        wants_log_axis,
    )

    xs = [s.point.concentration for s in curve.standards]
    log_x = wants_log_axis(xs)
    band = None
    fit = curve.fit
    if fit is not None:
        lo, hi = min(xs), max(xs)
        grid = (np.geomspace(lo, hi, _GRID) if log_x and lo > 0 else np.linspace(lo, hi, _GRID))
        yhat, half = fit.predict(grid), fit.confidence_band(grid)
        pred = fit.prediction_band(grid)
        if np.all(np.isfinite(yhat)) and np.all(np.isfinite(half)):
            band = CurveBand(tuple(grid.tolist()), tuple(yhat.tolist()), tuple(half.tolist()),
                             curve.confidence,
                             tuple(pred.tolist()) if np.all(np.isfinite(pred)) else None)
    x_title = "Concentration" + (f" ({unit_x})" if unit_x else "")
    points = [PlotPoint(s.point.concentration, s.point.response, s.used) for s in curve.standards]
    charts = [drawing_svg(calibration_chart(
        points, band, width=_WIDTH, height=_HEIGHT, x_title=x_title,
        y_title="Response" + (f" ({unit_y})" if unit_y else ""), log_x=log_x),
        label=f"{curve.analyte}: response against concentration with the fitted curve")]
    residuals = [PlotPoint(s.point.concentration, s.point.response - s.fitted, s.used)
                 for s in curve.standards if s.fitted is not None]
    if residuals:
        charts.append(drawing_svg(residual_chart(
            residuals, width=_WIDTH, height=_HEIGHT - 20, x_title=x_title,
            y_title="Residual" + (f" ({unit_y})" if unit_y else ""), log_x=log_x),
            label=f"{curve.analyte}: residuals against concentration"))
    return charts


def trend_charts(trend: AnalyteTrend) -> list[tuple[str, str]]:
    """(title, svg) of each evaluated control chart of ``trend``."""
    from calib.report.trend_pdf import control_chart_drawing

    out = []
    for chart in trend.charts:
        if chart.limits is None:
            continue
        title = _QUANTITIES.get(chart.quantity, chart.quantity)
        out.append((title, drawing_svg(control_chart_drawing(
            chart, width=560, height=200, y_title=title, baseline=trend.baseline),
            label=f"{trend.analyte}: control chart of {title.lower()}")))
    return out
