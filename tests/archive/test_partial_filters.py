"""Listing by any part of an analyte or instrument name, in any case, on both engines."""

from __future__ import annotations

from calib.archive import Archive
from tests.archive.helpers import make_record, pdf_for


def test_part_of_a_name_in_any_case_finds_the_records(location):
    with Archive(location) as archive:
        for run, (analyte, instrument) in enumerate((("Pb 220.353", "ICP-OES-2"),
                                                     ("Pb 217.000", "ICP-OES-3"),
                                                     ("Cu 324.754", "ICP-OES-2"))):
            record = make_record(analyte=analyte, instrument=instrument, run=run, seed=run)
            archive.append(record, pdf_for(record), kind="issued")
        found = archive.entries(analyte="pb", partial=True, data=False)
        assert [e.analytes for e in found] == [("Pb 220.353",), ("Pb 217.000",)]
        assert archive.count(analyte="pb", partial=True) == 2
        assert [e.analytes for e in archive.entries(instrument="oes-2", partial=True,
                                                    data=False)] == [("Pb 220.353",),
                                                                     ("Cu 324.754",)]
        # Exact is still the default, and LIKE's own wildcards are plain characters.
        assert archive.entries(analyte="pb", data=False) == []
        assert archive.entries(analyte="p_", partial=True, data=False) == []
        assert archive.entries(analyte="%", partial=True, data=False) == []
