"""xlpolicy: stock replenishment policies (order quantity, reorder point, safety stock)
computed from a spreadsheet of items and sales history.

The Python API mirrors the command line: :func:`plan`, :func:`check`, :func:`template`,
and :func:`analyse` (read, check and plan without writing), which returns a :class:`Report`.
"""

__version__ = "0.1.0"

from .api import (
    PlanResult,
    UsageError,
    analyse,
    check,
    default_output_path,
    demo,
    plan,
    template,
)
from .errors import InputError, OutputError, XlpolicyError
from .problems import Problem, Severity, UnusableWorkbook
from .report import Report

__all__ = [
    "InputError",
    "OutputError",
    "PlanResult",
    "Problem",
    "Report",
    "Severity",
    "UnusableWorkbook",
    "UsageError",
    "XlpolicyError",
    "__version__",
    "analyse",
    "check",
    "default_output_path",
    "demo",
    "plan",
    "template",
]
