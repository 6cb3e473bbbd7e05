"""The in-plane dispersion figure of ``bandpert subbands --in-plane``: subband energies against
k∥, the second in-plane direction to the left of k∥ = 0 and the first to the right ([110] |
[100] for [001] growth: the valence subbands of a [001] well are anisotropic in plane when
γ2 ≠ γ3; the conduction subbands nearly isotropic)."""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure
from matplotlib.lines import Line2D

from .. import style

__all__ = ["dispersion_figure"]


def _panel(ax, k, left, right, prefix, masses_left, masses_right):
    """Draw one side of the gap; returns the legend handles."""
    handles = []
    x = np.concatenate([-k[::-1], k[1:]])
    for i in range(right.shape[1]):
        colour = style.PALETTE[i % len(style.PALETTE)]
        y = np.concatenate([left[::-1, i], right[1:, i]])
        ax.plot(x, y, color=colour, lw=1.4, ls=style.LINE_STYLES[(i // len(style.PALETTE))
                                                                 % len(style.LINE_STYLES)])
        handles.append(Line2D([], [], color=colour, lw=1.4, label=(
            f"{prefix}{i + 1}: {masses_left[i]:+.4f} | {masses_right[i]:+.4f}")))
    lo, hi = float(min(left.min(), right.min())), float(max(left.max(), right.max()))
    span = hi - lo if hi > lo else 0.01
    ax.set_ylim(lo - 0.08 * span, hi + 0.08 * span)
    ax.axvline(0.0, color=style.GUIDE_COLOUR, lw=0.6, ls=":")
    ax.set_ylabel("Energy (eV, common scale)", fontsize=style.LABEL_SIZE)
    style.style_axes(ax)
    style.energy_ticks(ax)
    return handles


def dispersion_figure(dispersion) -> Figure:
    """Subband energies against k∥ in one or two panels (conduction above valence).

    Parameters
    ----------
    dispersion : bandpert.heterostructure.InPlaneDispersion

    Each subband is a line, numbered from the gap (E1 the lowest conduction, V1 the highest
    valence subband; sorted at each k∥, so an anticrossing swaps which physical subband a
    number follows); the legend gives each one's in-plane mass at k∥ = 0 along the left |
    right direction (m0; negative: hole-like).
    """
    d = dispersion
    k = d.k_invA
    right, left = list(d.valence_eV)[:2]  # the first direction to the right
    sides = []
    if d.conduction_eV[right].size:
        sides.append(("conduction", d.conduction_eV, "E"))
    sides.append(("valence", d.valence_eV, "V"))
    fig = style.new_figure(7.2, 5.6 if len(sides) == 2 else 4.0)
    axes = np.atleast_1d(fig.subplots(len(sides), 1, sharex=True))
    for ax, (side, energies, prefix) in zip(axes, sides, strict=True):
        m = d.in_plane_mass_m0
        handles = _panel(ax, k, energies[left], energies[right], prefix, m[left][side],
                         m[right][side])
        style.legend_outside(ax, handles,
                             title=f"{side}: m∥/m0 at k∥ = 0,\n[{left}] | [{right}]")
    bottom = axes[-1]
    bottom.set_xlim(-k[-1], k[-1])
    ticks = bottom.get_xticks()
    ticks = ticks[(ticks >= -k[-1] - 1e-12) & (ticks <= k[-1] + 1e-12)]
    bottom.set_xticks(ticks, [f"{abs(t):g}" for t in ticks])
    bottom.set_xlabel(f"k∥ (1/Å): along [{left}] ←  0  → along [{right}]",
                      fontsize=style.LABEL_SIZE)
    axes[0].set_title(f"{d.name}: {d.model} in-plane dispersion, [{d.growth}] growth",
                      fontsize=style.TITLE_SIZE)
    style.footer(fig, "Subbands numbered from the gap and sorted at each k∥ (E: conduction "
                      "upward, V: valence downward); an anticrossing swaps the subband a "
                      "number follows. Masses at k∥ = 0, negative: hole-like.")
    return fig
