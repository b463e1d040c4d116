"""Fonts, paragraph styles and table styles of the PDF record.

All text, chart labels included, is set in DejaVu Sans (:mod:`calib.fonts`, bundled in
``report_templates/fonts``): the standard PDF fonts have no µ, ≤, ≥, σ, ν
and cannot print many names (Łukasiewicz, Nguyễn).
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

from reportlab.lib import colors
from reportlab.lib.enums import TA_LEFT, TA_RIGHT
from reportlab.lib.styles import ParagraphStyle
from reportlab.platypus import TableStyle

from calib.fonts import BOLD, REGULAR, register_fonts

__all__ = ["BOLD", "INK", "LINE", "MUTED", "REGULAR", "SHADE", "Styles", "get_styles",
           "register_fonts"]

# A sober palette that still reads when printed in black and white.
INK = colors.HexColor("#1d1d1f")
MUTED = colors.HexColor("#5b5f66")
LINE = colors.HexColor("#9aa0a6")
SHADE = colors.HexColor("#eef0f2")


@dataclass(frozen=True)
class Styles:
    """The paragraph styles of a record."""

    body: ParagraphStyle
    small: ParagraphStyle
    note: ParagraphStyle
    cell: ParagraphStyle
    cell_right: ParagraphStyle
    head_cell: ParagraphStyle
    head_right: ParagraphStyle
    lab: ParagraphStyle
    lab_line: ParagraphStyle
    title: ParagraphStyle
    heading: ParagraphStyle
    verdict: ParagraphStyle


@functools.cache
def get_styles() -> Styles:
    """The record's paragraph styles (built once; reportlab styles are not mutated).

    Examples
    --------
    >>> get_styles().body.fontName
    'CalibSans'
    """
    register_fonts()
    base = ParagraphStyle("body", fontName=REGULAR, fontSize=8.5, leading=11, textColor=INK,
                          alignment=TA_LEFT)
    return Styles(
        body=base,
        small=ParagraphStyle("small", parent=base, fontSize=7.5, leading=9.5),
        note=ParagraphStyle("note", parent=base, fontSize=7, leading=9, textColor=MUTED),
        cell=ParagraphStyle("cell", parent=base, fontSize=7, leading=8.5),
        cell_right=ParagraphStyle("cell_right", parent=base, fontSize=7, leading=8.5,
                                  alignment=TA_RIGHT),
        head_cell=ParagraphStyle("head_cell", parent=base, fontName=BOLD, fontSize=7,
                                 leading=8.5),
        head_right=ParagraphStyle("head_right", parent=base, fontName=BOLD, fontSize=7,
                                  leading=8.5, alignment=TA_RIGHT),
        lab=ParagraphStyle("lab", parent=base, fontName=BOLD, fontSize=12, leading=15),
        lab_line=ParagraphStyle("lab_line", parent=base, fontSize=7.5, leading=9.5,
                                textColor=MUTED),
        title=ParagraphStyle("title", parent=base, fontName=BOLD, fontSize=14, leading=18,
                             spaceBefore=6, spaceAfter=4),
        heading=ParagraphStyle("heading", parent=base, fontName=BOLD, fontSize=10, leading=13,
                               spaceBefore=9, spaceAfter=3),
        verdict=ParagraphStyle("verdict", parent=base, fontSize=9.5, leading=12.5),
    )


def _grid_style(*, header_rows: int = 1, font_size: float = 7,
               right_from: int | None = None) -> TableStyle:
    """Style of a data table: bold shaded header, hairlines between rows.

    Parameters
    ----------
    header_rows : int
        Rows at the top set as the header.
    font_size : float
        Text size of plain-string cells.
    right_from : int, optional
        First column whose cells are right-aligned (numbers); None for none.

    Examples
    --------
    >>> ("FONTNAME", (0, 0), (-1, 0), BOLD) in _grid_style().getCommands()
    True
    """
    commands: list[tuple] = [
        ("FONTNAME", (0, 0), (-1, -1), REGULAR),
        ("FONTSIZE", (0, 0), (-1, -1), font_size),
        ("LEADING", (0, 0), (-1, -1), font_size + 1.5),
        ("TEXTCOLOR", (0, 0), (-1, -1), INK),
        ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ("TOPPADDING", (0, 0), (-1, -1), 1.6),
        ("BOTTOMPADDING", (0, 0), (-1, -1), 1.8),
        ("LEFTPADDING", (0, 0), (-1, -1), 3),
        ("RIGHTPADDING", (0, 0), (-1, -1), 3),
        ("LINEBELOW", (0, header_rows), (-1, -1), 0.25, LINE),
        ("LINEABOVE", (0, 0), (-1, 0), 0.6, INK),
        ("LINEBELOW", (0, -1), (-1, -1), 0.6, INK),
    ]
    if header_rows:
        commands += [
            ("FONTNAME", (0, 0), (-1, header_rows - 1), BOLD),
            ("BACKGROUND", (0, 0), (-1, header_rows - 1), SHADE),
            ("LINEBELOW", (0, header_rows - 1), (-1, header_rows - 1), 0.6, INK),
        ]
    if right_from is not None:
        commands.append(("ALIGN", (right_from, 0), (-1, -1), "RIGHT"))
    return TableStyle(commands)
