"""The fonts of every PDF calib draws: the record, its signature page, the trend and sample reports.

All text is set in DejaVu Sans (bundled in ``report_templates/fonts``): the
standard PDF fonts have no µ, ≤, ≥, σ, ν and cannot print many names
(Łukasiewicz, Nguyễn).  Here, below both :mod:`calib.record` (the PDF
signature page) and :mod:`calib.report`, so that neither imports the other for them.
"""

from __future__ import annotations

import functools

from calib import resources

__all__ = ["BOLD", "REGULAR", "register_fonts"]

REGULAR = "CalibSans"
BOLD = "CalibSans-Bold"


@functools.cache
def register_fonts() -> None:
    """Register the bundled DejaVu Sans faces with reportlab (once per process)."""
    from reportlab.pdfbase import pdfmetrics
    from reportlab.pdfbase.ttfonts import TTFont

    fonts = resources.bundled_folder("report_templates") / "fonts"
    pdfmetrics.registerFont(TTFont(REGULAR, str(fonts / "DejaVuSans.ttf")))
    pdfmetrics.registerFont(TTFont(BOLD, str(fonts / "DejaVuSans-Bold.ttf")))
    pdfmetrics.registerFontFamily(REGULAR, normal=REGULAR, bold=BOLD, italic=REGULAR,
                                  boldItalic=BOLD)
