"""The page's own charts as inline SVG: readable at any width, each standard a link to its row.

The PDF's drawings are laid out for paper (6.5 pt labels in a fixed box); on a
screen they shrink below reading size.  These charts draw the same figures
(standards, the fitted curve and its band, residuals, control limits) in a
``viewBox`` that scales with the window (``width: 100 %``), with labels large
enough to stay at 12 CSS pixels or more down to a 390 px wide phone, in the
page's own font family.  Only presentation: every figure comes from the library.
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Sequence
from dataclasses import dataclass
from xml.sax.saxutils import escape, quoteattr

from calib.report.charts import nice_ticks, wants_log_axis

__all__ = ["FONT_SIZE", "Mark", "chart_svg", "residual_marks", "trend_svg"]

#: ViewBox width and label size in its units.  A chart is at least ~340 CSS px wide on a
#: 390 px screen (main's padding aside), so labels render at 17 · 340 / 460 ≈ 12.6 px there
#: at the very least, and larger on wider windows.
_VIEW_WIDTH = 460
FONT_SIZE = 17
_FONT = "system-ui, sans-serif"
_INK, _MUTED, _LINE = "#1d2329", "#5b6570", "#c9d0d6"
_POINT, _EXCLUDED, _CURVE, _BAND = "#23466b", "#9b2314", "#1c6e8c", "#cde2ea"
_WARN, _ACTION = "#7a5200", "#9b2314"


@dataclass(frozen=True)
class Mark:
    """One point to draw: where, whether it was used, and where selecting it leads.

    ``href`` is a same-page anchor (the standard's table row) or empty;
    ``label`` names the point (its cell) for the tooltip and screen readers.
    """

    x: float
    y: float
    used: bool = True
    href: str = ""
    label: str = ""
    flagged: bool = False


class _Scale:
    """Data values onto a span of the viewBox, linear or log10, with round ticks."""

    def __init__(self, values: Sequence[float], start: float, end: float, *,
                 log: bool = False, symmetric: bool = False, target: int = 5) -> None:
        finite = [v for v in values if math.isfinite(v) and (v > 0 or not log)]
        self.log = log and bool(finite)
        if self.log:
            low = math.floor(math.log10(min(finite)) + 1e-9)
            high = max(math.ceil(math.log10(max(finite)) - 1e-9), low + 1)
            self.ticks: tuple[float, ...] = tuple(10.0 ** k for k in range(low, high + 1))
        else:
            lo, hi = (min(finite), max(finite)) if finite else (0.0, 1.0)
            if symmetric:
                m = max(abs(lo), abs(hi)) * 1.1 or 1.0
                lo, hi = -m, m
            elif 0 <= lo < 0.35 * hi:
                lo = 0.0
            self.ticks = nice_ticks(lo, hi, target=target)
        self.start, self.end = start, end
        self._lo, self._hi = self._t(self.ticks[0]), self._t(self.ticks[-1])

    def _t(self, v: float) -> float:
        return math.log10(v) if self.log else v

    def __call__(self, v: float) -> float:
        span = (self._hi - self._lo) or 1.0
        return self.start + (self._t(v) - self._lo) / span * (self.end - self.start)

    def inside(self, v: float) -> bool:
        return math.isfinite(v) and (v > 0 or not self.log) and \
            self._lo - 1e-12 <= self._t(v) <= self._hi + 1e-12


def _tick(v: float) -> str:
    """A tick label: short, no binary noise.

    Examples
    --------
    >>> _tick(0.30000000000000004), _tick(25000.0), _tick(0.0)
    ('0.3', '2.5e+04', '0')
    """
    return f"{v:.3g}" if v else "0"


def _text(x: float, y: float, text: str, *, anchor: str = "middle", size: int = FONT_SIZE,
          fill: str = _INK, rotate: bool = False) -> str:
    turn = f' transform="rotate(-90 {x:.1f} {y:.1f})"' if rotate else ""
    return (f'<text x="{x:.1f}" y="{y:.1f}" font-size="{size}" text-anchor="{anchor}" '
            f'fill="{fill}"{turn}>{escape(text)}</text>')


def _frame(out: list[str], xs: _Scale, ys: _Scale, x_title: str, y_title: str,
           x_labels: Sequence[tuple[float, str, str]] | None = None) -> None:
    left, right, top, bottom = xs.start, xs.end, ys.end, ys.start
    out.append(f'<rect x="{left:.1f}" y="{top:.1f}" width="{right - left:.1f}" '
               f'height="{bottom - top:.1f}" fill="none" stroke="{_MUTED}"/>')
    for t in ys.ticks:
        y = ys(t)
        out.append(f'<line x1="{left:.1f}" y1="{y:.1f}" x2="{right:.1f}" y2="{y:.1f}" '
                   f'stroke="{_LINE}" stroke-width="0.6"/>')
        out.append(_text(left - 5, y + FONT_SIZE * 0.35, _tick(t), anchor="end"))
    labels = x_labels if x_labels is not None else [(t, _tick(t), "middle") for t in xs.ticks]
    for t, word, anchor in labels:
        x = xs(t)
        out.append(f'<line x1="{x:.1f}" y1="{bottom:.1f}" x2="{x:.1f}" y2="{bottom + 5:.1f}" '
                   f'stroke="{_MUTED}"/>')
        out.append(_text(x, bottom + FONT_SIZE + 4, word, anchor=anchor))
    out.append(_text((left + right) / 2, bottom + 2 * FONT_SIZE + 10, x_title))
    out.append(_text(FONT_SIZE, (top + bottom) / 2, y_title, rotate=True))


def _legend(out: list[str], items: Sequence[tuple[str, str]], top: float) -> None:
    """One legend row per item (swatch kind, words): only what the chart draws."""
    for k, (kind, words) in enumerate(items):
        y = top + k * (FONT_SIZE + 6)
        if kind in ("used", "excluded"):
            colour = _POINT if kind == "used" else _EXCLUDED
            fill = colour if kind == "used" else "#ffffff"
            out.append(f'<circle cx="22" cy="{y - 5:.1f}" r="5" fill="{fill}" stroke="{colour}" '
                       'stroke-width="2"/>')
        elif kind == "flagged":
            out.append(f'<circle cx="22" cy="{y - 5:.1f}" r="9" fill="none" stroke="{_WARN}" '
                       'stroke-width="2.5"/>')
        elif kind == "band":
            out.append(f'<rect x="12" y="{y - 11:.1f}" width="20" height="11" fill="{_BAND}"/>')
        else:
            colour = {"curve": _CURVE, "mean": _MUTED, "warning": _WARN, "action": _ACTION,
                      "zero": _MUTED}.get(kind, _INK)
            dash = (' stroke-dasharray="5 3"' if kind in ("warning", "zero") else
                    ' stroke-dasharray="6 4"' if kind == "limits" else "")
            colour = _CURVE if kind == "limits" else colour
            out.append(f'<line x1="10" y1="{y - 5:.1f}" x2="34" y2="{y - 5:.1f}" '
                       f'stroke="{colour}" stroke-width="2.5"{dash}/>')
        out.append(_text(42, y, words, anchor="start"))


def _marks(out: list[str], xs: _Scale, ys: _Scale, marks: Sequence[Mark]) -> None:
    # Flagged points last, so that they sit on top of a replicate at the same place.
    for m in sorted(marks, key=lambda m: m.flagged):
        if not (xs.inside(m.x) and ys.inside(m.y)):
            continue
        colour = _POINT if m.used else _EXCLUDED
        fill = colour if m.used else "#ffffff"
        dot = (f'<circle cx="{xs(m.x):.1f}" cy="{ys(m.y):.1f}" r="6" fill="{fill}" '
               f'stroke="{colour}" stroke-width="2"/>')
        if m.flagged:
            dot += (f'<circle cx="{xs(m.x):.1f}" cy="{ys(m.y):.1f}" r="11" fill="none" '
                    f'stroke="{_WARN}" stroke-width="2.5"/>')
        title = f"<title>{escape(m.label)}</title>" if m.label else ""
        if m.href:
            out.append(f'<a href={quoteattr(m.href)} aria-label={quoteattr(m.label or m.href)}>'
                       f'{title}{dot}</a>')
        else:
            out.append(f"<g>{title}{dot}</g>")


def _svg(body: list[str], height: float, label: str) -> str:
    return (f'<svg class="chart" viewBox="0 0 {_VIEW_WIDTH} {height:.0f}" role="group" '
            f'aria-label={quoteattr(label)} font-family="{_FONT}" '
            f'preserveAspectRatio="xMidYMid meet">' + "".join(body) + "</svg>")


def chart_svg(marks: Sequence[Mark], *, x_title: str, y_title: str, label: str,
              curve: Sequence[tuple[float, float]] = (),
              band: Sequence[tuple[float, float, float]] = (), band_words: str = "",
              limits: Sequence[tuple[float, float, float]] = (), limits_words: str = "",
              zero_line: bool = False, log_x: bool | None = None) -> str:
    """A scatter of ``marks`` with an optional fitted ``curve`` and ``band`` (x, low, high).

    Examples
    --------
    >>> svg = chart_svg([Mark(1, 2, href="#r1", label="A1"), Mark(2, 4, used=False)],
    ...                 x_title="x", y_title="y", label="test", curve=[(1, 2), (2, 4)])
    >>> svg.startswith('<svg class="chart" viewBox="0 0 460') and 'href="#r1"' in svg
    True
    >>> "Standard excluded" in svg and "Fitted curve" in svg
    True
    """
    if log_x is None:
        log_x = wants_log_axis([m.x for m in marks])
    xs_all = [m.x for m in marks] + [x for x, _ in curve]
    ys_all = [m.y for m in marks if m.used or zero_line is False] + [y for _, y in curve]
    ys_all += [v for _, lo, hi in (*band, *limits) for v in (lo, hi)]
    log_y = bool(log_x and ys_all and min(ys_all) > 0)
    items = [("used", "Standard in the fit")]
    if any(not m.used for m in marks):
        items.append(("excluded", "Standard excluded"))
    if any(m.flagged for m in marks):
        items.append(("flagged", "Flagged by a check"))
    if band:
        items.append(("band", band_words or "Confidence band"))
    if curve:
        items.append(("curve", "Fitted curve"))
    if limits:
        items.append(("limits", limits_words or "Prediction limits"))
    if zero_line:
        items.append(("zero", "Zero"))
    plot_top, plot_h = 12, 230
    legend_top = plot_top + plot_h + 2 * FONT_SIZE + 34
    height = legend_top + len(items) * (FONT_SIZE + 6)
    xs = _Scale(xs_all, 74, _VIEW_WIDTH - 16, log=log_x, target=4)
    if zero_line:
        scale = [m.y for m in marks if m.used] or [m.y for m in marks]
        ys = _Scale(scale or [0.0], plot_top + plot_h, plot_top, symmetric=True, target=4)
    else:
        ys = _Scale(ys_all, plot_top + plot_h, plot_top, log=log_y, target=5)
    out: list[str] = []
    if band:
        upper = [(xs(x), ys(hi)) for x, _, hi in band if ys.inside(hi) and xs.inside(x)]
        lower = [(xs(x), ys(lo)) for x, lo, _ in band if ys.inside(lo) and xs.inside(x)]
        pts = " ".join(f"{x:.1f},{y:.1f}" for x, y in upper + lower[::-1])
        out.append(f'<polygon points="{pts}" fill="{_BAND}" stroke="none"/>')
    _frame(out, xs, ys, x_title, y_title)
    if zero_line:
        out.append(f'<line x1="{xs.start:.1f}" y1="{ys(0.0):.1f}" x2="{xs.end:.1f}" '
                   f'y2="{ys(0.0):.1f}" stroke="{_MUTED}" stroke-width="1.5" '
                   'stroke-dasharray="5 3"/>')
    if curve:
        pts = " ".join(f"{xs(x):.1f},{ys(y):.1f}" for x, y in curve
                       if xs.inside(x) and ys.inside(y))
        out.append(f'<polyline points="{pts}" fill="none" stroke="{_CURVE}" stroke-width="2"/>')
    for side in (1, 2):
        pts = " ".join(f"{xs(row[0]):.1f},{ys(row[side]):.1f}" for row in limits
                       if xs.inside(row[0]) and ys.inside(row[side]))
        if pts:
            out.append(f'<polyline points="{pts}" fill="none" stroke="{_CURVE}" '
                       'stroke-width="1.2" stroke-dasharray="6 4"/>')
    _marks(out, xs, ys, marks)
    _legend(out, items, legend_top)
    return _svg(out, height, label)


def residual_marks(marks: Sequence[Mark], fitted: Sequence[float | None]) -> list[Mark]:
    """``marks`` as residuals (response − fitted), leaving out points without a fitted value."""
    return [Mark(m.x, m.y - f, m.used, m.href, m.label, m.flagged)
            for m, f in zip(marks, fitted)
            if f is not None and math.isfinite(f)]


def trend_svg(dates: Sequence[str], values: Sequence[float], *, y_title: str, label: str,
              mean: float | None = None, warning: tuple[float, float] | None = None,
              action: tuple[float, float] | None = None, baseline: int = 0,
              flagged: Sequence[int] = (), span: tuple[int, int] | None = None,
              span_label: str = "") -> str:
    """A control chart against run dates (``YYYY-MM-DD``), limits and legend as drawn.

    The shaded baseline period is points ``span[0]`` to ``span[1] - 1`` named
    ``span_label`` (a frozen baseline need not be the first curves); by default
    the first ``baseline`` points.

    Examples
    --------
    >>> svg = trend_svg(["2026-11-01", "2026-11-08", "2026-11-20"], [1.0, 1.1, 0.9],
    ...                 y_title="Slope", label="t", mean=1.0, warning=(0.8, 1.2),
    ...                 action=(0.7, 1.3), baseline=3)
    >>> "Baseline: first 3 curves" in svg and "2026-11-01" in svg
    True
    """
    days = [dt.date.fromisoformat(d).toordinal() for d in dates]
    finite = [v for v in values if math.isfinite(v)]
    ys_all = finite + [v for pair in (warning, action) if pair for v in pair]
    ys_all += [mean] if mean is not None else []
    items = [("used", "Accepted curve (run date)")]
    if flagged:
        items.append(("excluded", "A run rule fired"))
    if mean is not None:
        items.append(("mean", "Mean"))
    if warning is not None:
        items.append(("warning", "±2s warning"))
    if action is not None:
        items.append(("action", "±3s action"))
    if span is None:
        shown = min(baseline, len(values))
        span = (0, shown)
        span_label = f"Baseline: first {shown} curve{'s' if shown != 1 else ''}"
    first, stop = span[0], min(span[1], len(values))
    shade = mean is not None and stop > first
    if shade:
        items.append(("band", span_label))
    plot_top, plot_h = 12, 200
    legend_top = plot_top + plot_h + 2 * FONT_SIZE + 34
    height = legend_top + len(items) * (FONT_SIZE + 6)
    lo, hi = (min(days), max(days)) if days else (0, 1)
    pad = max(1, round((hi - lo) * 0.04))
    xs = _Scale([lo - pad, hi + pad], 74, _VIEW_WIDTH - 16, target=3)
    xs.ticks = (lo - pad, hi + pad)
    xs._lo, xs._hi = float(lo - pad), float(hi + pad)
    ys = _Scale(ys_all or [0.0, 1.0], plot_top + plot_h, plot_top, target=4)
    out: list[str] = []
    if shade:
        x1 = xs(days[stop - 1]) + 4
        x0 = xs(days[first]) - 4
        out.append(f'<rect x="{x0:.1f}" y="{ys.end:.1f}" width="{x1 - x0:.1f}" '
                   f'height="{ys.start - ys.end:.1f}" fill="{_BAND}"/>')
    # The first and last run dates, kept inside the frame (the axis is in days).
    ends = [(float(lo), dt.date.fromordinal(lo).isoformat(), "start")]
    if hi != lo:
        ends.append((float(hi), dt.date.fromordinal(hi).isoformat(), "end"))
    _frame(out, xs, ys, "Run date", y_title, x_labels=ends)
    for kind, colour, pair in (("warning", _WARN, warning), ("action", _ACTION, action)):
        for v in pair or ():
            if ys.inside(v):
                dash = ' stroke-dasharray="5 3"' if kind == "warning" else ""
                out.append(f'<line x1="{xs.start:.1f}" y1="{ys(v):.1f}" x2="{xs.end:.1f}" '
                           f'y2="{ys(v):.1f}" stroke="{colour}" stroke-width="1.5"{dash}/>')
    if mean is not None and ys.inside(mean):
        out.append(f'<line x1="{xs.start:.1f}" y1="{ys(mean):.1f}" x2="{xs.end:.1f}" '
                   f'y2="{ys(mean):.1f}" stroke="{_MUTED}" stroke-width="2"/>')
    path = " ".join(f"{xs(d):.1f},{ys(v):.1f}" for d, v in zip(days, values) if math.isfinite(v))
    out.append(f'<polyline points="{path}" fill="none" stroke="{_MUTED}" stroke-width="1"/>')
    hot = set(flagged)
    _marks(out, xs, ys, [Mark(float(d), v, i not in hot, "",
                              f"{dates[i]}: {_tick(v)}")
                         for i, (d, v) in enumerate(zip(days, values)) if math.isfinite(v)])
    _legend(out, items, legend_top)
    return _svg(out, height, label)
