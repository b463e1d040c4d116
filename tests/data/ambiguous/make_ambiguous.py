"""Write the invented exports that once gave a silent wrong answer (issue 17).

Every file is an invented export of the fictional Fernbrook Water Laboratory.
Each holds one thing calib used to guess at: an analyte column it did not
recognise, two emission lines of lead in one curve, summary rows, an
include mark read either way, check samples named like standards, level
labels at two concentrations, a decimal comma assumed, look-alike analyte
names.  tests/io/test_ambiguous_corpus.py says what calib must now do with
each, and checks that the committed files are what this script writes.

Run ``python tests/data/ambiguous/make_ambiguous.py`` to rewrite them.
"""

from __future__ import annotations

import random
from pathlib import Path

FOLDER = Path(__file__).parent
LEAD_LEVELS = (0.0, 5.0, 10.0, 25.0, 50.0, 100.0)
"""µg/L of the lead standards."""
LINES = (("Pb 220.353", 1000.0), ("Pb 217.000", 1060.0))
"""The two emission lines and their sensitivities (counts per µg/L), 6 % apart."""
METALS = (("Cd", 820.0), ("Cu", 1450.0), ("Pb", 1000.0), ("Zn", 2300.0))


def _csv(rows: list[list[object]], sep: str = ",") -> bytes:
    return ("\n".join(sep.join("" if v is None else str(v) for v in row) for row in rows)
            + "\n").encode("utf-8")


def _lead(heading: str | None, *, replicates: bool = True) -> bytes:
    """Two emission lines of lead, three replicates per level, as one ICP-OES export."""
    rng = random.Random(220)
    head = ["Sample"] + ([heading] if heading else []) + ["Conc (ug/L)", "Intensity (cps)"]
    rows: list[list[object]] = [["Fernbrook Water Laboratory - ICP-OES run 2026-12-11"], [],
                                head + (["Replicate"] if replicates else [])]
    for number, conc in enumerate(LEAD_LEVELS):
        for line, sensitivity in LINES:
            for rep in (1, 2, 3):
                counts = 150.0 + sensitivity * conc * (1 + rng.gauss(0, 0.003)) + rng.gauss(0, 4)
                row: list[object] = [f"Std {number}"] + ([line] if heading else [])
                row += [conc, f"{counts:.1f}"] + ([rep] if replicates else [])
                rows.append(row)
    return _csv(rows)


def _metals() -> bytes:
    rng = random.Random(48)
    rows: list[list[object]] = [["Sample", "Element / lamp", "Conc (ug/L)", "Intensity (cps)"]]
    for number, conc in enumerate((1.0, 5.0, 10.0, 50.0), start=1):
        for element, sensitivity in METALS:
            counts = 90.0 + sensitivity * conc * (1 + rng.gauss(0, 0.004))
            rows.append([f"Std {number}", element, conc, f"{counts:.1f}"])
    return _csv(rows)


_NITRATE = [("Std 1", 1.0, 0.2003, 0.1996), ("Std 2", 2.0, 0.4010, 0.3990),
            ("Std 3", 5.0, 1.0012, 0.9988), ("Std 4", 10.0, 2.0021, 1.9977)]


def _nitrate(*extra: list[object], include: bool = False) -> bytes:
    head = ["Analyte", "Sample", "Conc (mg/L)", "Absorbance (AU)", "Replicate"]
    rows: list[list[object]] = [head + (["Include", "Reason"] if include else [])]
    for name, conc, first, second in _NITRATE:
        for rep, value in ((1, first), (2, second)):
            rows.append(["Nitrate-N", name, f"{conc:.4f}", f"{value:.4f}", rep]
                        + (["yes", ""] if include else []))
    rows.extend(list(row) for row in extra)
    return _csv(rows)


def _anions_wide(*extra: list[object]) -> bytes:
    rows: list[list[object]] = [["Level", "Conc (mg/L)", "Chloride area", "Sulfate area"]]
    for level, conc in enumerate((1.0, 2.0, 5.0, 10.0, 20.0), start=1):
        rows.append([level, conc, f"{0.1482 * conc:.4f}", f"{0.0911 * conc:.4f}"])
    rows.extend(list(row) for row in extra)
    return _csv(rows)


def _anions_named(*extra: list[object]) -> bytes:
    rows: list[list[object]] = [["Sample", "Conc (mg/L)", "Chloride area (uS*min)"]]
    for number, conc in enumerate((1.0, 2.0, 5.0, 10.0, 20.0), start=1):
        rows.append([f"Std {number}", conc, f"{0.1482 * conc + 0.0004 * number:.4f}"])
    rows.extend(list(row) for row in extra)
    return _csv(rows)


def _sulfate(second: str) -> bytes:
    rows: list[list[object]] = [["Analyte", "Conc (mg/L)", "Area (uS*min)"]]
    for name, sensitivity in (("Sulfate", 0.0911), (second, 0.0911)):
        for conc in (1.0, 5.0, 10.0, 20.0):
            rows.append([name, conc, f"{sensitivity * conc + 0.0013 * len(rows):.4f}"])
    return _csv(rows)


def files() -> dict[str, bytes]:
    """Every file of the corpus, by name."""
    return {
        # An analyte column calib did not recognise, and two lines of one element.
        "icp_lead_two_lines_element_wavelength.csv": _lead("Element / wavelength (nm)"),
        "icp_lead_two_lines_line.csv": _lead("Line"),
        "icp_lead_two_lines_label.csv": _lead("Label"),
        "icp_lead_two_lines_emission.csv": _lead("Emission"),
        "icp_lead_two_lines_no_line_column.csv": _lead(None),
        "icp_lead_two_lines_no_replicates.csv": _lead(None, replicates=False),
        "icp_metals_unrecognised_column.csv": _metals(),
        # Summary rows.
        "nitrate_mean_row.csv": _nitrate(["Nitrate-N", "Mean", "4.5000", "0.8999", ""]),
        "nitrate_rsd_and_total_rows.csv": _nitrate(["Nitrate-N", "RSD%", "", "0.5", ""],
                                                   ["Nitrate-N", "Total", "36.0000", "7.1997", ""]),
        "nitrate_unnamed_total_row.csv": _nitrate(["Nitrate-N", "", "36.0000", "7.1997", ""]),
        "anions_wide_average_row.csv": _anions_wide(["Average", 7.6, "1.1263", "0.6924"]),
        "anions_wide_unlabelled_total_row.csv": _anions_wide(["", 38.0, "5.6316", "3.4618"]),
        # Include marks and reasons.
        "nitrate_include_x_with_reason.csv": _nitrate(
            ["Nitrate-N", "Std 5", "20.0000", "4.1020", 1, "x", "bubble in syringe"],
            include=True),
        "nitrate_reason_with_empty_include.csv": _nitrate(
            ["Nitrate-N", "Std 5", "20.0000", "4.1020", 1, "", "bubble in syringe"],
            include=True),
        # Independent checks named like standards.
        "chloride_check_names_without_type.csv": _anions_named(
            ["Std QC", 5.0, "0.7391"], ["Check Std 5", 5.0, "0.7433"], ["CRM 7", 2.0, "0.2951"],
            ["Verification 12", 10.0, "1.4874"]),
        "chloride_spike_without_type.csv": _anions_named(["Spike 1", 5.0, "0.7650"]),
        "chloride_cal_blank_without_type.csv": _anions_named(["Cal Blank", 0.0, "0.0009"]),
        # Levels.
        "copper_level_label_at_two_concentrations.csv": _csv(
            [["Level", "Conc (mg/L)", "Absorbance"], [1, 1, "0.0212"], [2, 2, "0.0419"],
             [3, 4, "0.0841"], [4, 5, "0.1046"], [4, 8, "0.1672"]]),
        "copper_levels_equal_but_for_rounding.csv": _csv(
            [["Conc (ug/L)", "Counts"], [10, 1012], [100, 10034], ["999.9999999999999", 100210],
             ["1000.0", 99874]]),
        # Decimal marks.
        "nitrat_semicolon_mixed_thousands.csv": _csv(
            [["Probe", "Konz (mg/L)", "Fläche"], ["Kal 1", "0,5", 497], ["Kal 2", 1, 995],
             ["Kal 3", 2, "1,006"], ["Kal 4", 5, 4999]], sep=";"),
        "nitrat_semicolon_assumed_decimal_comma.csv": _csv(
            [["Probe", "Konz (mg/L)", "Fläche"], ["Kal 1", 1, "1,006"], ["Kal 2", 2, "2,013"],
             ["Kal 3", 5, "5,031"]], sep=";"),
        # Analyte names.
        "sulfate_cyrillic_letter.csv": _sulfate("Sulf\u0430te"),
        "sulfate_zero_width_space.csv": _sulfate("Sul\u200bfate"),
        "sulfate_differing_case.csv": _sulfate("SULFATE"),
        "sulfate_full_width.csv": _sulfate("\uff33\uff55\uff4c\uff46\uff41\uff54\uff45"),
    }


def write(folder: Path = FOLDER) -> list[Path]:
    """Write every file into ``folder``; return their paths."""
    paths = []
    for name, data in files().items():
        path = folder / name
        path.write_bytes(data)
        paths.append(path)
    return paths


if __name__ == "__main__":
    for written in write():
        print(written.name)
