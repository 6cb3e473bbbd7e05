"""The figure of k·p bands along L–Γ–X | Γ–K near Γ (:func:`bandpert.kp.bands_along_path`),
in the house style (:mod:`bandpert.output.style`), with the models' colours and line styles of
:mod:`bandpert.output.figures.kp`."""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure
from matplotlib.lines import Line2D

from ...kp.bands import BAND_SHORT_NAMES, PathBands
from .. import style
from .kp import KP_STYLES


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
    fig = style.new_figure(6.8, 4.8)
    ax = fig.subplots()
    x = bands.distance_2pi_a
    order = sorted(bands.models, key=lambda m: list(KP_STYLES).index(m)
                   if m in KP_STYLES else len(KP_STYLES))
    handles = []
    for name in order:
        colour, ls, lw = KP_STYLES.get(name, ("0.3", "-.", 1.2))
        style.draw_leg_lines(ax, x, bands.energies_eV[name], bands.leg_starts, color=colour,
                             ls=ls, lw=lw)
        handles.append(Line2D([], [], color=colour, ls=ls, lw=lw, label=name))
    style.draw_path_axes(ax, x, bands.label_indices, bands.labels)
    ax.axhline(0.0, color=style.REFERENCE_LINE_COLOUR, lw=0.8, ls="--", zorder=0)
    every = np.concatenate([e.ravel() for e in bands.energies_eV.values()])
    window_eV = style.energy_limits(every, window_eV, margin=0.06)
    ax.set_ylim(*window_eV)
    style.energy_ticks(ax)
    style.style_axes(ax)
    _name_bands(ax, bands, window_eV)
    ax.set_ylabel("Energy − valence-band top at Γ (eV)", fontsize=style.LABEL_SIZE)
    ax.set_xlabel(f"k along Γ–L, Γ–X, Γ–K (units of 2π/a), |k| ≤ {bands.k_max_invA:.3f} Å⁻¹",
                  fontsize=style.LABEL_SIZE)
    style.legend_outside(ax, handles, title=style.wrap(material_name, 24))
    ax.set_title(style.title(f"{material_name}: k·p bands near Γ"), fontsize=style.TITLE_SIZE)
    style.footer(fig, f"Parameters: {style.short_source(source)}. Energy zero: the "
                 "valence-band top at Γ (the models' own zero).", width=120)
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
        ax.annotate(BAND_SHORT_NAMES.get(name, name), (x[at], y), fontsize=style.LABEL_SIZE - 1,
                    ha="center", va="center", color="0.1",
                    bbox={"boxstyle": "round,pad=0.15", "fc": "white", "ec": "0.6", "lw": 0.5})
