"""The demo: a fictional market with known regimes (:mod:`~riskshape.demo.scenario`) and the
command that monitors it end to end (:mod:`~riskshape.demo.runner`). Invented data only.
"""
