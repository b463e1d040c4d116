"""The curated public namespace of ``calib`` is locked: changing it must be deliberate."""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

import calib

EXPECTED = [
    "CAUTIONS", "ArchiveError", "BaselineError", "CalibError", "CheckResult", "ConfigError",
    "CurveAssessment", "CurveFit", "CurveVerdict", "InputError", "IntegrityError", "KeyFileError",
    "Model", "NotAcceptedError", "PassphraseError", "Point", "Profile", "ProfileError",
    "QuantifyReport", "RangeError", "Record", "RefusedAction", "Run", "RunAssessment",
    "SampleType", "Severity", "SignOffError", "SourceInfo", "TemplateError", "Verdict",
    "Weighting", "__version__", "build_record", "check_document", "evaluate_run", "fit_curve",
    "load_profile", "quantify_files", "read_run", "service", "write_pdf",
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


def test_the_readme_python_api_uses_only_public_names():
    # README "Python API": every calib.NAME it shows and every name it lists in backticks
    # before the example is in calib.__all__.
    text = (Path(__file__).resolve().parent.parent / "README.md").read_text(encoding="utf-8")
    section = text.split("## Python API", 1)[1].split("\n## ", 1)[0]
    shown = set(re.findall(r"\bcalib\.([A-Za-z_]\w*)\(", section))
    said = re.search(r"importable from `calib`\s*\((.*?)\)", section, re.DOTALL)
    assert said is not None
    listed = set(re.findall(r"`(\w+)`", said.group(1)))
    assert {"read_run", "evaluate_run", "load_profile"} <= shown
    assert {"read_run", "fit_curve", "write_pdf", "check_document"} <= listed
    assert shown | listed <= set(calib.__all__)
    assert {"read_run", "fit_curve", "write_pdf", "service", "quantify_files"} <= set(calib.__all__)


def test_every_error_calib_exports_is_a_calib_error():
    errors = [getattr(calib, n) for n in calib.__all__ if n.endswith("Error") or n == "RefusedAction"]
    assert len(errors) >= 10
    assert all(issubclass(e, calib.CalibError) for e in errors)
