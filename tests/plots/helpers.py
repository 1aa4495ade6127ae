"""Helpers for the figure tests: render, read pixels and text, grayscale."""

from __future__ import annotations

import io

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.colors import to_rgb
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from PIL import Image

from calcbuilder import plots


def pixels(fig: Figure) -> np.ndarray:
    """RGBA pixels of the figure drawn by Agg."""
    canvas = FigureCanvasAgg(fig)
    canvas.draw()
    return np.asarray(canvas.buffer_rgba())


def gray_png(fig: Figure) -> np.ndarray:
    """The figure as PNG bytes, decoded and converted to 8-bit grayscale."""
    img = Image.open(io.BytesIO(plots.figure_png_bytes(fig, dpi=60))).convert("L")
    return np.asarray(img, dtype=float)


def texts(fig: Figure) -> str:
    """All text drawn on the figure and its axes, legends included, one string."""
    found = [t.get_text() for t in fig.findobj(lambda a: hasattr(a, "get_text"))]
    return "\n".join(str(t) for t in found)


def line_by_label(ax, label: str) -> Line2D:
    matches = [ln for ln in ax.get_lines() if ln.get_label() == label]
    assert len(matches) == 1, [ln.get_label() for ln in ax.get_lines()]
    return matches[0]


def luminance(color) -> float:
    """ITU-R 601 luma, the weights PIL uses to convert to grayscale ("L")."""
    r, g, b = to_rgb(color)
    return 0.299 * r + 0.587 * g + 0.114 * b


def notes_text(fig: Figure) -> str:
    return "\n".join(t.get_text() for t in fig.texts if t.get_gid() == "figure-notes")


def assert_not_blank(fig: Figure) -> None:
    """Pixel variance well above a blank page, in colour and in grayscale."""
    assert pixels(fig)[..., :3].std() > 10
    assert gray_png(fig).std() > 10
