"""Result exports built from a ``calib.check/1`` document: XLSX, CSV and terminal text.

Each takes the document (as :func:`calib.record.check_document` builds it)
and returns bytes or text; the command line writes the bytes with
:func:`calib.output.write_atomic`.  Text that a spreadsheet could read as a
formula is neutralised (:func:`neutralise`).
"""

from calib.export.cells import neutralise
from calib.export.csv_export import results_csv
from calib.export.tables import summary_rows
from calib.export.terminal import verdict_text
from calib.export.xlsx import results_xlsx

__all__ = ["neutralise", "results_csv", "results_xlsx", "summary_rows", "verdict_text"]
