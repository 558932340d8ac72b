"""Alert rules over the summaries series, evaluated causally."""

from riskshape.alerts.model import Alert, Firing

__all__ = ["Alert", "Firing"]
