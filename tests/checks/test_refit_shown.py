"""A refit without rejected standards is shown in the terminal text and the PDF record.

ICH M10 3.3.2 (from memory): a rejected standard leaves the curve, which is
re-evaluated without it; the reviewer must see both fits and why.  The first
fit's slope is checked against numpy's weighted polyfit (outside calib).
"""

from __future__ import annotations

import numpy as np
import pypdf

from calib.checks import evaluate_run, load_profile
from calib.cli.render import curve_text
from calib.workflow import issue_record
from tests.checks.runs import BIO_LEVELS, curve_points, make_run
from tests.checks.test_guidance_boundaries import qcs


def _assessment():
    standards = curve_points(BIO_LEVELS, deviations={1: (-45.0, 0.0)}, noise=0)
    return standards, evaluate_run(make_run(standards + qcs(low=-17)),
                                   profile=load_profile("bioanalytical"))


def test_terminal_text_shows_the_refit_and_the_first_fit():
    standards, assessment = _assessment()
    x = np.array([p.concentration for p in standards])
    slope, _ = np.polyfit(x, [p.response for p in standards], 1, w=1 / x)  # numpy, 1/x²
    text = " ".join(curve_text(assessment.curves[0]).split())
    assert "Refitted: Standards outside their tolerance were rejected and the curve refitted" in text
    assert "Run!D2 (-26.6 %, outside ±20 %)" in text
    assert "On the first fit, with them, the curve would have needed review." in text
    assert "First fit (16 standards): intercept" in text and f"slope {slope:.6g}" in text
    assert "excluded Run!D2 (1): rejected: read back -26.6 % from nominal" in text


def test_pdf_record_shows_the_refit(tmp_path):
    _, assessment = _assessment()
    _, pdf = issue_record(assessment, prepared_by="A. Analyst")
    out = tmp_path / "r.pdf"
    out.write_bytes(pdf)
    text = " ".join(" ".join(p.extract_text().split()) for p in pypdf.PdfReader(out).pages)
    assert "refitted without them (once) before the QCs were read" in text
    assert "First fit, with every standard (16 in the fit)" in text
    assert "First fit, with every standard (16 in the fit): intercept" in text
    assert "; verdict on it: Needs review." in text
