"""What riskshape hands to people and other programs: the run folder, the export, the report, plots.

- :mod:`~riskshape.outputs.run_folder`: features, diagrams, left-out assets and manifest of a run;
- :mod:`~riskshape.outputs.export`: archived alerts as CSV or JSON lines;
- :mod:`~riskshape.outputs.report`: the review report (HTML, optionally PDF);
- :mod:`~riskshape.outputs.plots`: figures for notebooks and reports.
"""
