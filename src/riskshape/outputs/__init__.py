"""What riskshape hands to people and other programs: the run folder, the export, the report, plots.

- :mod:`~riskshape.outputs.run_folder`: features, diagrams, left-out assets and manifest of a run;
- :mod:`~riskshape.outputs.export`: archived alerts as CSV or JSON lines;
- :mod:`~riskshape.outputs.report`: the review report (HTML, optionally PDF);
- :mod:`~riskshape.outputs.plots`: figures for notebooks and reports (loads matplotlib on first use);
- :mod:`~riskshape.outputs.interval_plots`: a measure and its interval per row of an evidence table.

>>> from riskshape.outputs import EXPORT_COLUMNS
>>> EXPORT_COLUMNS[:2]
('caution', 'known_at')
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from riskshape._lazy import lazy_exports

if TYPE_CHECKING:
    from riskshape.outputs.export import EXPORT_COLUMNS as EXPORT_COLUMNS
    from riskshape.outputs.export import export_alerts as export_alerts
    from riskshape.outputs.interval_plots import plot_intervals as plot_intervals
    from riskshape.outputs.plots import plot_barcode as plot_barcode
    from riskshape.outputs.plots import plot_diagram as plot_diagram
    from riskshape.outputs.plots import plot_landscape as plot_landscape
    from riskshape.outputs.plots import plot_summaries as plot_summaries
    from riskshape.outputs.plots import plot_summary as plot_summary
    from riskshape.outputs.plots import plot_window as plot_window
    from riskshape.outputs.report import ReviewReport as ReviewReport
    from riskshape.outputs.report import collect_review as collect_review
    from riskshape.outputs.report import render_html as render_html
    from riskshape.outputs.report import write_report as write_report
    from riskshape.outputs.run_folder import RunFiles as RunFiles
    from riskshape.outputs.run_folder import write_run as write_run

_EXPORTS = {
    "render_html": "riskshape.outputs.report",
    "RunFiles": "riskshape.outputs.run_folder",
    "write_run": "riskshape.outputs.run_folder",
    "EXPORT_COLUMNS": "riskshape.outputs.export",
    "export_alerts": "riskshape.outputs.export",
    "ReviewReport": "riskshape.outputs.report",
    "collect_review": "riskshape.outputs.report",
    "write_report": "riskshape.outputs.report",
    "plot_summary": "riskshape.outputs.plots",
    "plot_summaries": "riskshape.outputs.plots",
    "plot_diagram": "riskshape.outputs.plots",
    "plot_barcode": "riskshape.outputs.plots",
    "plot_landscape": "riskshape.outputs.plots",
    "plot_window": "riskshape.outputs.plots",
    "plot_intervals": "riskshape.outputs.interval_plots",
}

__all__ = list(_EXPORTS)

__getattr__, __dir__ = lazy_exports(__name__, _EXPORTS)
