"""The density-of-states figure: DOS, its integral, the Fermi level and the gap."""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure

from .. import style
from ..energy_zero import zero_phrase
from ..text import fixed


def smearing_warning(result) -> str | None:
    """A warning when a Gaussian width is too small for the mesh, else None.

    On a mesh of N points per axis a band of width W moves by about W/N between neighbouring
    points; a Gaussian narrower than half that step resolves the single k-points instead of a
    continuous DOS (common practice, no source: the width must exceed the level spacing the
    mesh leaves).

    Parameters
    ----------
    result : bandpert.runs.mesh_dos.DosResult
    """
    d = result.dos
    if d.method != "gaussian" or d.smearing_eV is None:
        return None
    e = np.asarray(result.energies_eV, dtype=float)
    n_axis = max(result.mesh.shape)
    step = float(np.median(np.ptp(e, axis=0))) / n_axis
    if d.smearing_eV >= 0.5 * step:
        return None
    return (f"σ = {d.smearing_eV:g} eV is small for a {n_axis}-point mesh (bands move by about "
            f"{step:.2g} eV between mesh points): use σ ≥ {0.5 * step:.2g} eV or a denser mesh")


def dos_figure(result, energy_window_eV: tuple[float, float] | None = None) -> Figure:
    """Density of states (filled below the Fermi level) and its integral, from the energy zero.

    The Fermi level is drawn and labelled E_F inside the axes; for a semiconductor the gap
    between the valence maximum and the conduction minimum on the mesh is shaded; a Gaussian
    width too small for the mesh (:func:`smearing_warning`) is stated in the figure.

    Parameters
    ----------
    result : bandpert.runs.mesh_dos.DosResult
    energy_window_eV : (float, float), optional
        Limits of the energy axis (energies from the energy zero); default: the whole grid.

    Returns
    -------
    matplotlib.figure.Figure
    """
    d = result.dos
    zero = result.energy_zero_eV
    e = d.energies_eV - zero
    fig = style.new_figure(6.4, 5.6)
    ax, ax2 = fig.subplots(2, 1, sharex=True, height_ratios=[2.2, 1])
    ax.plot(e, d.dos_per_eV, color=style.EXACT_COLOUR, lw=1.1)
    lo, hi = style.energy_limits(e, energy_window_eV, margin=0.0)
    inside = (e >= lo) & (e <= hi)
    top = float(d.dos_per_eV[inside].max()) if inside.any() else 1.0
    ax.set_ylim(0, 1.12 * top if top > 0 else 1.0)
    gap_note = ""
    if result.valence_max_eV is not None and result.conduction_min_eV is not None \
            and result.conduction_min_eV > result.valence_max_eV:
        gap_note = (f"\ngap {result.conduction_min_eV - result.valence_max_eV:.2f} eV "
                    "(shaded)")
        for a in (ax, ax2):
            a.axvspan(result.valence_max_eV - zero, result.conduction_min_eV - zero,
                      color=style.GAP_COLOUR, alpha=0.3, lw=0, zorder=0)
    if result.fermi_level_eV is not None:
        ef = result.fermi_level_eV - zero
        below = e <= ef
        ax.fill_between(e[below], 0, d.dos_per_eV[below], color=style.EXACT_COLOUR,
                        alpha=0.18, lw=0)
        for a in (ax, ax2):
            a.axvline(ef, color=style.WARNING_COLOUR, lw=0.9, ls="--")
        right = ef < lo + 0.65 * (hi - lo)
        y_label = 0.72 if smearing_warning(result) else 0.96
        ef_text = (r"$E_\mathrm{F}$ (the energy zero)" if result.energy_zero_kind == "Fermi level"
                   else rf"$E_\mathrm{{F}}$ = {fixed(ef, 3)} eV")
        ax.annotate(ef_text + gap_note,
                    (ef, y_label), xycoords=("data", "axes fraction"),
                    xytext=(4 if right else -4, 0), textcoords="offset points",
                    ha="left" if right else "right", va="top",
                    fontsize=style.ANNOTATION_SIZE, color=style.WARNING_COLOUR,
                    bbox={"boxstyle": "round,pad=0.15", "fc": "white", "ec": "none",
                          "alpha": 0.85})
    ax.set_xlim(lo, hi)
    ax.set_ylabel("states / eV / cell", fontsize=style.LABEL_SIZE)
    ax2.plot(e, d.integrated, color=style.PALETTE[2], lw=1.1)
    ax2.set_ylabel("electrons / cell", fontsize=style.LABEL_SIZE)
    ax2.set_xlabel(style.energy_label(result.energy_zero_kind), fontsize=style.LABEL_SIZE)
    for a in (ax, ax2):
        style.style_axes(a, grid=True)
    how = d.method + ("" if d.smearing_eV is None else f", σ = {d.smearing_eV:g} eV")
    mesh = "×".join(str(n) for n in result.mesh.shape)
    ax.set_title(style.title(f"{result.material.name}\n{how}, mesh {mesh} "
                             f"({len(result.mesh.k_frac)} irreducible points)"),
                 fontsize=style.TITLE_SIZE)
    warning = smearing_warning(result)
    if warning:
        ax.text(0.01, 0.99, style.wrap("warning: " + warning, 70), transform=ax.transAxes,
                ha="left", va="top", fontsize=style.ANNOTATION_SIZE - 0.5,
                color=style.WARNING_COLOUR,
                bbox={"boxstyle": "round,pad=0.2", "fc": "white", "ec": style.WARNING_COLOUR,
                      "alpha": 0.9})
    style.footer(fig, f"{result.basis_size} plane waves; the DOS is complete below "
                 f"{result.complete_below_eV - zero:.2f} eV (the bottom of the highest band "
                 "computed). Energy zero: "
                 f"{zero_phrase(result.energy_zero_kind, zero)}.", width=110)
    return fig
