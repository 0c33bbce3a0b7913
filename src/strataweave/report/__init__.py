"""report layer: figures, the self-contained HTML report and PDF slides, rendered from a run folder.

It reads what a run produced (see :mod:`strataweave.report.contract`) and computes no
statistics of its own.
"""

from strataweave.report.contract import check_figure_data, check_manifest, check_results
from strataweave.report.render import render_run

__all__ = ["check_figure_data", "check_manifest", "check_results", "render_run"]
