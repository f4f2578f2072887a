"""The pure computation core: demand statistics, lead-time demand models and (Q, R) policies.

No file or workbook handling here; everything works on numpy arrays, whole columns at once.
"""

from xlpolicy.core.demand import DemandStats, history_statistics, lead_time_demand
from xlpolicy.core.models import (
    MODEL_NAMES,
    GammaLeadTimeDemand,
    LeadTimeDemandModel,
    NegativeBinomialLeadTimeDemand,
    NormalLeadTimeDemand,
    PoissonLeadTimeDemand,
    inverse_normal_loss,
    model_factory,
    normal_loss,
)
from xlpolicy.core.policy import (
    POLICY_COLUMNS,
    PolicyInputs,
    compute_policy,
    item_model_names,
    order_cost_terms,
    round_order_qty,
)

__all__ = [
    "DemandStats",
    "history_statistics",
    "lead_time_demand",
    "LeadTimeDemandModel",
    "NormalLeadTimeDemand",
    "PoissonLeadTimeDemand",
    "NegativeBinomialLeadTimeDemand",
    "GammaLeadTimeDemand",
    "MODEL_NAMES",
    "model_factory",
    "normal_loss",
    "inverse_normal_loss",
    "POLICY_COLUMNS",
    "PolicyInputs",
    "compute_policy",
    "item_model_names",
    "order_cost_terms",
    "round_order_qty",
]
