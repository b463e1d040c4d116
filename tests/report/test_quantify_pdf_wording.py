"""The batch PDF: numbers never broken across lines, running headers naming the right analyte,
an LOD above the LLOQ remarked, results from a needs-review curve flagged."""

from __future__ import annotations

import copy
import io
import re
from datetime import UTC, datetime

import pytest
from pypdf import PdfReader

from calib.quantify.document import quantify_document
from calib.quantify.workflow import quantify_files
from calib.report.formatting import format_number
from calib.report.quantify_pdf import write_quantify_pdf
from tests.quantify.helpers import write_run_csv

WHEN = datetime(2026, 12, 1, 9, 30, tzinfo=UTC)
ICP = ("Cu 324.754", "Zn 213.857", "Pb 220.353", "Ni 231.604")  # invented ICP-OES-2 lines


@pytest.fixture(scope="module")
def base(tmp_path_factory):
    run = write_run_csv(tmp_path_factory.mktemp("q") / "run.csv")
    return quantify_document(quantify_files(run, created_at=WHEN))


def icp_batch(base, samples_per_analyte=(40, 7, 55, 3)):
    """The nitrate batch recast as four ICP lines with many samples each (invented figures).

    Concentrations are made long (0.0099347...) in the narrow columns that used to break them.
    """
    doc = copy.deepcopy(base)
    template_curve, template_sample = doc["curves"][0], doc["samples"][-1]
    doc["curves"], doc["samples"], doc["qc"]["analytes"] = [], [], []
    for a, (name, n) in enumerate(zip(ICP, samples_per_analyte)):
        doc["curves"].append({**template_curve, "analyte": name})
        for i in range(n):
            value = 0.0099347 * (1 + 0.37 * i) * (1 + a)
            doc["samples"].append({
                **template_sample, "analyte": name, "sample_id": f"FB-{a}{i:03d}",
                "sample_type": "unknown", "concentration": value, "ci_low": value * 0.93,
                "ci_high": value * 1.07, "std_error": value * 0.0311,
                "mean_response": 12345.678 + i, "reported": f"{value:.3g}", "flags": []})
    return doc


def pages(pdf: bytes) -> list[str]:
    return [page.extract_text() for page in PdfReader(io.BytesIO(pdf)).pages]


def test_numbers_are_never_broken_across_lines(base):
    doc = icp_batch(base)
    text = "\n".join(pages(write_quantify_pdf(doc)))
    tokens = set(text.split())
    for s in doc["samples"]:
        for key, digits in (("concentration", 4), ("std_error", 3), ("ci_low", 4),
                            ("ci_high", 4), ("mean_response", 5)):
            shown = format_number(s[key], digits)
            assert shown in tokens, f"{s['sample_id']} {key} {shown!r} is broken or missing"


def test_running_headers_name_the_analytes_on_each_page(base):
    found = pages(write_quantify_pdf(icp_batch(base)))
    assert len(found) >= 4
    current = None
    for number, text in enumerate(found, start=1):
        header = re.search(r"Sample results · ([^\n]+)", text)
        named = [a for a in ICP if header and a in header.group(1)]
        starting = [a for a in ICP if re.search(rf"(?m)^{re.escape(a)}$", text)]
        # Every analyte whose section starts on the page is named in its header ...
        assert set(starting) <= set(named), (number, named, starting)
        # ... and an analyte named there is on the page: starting, or continuing from before.
        assert set(named) <= set(starting) | {current}, (number, named, starting, current)
        if not starting:
            assert named == [current] or (current is None and not named)
        current = starting[-1] if starting else current
    assert "Sample results · " not in found[0].split("\n")[0] or ICP[0] in found[0]


def test_an_lod_above_the_lloq_is_remarked(base):
    doc = icp_batch(base, (3, 0, 0, 0))
    doc["curves"] = doc["curves"][:1]
    doc["curves"][0].update(lod=0.0105, lloq=0.01, unit="mg/L")
    text = " ".join(" ".join(pages(write_quantify_pdf(doc))).split())
    assert ("The LOD (0.0105 mg/L) lies above the LLOQ (0.01 mg/L), the lowest standard in the "
            "fit") in text
    doc["curves"][0].update(lod=0.004)
    assert "lies above the LLOQ" not in " ".join(pages(write_quantify_pdf(doc)))


def test_the_needs_review_flag_is_explained_in_the_batch_pdf(base):
    doc = icp_batch(base, (2, 0, 0, 0))
    doc["curves"] = doc["curves"][:1]
    doc["curves"][0]["verdict"] = "needs-review"
    for s in doc["samples"]:
        s["flags"] = ["curve-needs-review"]
    text = " ".join(" ".join(pages(write_quantify_pdf(doc))).split())
    assert "curve-needs-review" in text
    assert "the result stands only once a qualified person has reviewed and accepted the curve" \
        in text
