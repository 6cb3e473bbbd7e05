"""The figure of k·p bands along L–Γ–X | Γ–K near Γ (:func:`bandpert.kp.bands_along_path`).

Kept beside :mod:`bandpert.output.figures.kp` (same object API, colours and line styles of the
k·p models) so the two can be merged when the house style settles.
"""

from __future__ import annotations

import textwrap

import numpy as np
from matplotlib.figure import Figure

from ..kp.bands import BAND_SHORT_NAMES, PathBands
from .figures.kp import KP_STYLES
from .style import draw_leg_lines, draw_path_axes

__all__ = ["kp_path_figure"]


def kp_path_figure(bands: PathBands, material_name: str, source: str,
                   window_eV: tuple[float, float] | None = None) -> Figure:
    """The models' bands along the path, one line style per model, bands named on the curves.

    Parameters
    ----------
    bands : PathBands
    material_name, source : str
        Legend and footer: the crystal and where its parameters come from.
    window_eV : (float, float), optional
        Energy range drawn (eV from the valence-band top); default: every band, with a margin.

    Returns
    -------
    matplotlib.figure.Figure
        Band names (CB, HH, LH, SO) are written beside the largest model's curves near Γ, on
        the Γ–X side, where the names hold (bands mix further out).
    """
    fig = Figure(figsize=(6.4, 4.8), layout="constrained")
    ax = fig.subplots()
    x = bands.distance_2pi_a
    for name in bands.models:
        colour, style, _ = KP_STYLES.get(name, ("0.3", "-", 1.2))
        draw_leg_lines(ax, x, bands.energies_eV[name], bands.leg_starts, color=colour, ls=style,
                       lw=1.3, label=name)
    draw_path_axes(ax, x, bands.label_indices, bands.labels)
    ax.axhline(0.0, color="0.6", lw=0.6, ls="--", zorder=0)
    every = np.concatenate([e.ravel() for e in bands.energies_eV.values()])
    if window_eV is None:
        span = every.max() - every.min()
        window_eV = (every.min() - 0.06 * span, every.max() + 0.06 * span)
    ax.set_ylim(*window_eV)
    _name_bands(ax, bands, window_eV)
    ax.set_ylabel("Energy − valence-band top at Γ (eV)")
    ax.set_xlabel(f"k along Γ–L, Γ–X, Γ–K (units of 2π/a), |k| ≤ {bands.k_max_invA:.3f} Å⁻¹")
    ax.legend(fontsize=7, title=_short(material_name, 28), title_fontsize=7, loc="upper left",
              bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)
    fig.suptitle(f"{material_name}: k·p bands near Γ", fontsize=10)
    fig.text(0.01, 0.002, _short(f"Parameters: {source}"), fontsize=6, color="0.35",
             va="bottom")
    fig.get_layout_engine().set(rect=(0, 0.04, 1, 0.96))
    return fig


def _name_bands(ax, bands: PathBands, window_eV: tuple[float, float]) -> None:
    """CB, HH, LH, SO written on the largest model's curves, each where it stands clear.

    Candidate spots run outward from Γ on the Γ–X, Γ–L and Γ–K lines; a name goes at the first
    spot where no other band passes within its box's half-height (4.5 % of the energy window
    high, 6 % of the path wide) and no name already written overlaps it; failing that, at the
    spot with the most room.
    """
    model = bands.models[-1]
    e = bands.energies_eV[model]
    names = bands.band_names[model]
    x = bands.distance_2pi_a
    first, gamma, end_x, last = (int(i) for i in bands.label_indices)
    k_gamma = bands.leg_starts[1]
    spots = []
    for t in (0.3, 0.5, 0.7, 0.9):
        spots += [gamma + round(t * (end_x - gamma)), gamma - round(t * (gamma - first)),
                  k_gamma + round(t * (last - k_gamma))]
    lo, hi = window_eV
    height, width = 0.045 * (hi - lo), 0.06 * (x[-1] - x[0])
    written: list[tuple[float, float]] = []
    for name in dict.fromkeys(names):
        mine = [i for i, n in enumerate(names) if n == name]
        others = [i for i, n in enumerate(names) if n != name]
        best, best_room = None, -np.inf
        for at in spots:
            y = float(np.mean(e[at, mine]))
            if not lo + height < y < hi - height:
                continue
            room = min([abs(y - float(e[at, j])) for j in others] + [np.inf])
            if any(abs(x[at] - wx) < width and abs(y - wy) < height for wx, wy in written):
                continue
            if room >= 0.6 * height:
                best = (at, y)
                break
            if room > best_room:
                best, best_room = (at, y), room
        if best is None:
            continue
        at, y = best
        written.append((float(x[at]), y))
        ax.annotate(BAND_SHORT_NAMES.get(name, name), (x[at], y), fontsize=8, ha="center",
                    va="center", color="0.1",
                    bbox={"boxstyle": "round,pad=0.15", "fc": "white", "ec": "0.6", "lw": 0.5})


def _short(text: str, width: int = 110) -> str:
    return "\n".join(textwrap.wrap(text, width))
