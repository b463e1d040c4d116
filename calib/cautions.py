"""The cautions calib shows in every record and in command output."""

from __future__ import annotations

__all__ = ["CAUTIONS"]

CAUTIONS = (
    "Results decide whether patient samples, drinking water or products are released; a wrong "
    "curve can hurt people. A passing statistical check does not by itself make a calibration "
    "fit for purpose. The shipped acceptance profiles are examples: the laboratory's validated "
    "method, its SOPs, its accreditation body (for example under ISO/IEC 17025) and local "
    "regulations take precedence, and a qualified person must review and approve every record."
)
