"""Band-structure figures: exact bands along a labelled path, fit for a paper."""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
from matplotlib.axes import Axes  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402

from .bands import BandStructure  # noqa: E402

EXACT_COLOUR = "#1f3a5f"
GAP_COLOUR = "#f2c14e"


def draw_path_axes(ax: Axes, distance: np.ndarray, label_indices: np.ndarray,
                   labels: tuple[str, ...]) -> None:
    """Vertical lines and tick labels at the high-symmetry points of a path."""
    xs = distance[label_indices]
    for x in xs[1:-1]:
        ax.axvline(x, color="0.6", lw=0.6, zorder=0)
    ax.set_xticks(xs, labels)
    ax.set_xlim(distance[0], distance[-1])


def draw_leg_lines(ax: Axes, distance: np.ndarray, energies: np.ndarray,
                   leg_starts: np.ndarray, **style) -> None:
    """Plot each band as lines, broken where the path jumps between legs."""
    bounds = list(leg_starts) + [len(distance)]
    first = True
    for s, e in zip(bounds[:-1], bounds[1:], strict=True):
        lines = ax.plot(distance[s:e], energies[s:e], **style)
        if not first:
            for line in lines:
                line.set_label("_nolegend_")
        elif "label" in style:
            for line in lines[1:]:
                line.set_label("_nolegend_")
        first = False


def band_figure(bs: BandStructure, energy_window_eV: tuple[float, float] | None = None) -> Figure:
    """The exact bands of ``bs`` along its path, energies from the energy zero.

    The energy zero is drawn as a dashed line; for a semiconductor the gap is shaded and the
    valence maximum and conduction minimum marked. The material's source is printed beneath.

    Parameters
    ----------
    bs : BandStructure
    energy_window_eV : (float, float), optional
        Limits of the energy axis (relative energies); default: all bands with a margin.

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig, ax = plt.subplots(figsize=(6.4, 4.8), constrained_layout=True)
    x = bs.path.distance_invA
    e = bs.relative_energies_eV
    draw_leg_lines(ax, x, e, bs.path.leg_starts, color=EXACT_COLOUR, lw=1.3)
    draw_path_axes(ax, x, bs.path.label_indices, bs.path.labels)
    zero_name = {"valence-band maximum": "valence-band maximum", "Fermi level": "$E_F$",
                 "absolute": "model zero"}[bs.energy_zero_kind]
    ax.axhline(0.0, color="0.35", lw=0.8, ls="--", zorder=0)
    if bs.edges is not None:
        g = bs.edges
        ax.axhspan(0.0, g.gap_eV, color=GAP_COLOUR, alpha=0.25, lw=0, zorder=0)
        ax.plot(x[g.valence_max_index], 0.0, "o", ms=5, color="#b23a48", zorder=5)
        ax.plot(x[g.conduction_min_index], g.conduction_min_eV - bs.energy_zero_eV, "o", ms=5,
                color="#2e8b57", zorder=5)
        kind = "direct" if g.valence_max_index == g.conduction_min_index else "indirect"
        xc = x[g.conduction_min_index]
        ax.annotate("", xy=(xc, g.conduction_min_eV - bs.energy_zero_eV), xytext=(xc, 0.0),
                    arrowprops={"arrowstyle": "<->", "color": "0.25", "lw": 0.8})
        ax.text(xc + 0.015 * (x[-1] - x[0]), g.gap_eV / 2, f"$E_g$ = {g.gap_eV:.2f} eV ({kind})",
                ha="left", va="center", fontsize=8,
                bbox={"boxstyle": "round,pad=0.2", "fc": "white", "ec": "0.7", "alpha": 0.9})
    if energy_window_eV is not None:
        ax.set_ylim(*energy_window_eV)
    else:
        span = e.max() - e.min()
        ax.set_ylim(e.min() - 0.04 * span, e.max() + 0.04 * span)
    ax.set_ylabel(f"Energy − {zero_name} (eV)" if bs.energy_zero_kind != "absolute"
                  else "Energy (eV)")
    ax.set_xlabel("Wave vector along the path")
    ax.set_title(bs.material.name, fontsize=11)
    fig.text(0.01, 0.002, _wrap(f"Parameters: {bs.material.source}"), fontsize=6, color="0.35",
             va="bottom")
    fig.get_layout_engine().set(rect=(0, 0.05, 1, 0.95))
    return fig


def _wrap(text: str, width: int = 150) -> str:
    import textwrap

    return "\n".join(textwrap.wrap(text, width))
