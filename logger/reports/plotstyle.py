"""The look of our figures, and how they reach the disk.

One place for colours, marker shapes and line styles so the report and the
history read the same way.  Every role differs in colour AND in shape or
line style, so a figure stays readable printed in greyscale and for
colour-blind readers.  Figures are built as bare `matplotlib.figure.Figure`
objects (no pyplot, no global backend state), which renders headless
through Agg and lets tests inspect the artists directly.
"""

from __future__ import annotations

import io
from pathlib import Path

from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from logger.run.writer import write_atomic

# Okabe-Ito palette: M. Okabe and K. Ito, "Color Universal Design (CUD): how to make
# figures and presentations that are friendly to colorblind people" (2002/2008).
BLACK = "#000000"
ORANGE = "#E69F00"
SKY_BLUE = "#56B4E9"
BLUISH_GREEN = "#009E73"
YELLOW = "#F0E442"
BLUE = "#0072B2"
VERMILLION = "#D55E00"
REDDISH_PURPLE = "#CC79A7"
GREY = "#7F7F7F"

# Roles: (colour, marker, line style)
TRACE = dict(color=GREY, linewidth=0.6, linestyle="-")
FLAT_SEATING = dict(color=BLUE, marker="o", markersize=6, linestyle="none", markerfacecolor="white", markeredgewidth=1.5)
SURFACE_SEATING = dict(color=BLUISH_GREEN, marker="D", markersize=5, linestyle="none")
REJECTED_SEATING = dict(color=VERMILLION, marker="X", markersize=9, linestyle="none", markeredgecolor=BLACK, markeredgewidth=0.5)
ZERO_LINE = dict(color=ORANGE, linewidth=1.8, linestyle="--")
MEAN_LINE = dict(color=BLACK, linewidth=1.4, linestyle="-")
BAND = dict(facecolor=ORANGE, alpha=0.25, edgecolor=ORANGE, hatch="..", linewidth=0)
FLAT_WINDOW = dict(facecolor=SKY_BLUE, alpha=0.25, edgecolor="none")
SURFACE_WINDOW = dict(facecolor=BLUISH_GREEN, alpha=0.15, edgecolor=BLUISH_GREEN, hatch="//", linewidth=0)
TARGET_LINE = dict(color=VERMILLION, linewidth=1.6, linestyle="-.")
TARGET_BAND = dict(facecolor=VERMILLION, alpha=0.12, edgecolor=VERMILLION, hatch="\\\\", linewidth=0)

# History: one look per kind of run
KIND_STYLE = {
    "mirror": dict(color=BLUE, marker="o", linestyle="-", markerfacecolor=BLUE),
    "tool": dict(color=ORANGE, marker="^", linestyle="--", markerfacecolor="white", markeredgewidth=1.5),
    "other": dict(color=REDDISH_PURPLE, marker="s", linestyle=":", markerfacecolor=REDDISH_PURPLE),
}


def new_figure(width_in: float, height_in: float) -> Figure:
    fig = Figure(figsize=(width_in, height_in), dpi=100, layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def save_figure(fig: Figure, path) -> Path:
    """Write a PNG atomically: a reader never sees half a file, a crash leaves the old one."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    write_atomic(Path(path), buf.getvalue())
    return Path(path)


def write_text(path, text: str) -> Path:
    """Write a text file atomically (UTF-8)."""
    write_atomic(Path(path), text)
    return Path(path)
