"""Speed and memory figures for riskshape (ratios measured side by side); not tests."""
