"""Record wording: a range said once, a shared exclusion reason printed once, an LOD remark."""

from __future__ import annotations

import pypdf
import pytest

from calib.checks import evaluate_run, load_profile
from calib.checks.narrowing import parse_range
from calib.workflow import issue_record
from tests.checks.runs import BIO_LEVELS, curve_points, make_run, qc_points, spread


def pdf_text(tmp_path, pdf: bytes) -> str:
    out = tmp_path / "r.pdf"
    out.write_bytes(pdf)
    return " ".join(" ".join(p.extract_text().split()) for p in pypdf.PdfReader(out).pages)


@pytest.fixture
def run():
    # Both LLOQ replicates read back 20.1 % off: ICH M10's ±20 % at the LLOQ (from memory)
    # rejects the curve and calib proposes 2 to 1000 (see tests/checks/test_profiles_shipped.py).
    return make_run(curve_points(BIO_LEVELS, deviations={1: spread(20.1)}) + qc_points())


def check(run, *ranges):
    return evaluate_run(run, profile=load_profile("bioanalytical"),
                        ranges=[parse_range(r) for r in ranges])


def test_a_range_applied_as_proposed_is_stated_once(run, tmp_path):
    # Applying exactly the proposed range must not print the proposal again as if it were
    # still open.
    proposal = check(run).curves[0].proposal
    assert (proposal.lloq, proposal.uloq) == (2, 1000)
    assessment = check(run, "2..1000=level 1 standard prepared wrongly")
    text = pdf_text(tmp_path, issue_record(assessment, prepared_by="A. Analyst")[1])
    assert ("Working range applied by the analyst: 2 to 1000 (level 1 standard prepared "
            "wrongly), the range calib proposed. On the full range the curve was: "
            "Rejected.") in text
    assert "calib proposes" not in text and "Not applied" not in text
    assert text.count("2 to 1000") == 1


def test_a_range_other_than_the_proposal_names_the_proposal_as_past(run, tmp_path):
    assessment = check(run, "5..1000=levels 1 and 2 from an old stock")
    text = pdf_text(tmp_path, issue_record(assessment, prepared_by="A. Analyst")[1])
    assert ("Working range applied by the analyst: 5 to 1000 (levels 1 and 2 from an old "
            "stock). On the full range the curve was: Rejected.") in text
    assert ("calib had proposed 2 to 1000 (") in text
    assert "the analyst applied the range above instead." in text
    assert "Not applied" not in text


def test_a_proposal_without_an_applied_range_says_it_is_not_applied(run, tmp_path):
    text = pdf_text(tmp_path, issue_record(check(run), prepared_by="A. Analyst")[1])
    assert "calib proposes the range 2 to 1000" in text and "Not applied" in text


def test_a_long_reason_shared_by_several_points_is_printed_once(run, tmp_path):
    from calib.checks.exclusions import Exclusion

    why = "autosampler tray 2 warmed to 31 °C overnight (service ticket 118); vials re-prepared"
    cells = ("Run!D14", "Run!D15", "Run!D16")
    assessment = evaluate_run(run, profile=load_profile("bioanalytical"),
                              exclusions=[Exclusion(c, why) for c in cells]
                              + [Exclusion("Run!D17", "vial cracked")])
    text = pdf_text(tmp_path, issue_record(assessment, prepared_by="A. Analyst")[1])
    assert text.count("No: reason A below") == 3
    assert text.count(f"Reason A: {why}") == 1
    assert "No: vial cracked" in text  # a short or unshared reason stays in its row


def test_an_lod_above_the_lloq_gets_a_remark_in_the_record(tmp_path):
    # Invented Cu 324.754 run (ICP-OES-2): unweighted, the scatter of the top standards sets
    # σ̂, and ICH Q2's LOD = 3.3·σ̂/b (from memory) lands above the 0.01 mg/L lowest standard.
    from tests.checks.runs import curve_points as points

    levels = (0.01, 0.05, 0.1, 0.5, 1.0, 5.0)
    run = make_run(points(levels, deviations={5.0: spread(1.0, 2)}, a=120.0, b=48_000.0,
                          analyte="Cu 324.754"))
    assessment = evaluate_run(run, profile=load_profile("default"))
    curve = assessment.curves[0]
    sigma, slope = curve.fit.residual_sd, curve.fit.coefficients["slope"]
    assert 3.3 * sigma / slope > 0.01
    text = pdf_text(tmp_path, issue_record(assessment, prepared_by="A. Analyst")[1])
    assert "lies above the LLOQ (0.01" in text and "the lowest standard in the fit" in text
    # A precise curve: no remark.
    quiet = evaluate_run(make_run(points(levels, noise=0.1, a=120.0, b=48_000.0)),
                         profile=load_profile("default"))
    text = pdf_text(tmp_path, issue_record(quiet, prepared_by="A. Analyst")[1])
    assert "lies above the LLOQ" not in text
