"""The PDF calibration record: template, styles, page furniture, story and writer.

:func:`write_pdf` renders a record dict (the parsed ``calib.record/2`` or ``/1`` JSON)
with a :class:`ReportTemplate` from :func:`load_template`; :func:`record_pages`
hands that drawing to :mod:`calib.record`'s issue, sign and verify calls.
"""

from calib.report.pdf import ATTACHMENT_NAME, RecordPages, record_pages, write_pdf
from calib.report.template import ReportTemplate, load_template

__all__ = ["ATTACHMENT_NAME", "RecordPages", "ReportTemplate", "load_template", "record_pages",
           "write_pdf"]
