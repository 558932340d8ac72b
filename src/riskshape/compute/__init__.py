"""The computation wing: prices -> returns -> windows -> distances -> diagrams -> summaries.

One module per step, in the order the data flow through them:

- :mod:`~riskshape.compute.returns`: log or simple returns;
- :mod:`~riskshape.compute.windows`: causal window ends, their index arithmetic, and the coverage policy;
- :mod:`~riskshape.compute.moments`: running sums that give a sliding window's correlation;
- :mod:`~riskshape.compute.distance`: correlation estimators and d = sqrt(2 (1 - rho));
- :mod:`~riskshape.compute.persistence`: Vietoris-Rips diagrams (ripser or giotto-ph; single linkage for H0);
- :mod:`~riskshape.compute.matching`: exact Wasserstein and bottleneck matchings between diagrams;
- :mod:`~riskshape.compute.summaries`: per-diagram summaries and the distances to the previous window;
- :mod:`~riskshape.compute.batch`: one window end to end, and a batch of consecutive windows;
- :mod:`~riskshape.compute.executors`: where batches run (serial, a process pool, Dask);
- :mod:`~riskshape.compute.window_view`: one computed window opened up (returns, distances, diagrams);
- :mod:`~riskshape.compute.monitor`: the one orchestrator, ``monitor(prices, config)``.

The public entry points are re-exported by :mod:`riskshape` (``riskshape.monitor``,
``riskshape.MonitorResult``); nothing here is imported until it is used.
"""
