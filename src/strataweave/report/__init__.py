"""report layer: figures, the self-contained HTML report and PDF slides, rendered from a run folder.

It reads what a run produced (see :mod:`strataweave.report.contract`) and computes no
statistics of its own.
"""

from importlib import import_module

#: public name -> module that defines it, loaded on first use: the contract's readers (the
#: command line's `check`, `assign` and `compare`) then start without the plotting stack
_PUBLIC = {
    "check_figure_data": "strataweave.report.contract",
    "check_manifest": "strataweave.report.contract",
    "check_results": "strataweave.report.contract",
    "render_run": "strataweave.report.render",
}

__all__ = list(_PUBLIC)


def __getattr__(name: str):
    if name not in _PUBLIC:
        raise AttributeError(f"module 'strataweave.report' has no attribute {name!r}")
    return getattr(import_module(_PUBLIC[name]), name)
