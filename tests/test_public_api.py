"""The curated public namespace of ``calib`` is locked: changing it must be deliberate."""

from __future__ import annotations

import subprocess
import sys

import calib

EXPECTED = [
    "CAUTIONS", "CalibError", "CheckResult", "CurveAssessment", "CurveFit", "CurveVerdict",
    "InputError", "Model", "NotAcceptedError", "Point", "Profile", "ProfileError", "Record", "Run",
    "RunAssessment", "SampleType", "Severity", "SourceInfo", "TemplateError", "Verdict",
    "Weighting", "__version__", "build_record", "check_document", "evaluate_run", "fit_curve",
    "load_profile", "read_run", "write_pdf",
]


def test_all_is_locked():
    assert sorted(calib.__all__) == sorted(EXPECTED)


def test_every_exported_name_resolves():
    for name in calib.__all__:
        assert getattr(calib, name) is not None, name


def test_importing_calib_stays_light():
    # `calib --help` must start fast: the package itself imports no numerical library.
    code = "import sys, calib, calib.cli.main; print(sorted(m for m in ('numpy','scipy','pandas','reportlab') if m in sys.modules))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"
