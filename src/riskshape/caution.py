"""The one caution every output of riskshape carries."""

from __future__ import annotations

__all__ = ["CAUTION", "CAUTION_SHORT"]

CAUTION = (
    "riskshape is a decision aid for risk monitoring and research; it is not investment advice, "
    "and its alerts are not recommendations to buy, sell or hold anything."
)
CAUTION_SHORT = "Decision aid only - not investment advice."
