"""Draw the record's charts (reportlab drawings) straight onto a PDF canvas.

The charts are reportlab ``Drawing`` objects, so the web page can turn the
same drawing into SVG.  reportlab's general PDF renderer keeps a full
graphics-state stack and sets every text string as its own text object; a
500-analyte record has a thousand charts and that renderer took a tenth of
the whole run.  The shapes our charts use (lines, polylines, polygons,
rectangles, paths, strings and groups with a transform) are few and simple,
so :class:`ChartFlowable` writes their PDF operators itself, every label of a
chart in one text object.  A drawing holding any other shape is handed to
reportlab's renderer unchanged.
"""

from __future__ import annotations

from collections.abc import Sequence

from reportlab.graphics import renderPDF
from reportlab.graphics.shapes import (
    Drawing,
    Group,
    Line,
    Path,
    Polygon,
    PolyLine,
    Rect,
    Shape,
    String,
)
from reportlab.lib.rl_accel import fp_str
from reportlab.platypus import Flowable

from calib.report.text import TextWriter, measure, rgb

__all__ = ["ChartFlowable", "as_flowable"]

_Matrix = tuple[float, float, float, float, float, float]
_IDENTITY: _Matrix = (1.0, 0.0, 0.0, 1.0, 0.0, 0.0)
_KNOWN = (Group, Line, Path, Polygon, PolyLine, Rect, String)


def as_flowable(chart: Flowable) -> Flowable:
    """A chart ready for the story: drawings go through :class:`ChartFlowable`, others as they are.

    Examples
    --------
    >>> from reportlab.graphics.shapes import Drawing
    >>> type(as_flowable(Drawing(100, 50))).__name__
    'ChartFlowable'
    """
    return ChartFlowable(chart) if isinstance(chart, Drawing) else chart


def _simple(node: Shape) -> bool:
    if isinstance(node, Group):
        return all(_simple(child) for child in node.contents)
    return isinstance(node, _KNOWN)


def _times(m: _Matrix, n: Sequence[float]) -> _Matrix:
    """The matrix ``m·n`` (n applied first), in PDF's a b c d e f order."""
    a, b, c, d, e, f = m
    a2, b2, c2, d2, e2, f2 = n
    return (a * a2 + c * b2, b * a2 + d * b2, a * c2 + c * d2, b * c2 + d * d2,
            a * e2 + c * f2 + e, b * e2 + d * f2 + f)



class ChartFlowable(Flowable):
    """A reportlab drawing as a flowable, drawn with our own operators where it can be.

    Parameters
    ----------
    drawing : Drawing
        The chart; its width and height are the flowable's.
    """

    def __init__(self, drawing: Drawing) -> None:
        super().__init__()
        self.drawing = drawing
        self.width = drawing.width
        self.height = drawing.height
        self._simple = _simple(drawing)

    def wrap(self, availWidth: float, availHeight: float) -> tuple[float, float]:
        return self.width, self.height

    def draw(self) -> None:
        canvas = self.canv
        if not self._simple:
            renderPDF.draw(self.drawing, canvas, 0, 0)
            return
        ops: list[str] = []
        text = TextWriter(canvas, 7.0)
        canvas.saveState()
        for node in self.drawing.contents:
            self._node(node, _IDENTITY, ops, text)
        canvas.addLiteral("\n".join(ops))
        canvas.restoreState()
        text.write()

    def _node(self, node: Shape, matrix: _Matrix, ops: list[str], text: TextWriter) -> None:
        if isinstance(node, Group):
            transform = tuple(node.transform)
            inner = matrix if transform == _IDENTITY else _times(matrix, transform)
            for child in node.contents:
                self._node(child, inner, ops, text)
            return
        if isinstance(node, String):
            self._string(node, matrix, text)
            return
        path = self._path(node)
        if path is None:
            return
        fill = getattr(node, "fillColor", None) if not isinstance(node, (Line, PolyLine)) else None
        stroke = node.strokeColor if node.strokeWidth else None
        if fill is None and stroke is None:
            return
        out = ["q"]
        if matrix != _IDENTITY:
            out.append(f"{fp_str(*matrix)} cm")
        if fill is not None:
            out.append(f"{rgb(fill)} rg")
        if stroke is not None:
            out.append(f"{rgb(stroke)} RG {fp_str(node.strokeWidth)} w")
            out.append(f"{node.strokeLineCap or 0} J {node.strokeLineJoin or 0} j")
            dash = node.strokeDashArray
            out.append(f"[{fp_str(*dash)}] 0 d" if dash else "[] 0 d")
        out.append(path)
        out.append("B" if fill is not None and stroke is not None else "f" if fill is not None
                   else "S")
        out.append("Q")
        ops.append(" ".join(out))

    @staticmethod
    def _path(node: Shape) -> str | None:
        """The path construction operators of a shape (no painting operator)."""
        if isinstance(node, Line):
            return f"{fp_str(node.x1, node.y1)} m {fp_str(node.x2, node.y2)} l"
        if isinstance(node, Rect):
            if node.rx or node.ry:
                return None
            return f"{fp_str(node.x, node.y, node.width, node.height)} re"
        if isinstance(node, (Polygon, PolyLine)):
            pts = node.points
            if len(pts) < 4:
                return None
            parts = [f"{fp_str(pts[0], pts[1])} m"]
            parts += [f"{fp_str(pts[i], pts[i + 1])} l" for i in range(2, len(pts) - 1, 2)]
            if isinstance(node, Polygon):
                parts.append("h")
            return " ".join(parts)
        if isinstance(node, Path):
            pts, parts, i = node.points, [], 0
            for op in node.operators:
                if op == 0:
                    parts.append(f"{fp_str(pts[i], pts[i + 1])} m")
                    i += 2
                elif op == 1:
                    parts.append(f"{fp_str(pts[i], pts[i + 1])} l")
                    i += 2
                elif op == 2:
                    parts.append(f"{fp_str(*pts[i:i + 6])} c")
                    i += 6
                else:
                    parts.append("h")
            return " ".join(parts) or None
        return None

    @staticmethod
    def _string(node: String, matrix: _Matrix, text: TextWriter) -> None:
        x = node.x
        if node.textAnchor in ("middle", "end"):
            w = measure(node.text, node.fontName, node.fontSize)
            x -= w / 2 if node.textAnchor == "middle" else w
        a, b, c, d, e, f = matrix
        origin = (a * x + c * node.y + e, b * x + d * node.y + f)
        text.add(node.text, node.fontName, *origin, size=node.fontSize,
                 matrix=(a, b, c, d) if (a, b, c, d) != (1.0, 0.0, 0.0, 1.0) else None,
                 color=node.fillColor)
