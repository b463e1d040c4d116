"""Saving an openpyxl workbook to the same bytes every time.

openpyxl stamps the save time into ``docProps/core.xml`` and the zip entries
carry the current time, so two saves a second apart differ.  Exports are
evidence beside a record, so they are saved with one fixed time instead.
"""

from __future__ import annotations

import io
import zipfile
from datetime import datetime
from typing import Any

__all__ = ["workbook_bytes"]


def workbook_bytes(book: Any, *, when: datetime) -> bytes:
    """The ``.xlsx`` bytes of ``book`` with ``when`` as its creation, change and zip times.

    Examples
    --------
    >>> from openpyxl import Workbook
    >>> book = Workbook()
    >>> workbook_bytes(book, when=datetime(2026, 1, 2)) == workbook_bytes(book, when=datetime(2026, 1, 2))
    True
    """
    from openpyxl.writer.excel import ExcelWriter

    book.properties.created = book.properties.modified = when
    raw = io.BytesIO()
    with zipfile.ZipFile(raw, "w", zipfile.ZIP_DEFLATED, allowZip64=True) as archive:
        ExcelWriter(book, archive).save()  # unlike openpyxl's save(), keeps `modified` as set
    stamp = (max(when.year, 1980), when.month, when.day, when.hour, when.minute, when.second)
    out = io.BytesIO()
    with zipfile.ZipFile(raw) as src, zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as dst:
        for item in src.infolist():
            info = zipfile.ZipInfo(item.filename, date_time=stamp)
            info.compress_type = zipfile.ZIP_DEFLATED
            info.external_attr = item.external_attr
            dst.writestr(info, src.read(item.filename))
    return out.getvalue()
