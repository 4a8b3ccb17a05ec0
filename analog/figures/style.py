"""One figure style for every chart and map the tool draws.

Palettes are colour-blind safe (ColorBrewer sequential and diverging schemes,
Brewer & Harrower; viridis family). Tier colours are a purple ramp of the
project's own choosing, deliberately unlike any assessment body's scheme.
Figure functions return ``matplotlib.figure.Figure`` objects and never save;
the output writer saves them.
"""
from __future__ import annotations

from contextlib import contextmanager

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

from .._resources import resource_dir  # noqa: E402

SEQUENTIAL = "YlGnBu"       # risk, low -> high (ColorBrewer, colour-blind safe)
DIVERGING = "PuOr_r"        # analog minus trajectory, centred on zero (ColorBrewer, colour-blind safe)
CATEGORICAL = ["#0072B2", "#E69F00", "#009E73", "#CC79A7", "#56B4E9", "#D55E00", "#F0E442", "#000000"]
# Okabe & Ito (2008) colour-blind-safe qualitative palette.
ANALOG_COLOUR = "#0072B2"
TRAJECTORY_COLOUR = "#E69F00"
COMBINED_COLOUR = "#3B3B3B"
NO_DATA_COLOUR = "#DDDDDD"
NO_DATA_HATCH = "////"

# Relative vulnerability tiers, most to least; plain names of the project's own.
TIER_NAMES = ("highest", "high", "moderate", "lower")
TIER_COLOURS = {"highest": "#3f007d", "high": "#6a51a3", "moderate": "#9e9ac8", "lower": "#dadaeb"}

CAUTION = ("Relative vulnerability from deep-time evidence; not a forecast or a formal threat "
           "assessment. Defer to official assessments and expert review.")


def style_path():
    """Path of the shipped matplotlib style sheet (maps/analog.mplstyle)."""
    return resource_dir("maps") / "analog.mplstyle"


@contextmanager
def figure_style():
    """Context manager applying the project style sheet."""
    with plt.style.context(str(style_path())):
        yield


def add_caption(fig, text: str, *, data_date: str | None = None):
    """Caption line at the foot of a figure: data note, date and the short caution."""
    parts = [text] if text else []
    if data_date:
        parts.append(f"Data as of {data_date}.")
    parts.append(CAUTION)
    fig.text(0.01, 0.005, "  ".join(parts), ha="left", va="bottom", fontsize=6.5, color="#444444", wrap=True)
    return fig
