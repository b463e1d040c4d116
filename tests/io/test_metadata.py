"""Title and key: value lines above the table, in several languages and shapes."""

from __future__ import annotations

import datetime as dt

import pytest

from calib.io.metadata import metadata_units, read_metadata


@pytest.mark.parametrize(
    ("line", "key", "value"),
    [
        (["Instrument: IC-2"], "instrument", "IC-2"),
        (["Gerät:", "IC-2"], "instrument", "IC-2"),
        (["Appareil :", "IC-2"], "instrument", "IC-2"),
        (["Equipo", "IC-2"], "instrument", "IC-2"),
        (["Method = FWL-IC-07"], "method", "FWL-IC-07"),
        (["Méthode : FWL-IC-07"], "method", "FWL-IC-07"),
        (["Run date", dt.datetime(2026, 11, 30)], "run_date", "2026-11-30"),
        (["Datum: 30.11.2026"], "run_date", "30.11.2026"),
        (["Fecha de análisis:", "2026-11-30"], "run_date", "2026-11-30"),
        (["Analyst:", "R. Okafor"], "operator", "R. Okafor"),
        (["Bediener", "R. Okafor"], "operator", "R. Okafor"),
        (["Opérateur :", "R. Okafor"], "operator", "R. Okafor"),
        (["Units:", "ng/mL"], "units", "ng/mL"),
        (["Einheit: mg/l"], "units", "mg/l"),
        (["Compound: KX-214"], "analyte", "KX-214"),
        (["Parameter", "Nitrat-N"], "analyte", "Nitrat-N"),
        (["Sample prep: SPE"], "Sample prep", "SPE"),
    ],
)
def test_keys_in_any_language_are_stored_in_english(line, key, value):
    assert read_metadata([line]) == {key: value}


def test_title_notes_and_several_pairs_in_a_row():
    rows = [
        ["Fernbrook Water Laboratory", "Fernbrook Water Laboratory"],  # a merged title cell
        [],
        ["Instrument:", "IC-2", None, "Operator:", "R. Okafor"],
        ["Draft export, not reviewed"],
        ["Instrument:", "IC-9"],  # the first value of a key wins
    ]
    assert read_metadata(rows) == {
        "title": "Fernbrook Water Laboratory",
        "instrument": "IC-2",
        "operator": "R. Okafor",
        "notes": "Draft export, not reviewed",
    }


def test_units_lines():
    assert metadata_units({"units": "mg/L", "response_units": "µS*min"}) == {
        "concentration": "mg/L", "response": "µS*min"
    }
    assert metadata_units({"instrument": "IC-2"}) == {}
