"""Research tools: stress events, event studies, walk-forward comparisons, surrogates and sweeps.

Import the modules directly (``from riskshape.research.study import event_study``); they load
scikit-learn and arch, which the monitor itself does not need.
"""
