"""What every results object shares: a summary table shown in notebooks with the caution."""

from __future__ import annotations

import html

import matplotlib.pyplot as plt

from strataweave.caution import CAUTION
from strataweave.errors import InputError

SHOWN_ROWS = 20


class Shown:
    """Mixin: `_repr_html_` shows the title, the first rows of `summary` and the caution."""

    def _title(self) -> str:
        return type(self).__name__

    def _repr_html_(self) -> str:
        try:
            table = self.summary.head(SHOWN_ROWS).to_html()
        except (AttributeError, InputError):
            table = "<p>not fitted</p>"
        return f"<h4>{html.escape(self._title())}</h4>{table}<p><i>{html.escape(CAUTION)}</i></p>"


def fitted(estimator, attribute: str):
    """The learned attribute, or an InputError saying to call fit first."""
    if not hasattr(estimator, attribute):
        raise InputError(f"{type(estimator).__name__}: not fitted; expected fit() first")
    return getattr(estimator, attribute)


def new_axes(ax):
    """`ax`, or the axes of a new figure."""
    return ax if ax is not None else plt.subplots(figsize=(6, 4))[1]

