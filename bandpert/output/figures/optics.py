"""The optical-spectrum figure: ε2 and ε1 against photon energy with the critical-point
transitions E0, E1, E2 marked where the crystal has them, and the joint DOS below."""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure

from .. import style


def optics_figure(result, energy_window_eV: tuple[float | None, float | None] | None = None
                  ) -> Figure:
    """ε2(E) and ε1(E) (top), the joint density of states (bottom), E0/E1/E2 marked.

    Only photon energies below ``complete_below_eV`` are drawn (above it transitions to bands
    not computed are missing).

    Parameters
    ----------
    result : bandpert.physics.optical_spectrum.OpticalSpectrum
    energy_window_eV : (float or None, float or None), optional
        Limits of the photon-energy axis (an end left out follows the data).

    Returns
    -------
    matplotlib.figure.Figure
    """
    e = result.energies_eV
    shown = e <= min(result.complete_below_eV, e[-1])
    lo, hi = 0.0, float(e[shown][-1])
    if energy_window_eV is not None:
        lo = lo if energy_window_eV[0] is None else max(lo, energy_window_eV[0])
        hi = hi if energy_window_eV[1] is None else min(hi, energy_window_eV[1])
    inside = shown & (e >= lo) & (e <= hi)
    fig = style.new_figure(6.4, 5.6)
    ax, ax2 = fig.subplots(2, 1, sharex=True, height_ratios=[2.2, 1])
    ax.plot(e[inside], result.eps2[inside], color=style.PALETTE[0], lw=1.2,
            label=r"$\varepsilon_2$")
    ax.plot(e[inside], result.eps1[inside], color=style.PALETTE[1], lw=1.1, ls="--",
            label=r"$\varepsilon_1$ (Kramers–Kronig)")
    ax.axhline(0.0, color=style.GUIDE_COLOUR, lw=0.6)
    values = np.concatenate([result.eps2[inside], result.eps1[inside]])
    bottom, top = float(min(values.min(initial=0.0), 0.0)), float(values.max(initial=1.0))
    ax.set_ylim(bottom - 0.05 * (top - bottom), top + 0.22 * (top - bottom))
    for energy in result.critical_points_eV.values():
        if lo <= energy <= hi:
            for a in (ax, ax2):
                a.axvline(energy, color=style.REFERENCE_LINE_COLOUR, lw=0.7, ls=":")
    marks = sorted((v, k) for k, v in result.critical_points_eV.items() if lo <= v <= hi)
    placed: list[tuple[float, int]] = []
    for energy, name in marks:  # staggered: each mark on the highest row free near it
        row = 0
        while any(r == row and abs(energy - p) < 0.09 * (hi - lo) for p, r in placed):
            row += 1
        placed.append((energy, row))
        level = 0.97 - 0.07 * row
        ax.annotate(f"{name} {energy:.2f}", (energy, level), xycoords=("data", "axes fraction"),
                    xytext=(2, 0), textcoords="offset points", ha="left", va="top",
                    fontsize=style.ANNOTATION_SIZE, color=style.NOTE_COLOUR,
                    bbox={"boxstyle": "round,pad=0.1", "fc": "white", "ec": "none",
                          "alpha": 0.85})
    ax.set_xlim(lo, hi)
    ax.set_ylabel(r"$\varepsilon$ (direction average)", fontsize=style.LABEL_SIZE)
    style.legend_outside(ax)
    ax2.plot(e[inside], result.jdos_per_eV[inside], color=style.PALETTE[2], lw=1.1)
    ax2.set_ylabel("joint DOS\n(1 / eV / cell)", fontsize=style.LABEL_SIZE)
    ax2.set_xlabel("photon energy (eV)", fontsize=style.LABEL_SIZE)
    for a in (ax, ax2):
        style.style_axes(a, grid=True)
    mesh = "×".join(str(n) for n in result.mesh.shape)
    how = "interpolated" if result.interpolation is not None else "exact"
    # over the figure, not the axes: the legend outside narrows the axes, and a long material
    # name centred on them ran past the figure's left edge (germanium-fitted)
    fig.suptitle(style.title(f"{result.material.name}\none-electron spectrum, mesh {mesh} "
                             f"({how}), σ = {result.broadening_eV:g} eV"),
                 fontsize=style.TITLE_SIZE)
    rule = (f"; sum rule (m0/ħ²)⟨∂²H/∂k²⟩ {result.sum_rule:.3f}" if result.k_terms else "")
    style.footer(fig, f"f-sum: n_eff = {result.n_eff_total:.3f} electrons per cell "
                      f"(interband {result.n_eff_interband:.3f}, intraband "
                      f"{result.n_eff_intraband:.3f}, {result.n_bands} bands){rule}; no "
                      "excitonic or local-field effects")
    return fig
