"""rvkep's look, designed once and used by every figure and by the HTML report.

* Each companion keeps one colour everywhere (its curve in the time series, its phase
  plot, its corner plot, its row in the report): :func:`companion_colour`.
* Each instrument keeps one marker and one muted ink everywhere: :func:`instrument_style`.
* Binned points on a phase plot are drawn as the companion's colour: a short bar at the
  bin's weighted mean with a thin vertical stroke for its error ("ticks"), not circles.
* Residual panels are called "residuals O-C [m/s]", drawn over a band of +-1 median error
  so a reader sees at once whether the scatter is what the errors promise.
* Figures: white ground, left and bottom spines only, a faint horizontal grid, the
  run's kind in the footer.

The colours are chosen to stay apart for the common colour-vision deficiencies (teal,
burnt orange, purple, ochre, slate blue, wine; checked against the Okabe & Ito 2008
guidance of differing in lightness as well as hue).
"""

from __future__ import annotations

import contextlib

__all__ = [
    "COMPANION_COLOURS", "INSTRUMENT_INKS", "INSTRUMENT_MARKERS", "companion_colour",
    "instrument_style", "figure_style", "INK", "BAND", "RESIDUAL_LABEL", "VELOCITY_LABEL",
]  # fmt: skip

COMPANION_COLOURS = ("#1b7f79", "#c2571a", "#6a4c93", "#b5892b", "#2f5d8a", "#8c2f39")
INSTRUMENT_INKS = ("#2e3b44", "#8a6d3b", "#4f7a8a", "#7a4f6d", "#5b6b2f", "#6b6b6b")
INSTRUMENT_MARKERS = ("o", "D", "s", "^", "v", "P", "X", "h")
INK = "#22272b"  # text, total model curve
BAND = "#1b7f79"  # the posterior band of the total curve (drawn translucent)
RESIDUAL_LABEL = "residuals O-C [m/s]"
VELOCITY_LABEL = "velocity [m/s]"

_RC = {
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "axes.grid.axis": "y",
    "grid.color": "#e3e6e8",
    "grid.linewidth": 0.6,
    "axes.edgecolor": "#5a6268",
    "axes.labelcolor": INK,
    "xtick.color": "#5a6268",
    "ytick.color": "#5a6268",
    "axes.titlesize": 10,
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    "axes.labelsize": 9.5,
    "legend.fontsize": 8,
    "legend.frameon": False,
    "font.size": 9.5,
    "figure.facecolor": "white",
    "savefig.facecolor": "white",
}


def companion_colour(index: int) -> str:
    """The colour of the companion with this index (b = 0, c = 1, ...).

    Parameters
    ----------
    index : int
        The companion's index.

    Returns
    -------
    str
        A colour (hex).
    """
    return COMPANION_COLOURS[index % len(COMPANION_COLOURS)]


def instrument_style(index: int) -> dict:
    """Marker and ink of the instrument with this index (stable across figures).

    Parameters
    ----------
    index : int
        The instrument's index.

    Returns
    -------
    dict
        ``color`` and ``marker``, as matplotlib's keywords.
    """
    return {
        "color": INSTRUMENT_INKS[index % len(INSTRUMENT_INKS)],
        "marker": INSTRUMENT_MARKERS[index % len(INSTRUMENT_MARKERS)],
    }


@contextlib.contextmanager
def figure_style():
    """The rcParams of rvkep's figures for the duration (the user's own are left
    alone outside it)."""
    import matplotlib

    with matplotlib.rc_context(_RC):
        yield
