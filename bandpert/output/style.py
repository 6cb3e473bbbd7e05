"""The house style of every figure, and the one function that writes a figure to a file.

Figures are built with matplotlib's object API (:class:`matplotlib.figure.Figure`), never
with pyplot: the library keeps no global figure registry and never selects a backend, so a
notebook keeps its own backend and a long run does not accumulate open figures.
"""

from __future__ import annotations

from pathlib import Path

from matplotlib.figure import Figure

from ..io import write_with


def save_figure(fig: Figure, path: Path, image_format: str = "png", dpi: int = 200) -> None:
    """Write ``fig`` atomically (temporary file, then rename) in ``image_format``.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
    path : pathlib.Path
        Destination file.
    image_format : str
        A format matplotlib writes without a GUI ("png", "pdf", "svg").
    dpi : int
        Resolution of raster formats.
    """
    write_with(path, lambda p: fig.savefig(p, format=image_format, dpi=dpi))
