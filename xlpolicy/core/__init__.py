"""The pure computation core: demand statistics, lead-time demand models and (Q, R) policies.

No file or workbook handling here; everything works on numpy arrays, whole columns at once.
"""

from xlpolicy.core.demand import DemandStats, history_statistics, lead_time_demand
from xlpolicy.core.models import (
    LeadTimeDemandModel,
    NormalLeadTimeDemand,
    inverse_normal_loss,
    normal_loss,
)
from xlpolicy.core.policy import (
    POLICY_COLUMNS,
    PolicyInputs,
    compute_policy,
    order_cost_terms,
    round_order_qty,
)

__all__ = [
    "DemandStats",
    "history_statistics",
    "lead_time_demand",
    "LeadTimeDemandModel",
    "NormalLeadTimeDemand",
    "normal_loss",
    "inverse_normal_loss",
    "POLICY_COLUMNS",
    "PolicyInputs",
    "compute_policy",
    "order_cost_terms",
    "round_order_qty",
]
