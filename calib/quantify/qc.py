"""QC acceptance for ``calib quantify``: the rule of :mod:`calib.fit.qc`.

The rule lives in :mod:`calib.fit.qc`, below both the checks (the ``qc`` rule
of a profile) and quantify, so that neither imports the other.
"""

from __future__ import annotations

from calib.fit.qc import QcLevel, QcOutcome, QcRule, QcSummary, judge_qcs

__all__ = ["QcLevel", "QcOutcome", "QcRule", "QcSummary", "judge_qcs"]
