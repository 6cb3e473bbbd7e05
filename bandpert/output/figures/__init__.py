"""Figures of every command, one module per kind, all in the house style of
:mod:`bandpert.output.style`. Each function takes result dataclasses and returns a
:class:`matplotlib.figure.Figure`; :func:`bandpert.output.style.save_figure` writes it."""

from .bands import band_figure, comparison_figure
from .dos import dos_figure, smearing_warning
from .gaps import annotate_gaps, gap_figure
from .kp import fullzone_figure, kp_figure
from .kp_path import kp_path_figure
from .sweep import sweep_figure

__all__ = ["annotate_gaps", "band_figure", "comparison_figure", "dos_figure", "fullzone_figure",
           "gap_figure", "kp_figure", "kp_path_figure", "smearing_warning", "sweep_figure"]
