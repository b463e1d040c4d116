"""The archive of calibration records and the trends drawn from it.

:class:`Archive` is the append-only, hash-chained store of every issued and
signed record version, on SQLite or PostgreSQL (:mod:`calib.archive.store`,
engines in :mod:`calib.archive.backends`, tables in :mod:`calib.archive.schema`,
the chain in :mod:`calib.archive.chain`, verification in
:mod:`calib.archive.audit`, the head receipt in :mod:`calib.archive.anchor`,
copying between engines in :mod:`calib.archive.migrate`);
:mod:`calib.archive.trend` charts each analyte's slope, intercept and residual
SD over time with the control limits and run rules of
:mod:`calib.archive.control`; :mod:`calib.archive.figures` derives what the
archive indexes from the record JSON.
"""

from calib.archive.anchor import HeadReceipt
from calib.archive.audit import EntryReport
from calib.archive.baseline import (
    BASELINE_SCHEMA,
    BaselineCurve,
    BaselineError,
    FrozenBaseline,
    establish_baseline,
    load_baseline,
)
from calib.archive.chain import (
    GENESIS_HASH,
    KINDS,
    ArchiveEntry,
    ChainProblem,
    ChainReport,
    compute_entry_hash,
)
from calib.archive.control import (
    DEFAULT_BASELINE,
    MIN_BASELINE,
    RULES,
    ControlChart,
    ControlLimits,
    RuleHit,
    SetAside,
    control_chart,
    control_limits,
    run_rules,
    screened_limits,
)
from calib.archive.figures import CurveFigures, RecordFacts, record_facts
from calib.archive.store import Archive, ArchiveError
from calib.archive.trend import (
    QUANTITIES,
    TREND_SCHEMA,
    AnalyteTrend,
    ArchivedCurve,
    analyte_trend,
    trend_document,
)

__all__ = [
    "BASELINE_SCHEMA",
    "DEFAULT_BASELINE",
    "GENESIS_HASH",
    "KINDS",
    "MIN_BASELINE",
    "QUANTITIES",
    "RULES",
    "TREND_SCHEMA",
    "AnalyteTrend",
    "Archive",
    "ArchiveEntry",
    "ArchiveError",
    "ArchivedCurve",
    "BaselineCurve",
    "BaselineError",
    "ChainProblem",
    "ChainReport",
    "ControlChart",
    "ControlLimits",
    "CurveFigures",
    "EntryReport",
    "FrozenBaseline",
    "HeadReceipt",
    "RecordFacts",
    "RuleHit",
    "SetAside",
    "analyte_trend",
    "compute_entry_hash",
    "control_chart",
    "control_limits",
    "establish_baseline",
    "load_baseline",
    "record_facts",
    "run_rules",
    "screened_limits",
    "trend_document",
]
