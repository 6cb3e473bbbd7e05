"""k·p figures: parameter-file models near Γ, and full-zone k·p against the exact bands."""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.ticker import MaxNLocator, NullLocator

from ...physics.bands import BandStructure
from .. import style
from .bands import draw_bands_panel, source_note

#: Colour, line style and width of each parameter-file model: the richest model solid and
#: drawn first, the simpler ones dashed and dotted on top of it.
KP_STYLES = {"eight-band": ("#0072B2", "-", 1.8), "six-band": ("#D55E00", "--", 1.3),
             "two-band": ("#CC79A7", ":", 1.5)}

#: Short band names written on the curves.
BAND_ABBREVIATIONS = {"conduction": "CB", "heavy hole": "HH", "light hole": "LH",
                      "split-off": "SO"}


def kp_figure(title: str, source: str, bands_by_model: dict, exact: dict | None = None,
              exact_label: str = "",
              energy_window_eV: tuple[float, float] | None = None) -> Figure:
    """k·p bands near Γ along several directions, one panel per direction.

    Each model has its own colour and line style (:data:`KP_STYLES`); the bands of the
    richest model are named (CB, HH, LH, SO) at the end of the last panel; the legend, under
    the panels, is titled with the material.

    Parameters
    ----------
    title, source : str
        The material's name (figure title and legend title) and the parameters' source
        (printed beneath).
    bands_by_model : dict
        Model name → {direction label → :class:`bandpert.kp.models.DirectionalBands`}.
    exact : dict, optional
        Direction label → (k in units of 2π/a, (n_k, n) energies from the valence top) of a
        plane-wave model, drawn as dots beside the k·p lines.
    exact_label : str
        Legend text of the exact bands.
    energy_window_eV : (float, float), optional
        Limits of the energy axis (eV from the valence-band top).

    Returns
    -------
    matplotlib.figure.Figure
    """
    directions = list(next(iter(bands_by_model.values())))
    fig = style.new_figure(2.7 * len(directions) + 1.3, 4.4)
    axes = np.atleast_1d(fig.subplots(1, len(directions), sharey=True))
    order = sorted(bands_by_model, key=lambda m: list(KP_STYLES).index(m)
                   if m in KP_STYLES else len(KP_STYLES))
    handles = []
    for model in order:
        colour, ls, lw = KP_STYLES.get(model, ("0.3", "-.", 1.2))
        handles.append(Line2D([], [], color=colour, ls=ls, lw=lw, label=model))
    for ax, name in zip(axes, directions, strict=True):
        for model in order:
            colour, ls, lw = KP_STYLES.get(model, ("0.3", "-.", 1.2))
            db = bands_by_model[model][name]
            x = db.k_frac if db.k_frac is not None else db.k_invA
            ax.plot(x, db.energies_eV, color=colour, ls=ls, lw=lw)
        if exact is not None and name in exact:
            kx, e = exact[name]
            step = max(1, len(kx) // 20)
            ax.plot(kx[::step], e[::step], "o", ms=2.6, color=style.EXACT_COLOUR)
        ax.axhline(0.0, color=style.GUIDE_COLOUR, lw=0.6, ls="--", zorder=0)
        ax.set_title(f"Γ → {name}", fontsize=style.LABEL_SIZE)
        first = bands_by_model[order[0]][name]
        ax.set_xlabel("k (2π/a)" if first.k_frac is not None else "k (Å⁻¹)",
                      fontsize=style.LABEL_SIZE)
        ax.set_xlim(0, None)
        ax.xaxis.set_major_locator(MaxNLocator(nbins=3, steps=[1, 2, 2.5, 5, 10]))
        style.style_axes(ax)
    if exact is not None:
        handles.append(Line2D([], [], ls="none", marker="o", ms=2.6, color=style.EXACT_COLOUR,
                              label=exact_label or "plane-wave (exact)"))
    all_kp = np.concatenate([db.energies_eV.ravel() for per_dir in bands_by_model.values()
                             for db in per_dir.values()])
    axes[0].set_ylim(*style.energy_limits(all_kp, energy_window_eV, margin=0.08))
    style.energy_ticks(axes[0])
    axes[0].set_ylabel("Energy − valence-band top (eV)", fontsize=style.LABEL_SIZE)
    _name_bands(axes[-1], bands_by_model[order[0]][directions[-1]])
    fig.legend(handles=handles, loc="outside right center",
               fontsize=style.LEGEND_SIZE, frameon=False, title=style.wrap(title, 26),
               title_fontsize=style.LEGEND_SIZE)
    fig.suptitle(style.title(f"{title}: bands near Γ"), fontsize=style.TITLE_SIZE)
    style.footer(fig, f"Parameters: {style.short_source(source)}", width=40 * len(directions))
    return fig


def _name_bands(ax, db) -> None:
    """Write the band names at the right end of ``ax``, pushed apart where they would touch."""
    lo, hi = ax.get_ylim()
    names: dict[str, list[float]] = {}
    for name, e in zip(db.band_names, db.energies_eV[-1], strict=True):
        if lo <= e <= hi:
            names.setdefault(BAND_ABBREVIATIONS.get(name, name), []).append(float(e))
    if not names:
        return
    items = sorted((float(np.mean(v)), n) for n, v in names.items())
    # keep the names at least 4 % of the axis apart, in order
    gap = 0.045 * (hi - lo)
    ys = [y for y, _ in items]
    for i in range(1, len(ys)):
        ys[i] = max(ys[i], ys[i - 1] + gap)
    overshoot = ys[-1] - (hi - 0.02 * (hi - lo))
    if overshoot > 0:
        ys = [y - overshoot for y in ys]
        for i in range(len(ys) - 2, -1, -1):
            ys[i] = min(ys[i], ys[i + 1] - gap)
    for y, (_, n) in zip(ys, items, strict=True):
        ax.annotate(n, (1.0, y), xycoords=("axes fraction", "data"), xytext=(3, 0),
                    textcoords="offset points", va="center", ha="left",
                    fontsize=style.ANNOTATION_SIZE, annotation_clip=False)


def fullzone_figure(bs: BandStructure, convergence, shown_index: int | None = None,
                    energy_window_eV: tuple[float, float] | None = None) -> Figure:
    """Full-zone k·p bands beside the exact ones, and their convergence with the basis.

    Parameters
    ----------
    bs : BandStructure
        Exact bands along the path.
    convergence : bandpert.physics.fullzone.KpConvergence
    shown_index : int, optional
        Which basis size to draw in the band panel (default: ``convergence.shown_index``, a
        truncated size whose error is visible beside the exact bands).
    energy_window_eV : (float, float), optional
        Limits of the energy axis (energies from the energy zero).

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig = style.new_figure(10.0, 4.6)
    ax, ax_c = fig.subplots(1, 2, width_ratios=[2.2, 1])
    draw_bands_panel(ax, bs, energy_window_eV)
    sizes = convergence.basis_sizes
    i = shown_index if shown_index is not None else convergence.shown_index
    x = bs.path.distance_invA
    e = convergence.energies_eV[i] - bs.energy_zero_eV
    lines = ax.plot(x, e, ls="--", lw=1.0, color=style.PALETTE[1])
    for j, line in enumerate(lines):
        line.set_label(f"full-zone k·p, {sizes[i]} Γ states" if j == 0 else "_nolegend_")
    ax.set_xlabel("Wave vector along the path", fontsize=style.LABEL_SIZE)
    # the whole basis reproduces the exact bands to rounding: errors below 1e-3 meV are drawn
    # at 1e-3 meV (the axis floor) rather than stretching the axis over rounding noise
    floor_meV = 1e-3
    err = np.maximum(convergence.max_error_eV * 1e3, floor_meV)
    rms = np.maximum(convergence.rms_error_eV * 1e3, floor_meV)
    ax_c.loglog(sizes, err, "o-", color=style.PALETTE[2], label="largest error")
    ax_c.loglog(sizes, rms, "s--", color="0.4", label="rms error")
    ax_c.set_xticks(sizes, [str(n) for n in sizes[:-1]] + [f"{sizes[-1]}\n(all)"])
    ax_c.set_ylim(floor_meV / 2, None)
    ax_c.xaxis.set_minor_locator(NullLocator())
    ax_c.set_xlabel("Γ states in the k·p basis", fontsize=style.LABEL_SIZE)
    ax_c.set_ylabel("error along the path (meV)", fontsize=style.LABEL_SIZE)
    ax_c.set_title("convergence", fontsize=style.LABEL_SIZE)
    style.style_axes(ax_c, grid=True)
    handles = [h for a in (ax, ax_c) for h in a.get_legend_handles_labels()[0]]
    fig.legend(handles=handles, loc="outside right center",
               fontsize=style.LEGEND_SIZE, frameon=False)
    style.footer(fig, source_note(bs), width=160)
    return fig
