"""The figure of ``bandpert subbands``: the band-edge profile along z with the levels and
|ψ|² drawn at their energies."""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure
from matplotlib.lines import Line2D

from .. import style

#: Colour of each band's edge, levels and densities.
BAND_COLOURS = {"conduction": style.CONDUCTION_EDGE_COLOUR, "heavy hole": "#0072B2",
                "light hole": "#D55E00"}

#: Line style of each band's edge.
BAND_STYLES = {"conduction": "-", "heavy hole": "-", "light hole": "--"}


def subband_figure(result, window_eV: tuple[float | None, float | None] | None = None
                   ) -> Figure:
    """Two panels sharing z: conduction band (top) and valence bands (bottom).

    Each band edge is drawn against z; each level is a thin line across the structure with
    |ψ|² drawn on it (scaled so the largest density of the panel spans a fifth of the panel's
    energy range: the density's height is qualitative, its shape and position are not); the
    levels are named in the legend (lowest three per band, in the order drawn).

    Parameters
    ----------
    result : bandpert.heterostructure.SubbandResult
    window_eV : (float, float), optional
        Not used for the split panels beyond the limits of each (kept for the common option).
    """
    fig = style.new_figure(7.2, 5.6)
    top, bottom = fig.subplots(2, 1, sharex=True)
    z = result.z_nm
    panels = ((top, ("conduction",)), (bottom, ("heavy hole", "light hole")))
    handles = []
    for ax, bands in panels:
        solved = [b for b in bands if b in result.levels_eV]  # a valence-only model: no E
        edges = np.concatenate([result.edges_eV[b] for b in bands])
        levels = np.concatenate([result.levels_eV[b] for b in solved] or [edges[:1]])
        lo, hi = float(min(edges.min(), levels.min())), float(max(edges.max(), levels.max()))
        span = hi - lo if hi > lo else 0.1
        peak = max([float(result.densities_per_nm[b].max()) for b in solved] or [0.0])
        scale = 0.2 * span / peak if peak > 0 else 0.0
        for band in bands:
            colour = BAND_COLOURS[band]
            ax.plot(z, result.edges_eV[band], color=colour, ls=BAND_STYLES[band], lw=1.6)
            handles.append(Line2D([], [], color=colour, ls=BAND_STYLES[band], lw=1.6,
                                  label=f"{band} edge"))
            sign = -1.0 if band != "conduction" else 1.0
            if band not in solved:
                continue
            for i, (e, rho) in enumerate(zip(result.levels_eV[band],
                                             result.densities_per_nm[band], strict=True)):
                ax.axhline(e, color=colour, lw=0.5, alpha=0.6)
                ax.plot(z, e + sign * scale * rho, color=colour, lw=0.9,
                        alpha=1.0 if result.bound[band][i] else 0.4)
        for x in result.interfaces_nm[1:-1]:
            ax.axvline(x, color=style.GUIDE_COLOUR, lw=0.5, ls=":")
        ax.set_ylim(lo - 0.12 * span, hi + 0.3 * span) if bands == ("conduction",) else \
            ax.set_ylim(lo - 0.3 * span, hi + 0.12 * span)
        ax.set_ylabel("Energy (eV, common scale)", fontsize=style.LABEL_SIZE)
        style.style_axes(ax)
        style.energy_ticks(ax)
    bottom.set_xlabel("z (nm)", fontsize=style.LABEL_SIZE)
    bottom.set_xlim(z[0] - 0.5 * result.spacing_nm, z[-1] + 0.5 * result.spacing_nm)
    names = []
    for band in ("conduction", "heavy hole", "light hole"):
        if band not in result.levels_eV:
            names.append(Line2D([], [], color=BAND_COLOURS[band], lw=0.9,
                                label=f"not in the {result.model} model"))
            continue
        shown = [f"{lab} {e:.4f}" for lab, e in zip(result.labels[band][:3],
                                                    result.levels_eV[band][:3], strict=False)]
        names.append(Line2D([], [], color=BAND_COLOURS[band], lw=0.9,
                            label=", ".join(shown) + " eV"))
    style.legend_outside(top, handles[:1] + names[:1], title="conduction")
    style.legend_outside(bottom, handles[1:] + names[1:], title="valence")
    kind = "superlattice period, levels at q = 0" if result.periodic else "bounded structure"
    top.set_title(f"{result.name}: {result.model} subbands at k∥ = 0", fontsize=style.TITLE_SIZE)
    style.footer(fig, f"{kind}; growth along [{result.growth}]; grid spacing "
                      f"{result.spacing_nm:g} nm; |ψ|² drawn at each "
                      f"level's energy (height not to scale). Source: {result.source}")
    return fig
