"""The PDF calibration record: template, styles, page furniture, story and writer.

:func:`write_pdf` renders a record dict (the parsed ``calib.record/2`` or ``/1`` JSON)
with a :class:`ReportTemplate` from :func:`load_template`.
"""

from calib.report.pdf import ATTACHMENT_NAME, write_pdf
from calib.report.template import ReportTemplate, load_template

__all__ = ["ATTACHMENT_NAME", "ReportTemplate", "load_template", "write_pdf"]
