"""riskshape's tests."""
