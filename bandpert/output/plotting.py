"""Band-structure figures: exact bands along a labelled path, fit for a paper."""

from __future__ import annotations

import re

import matplotlib
import matplotlib.ticker
import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure

from ..physics.bands import BandStructure

EXACT_COLOUR = "#1f3a5f"
GAP_COLOUR = "#f2c14e"
NONDEGENERATE_COLOUR = "#e07a1f"
SUBSPACE_COLOUR = "#2a9d8f"
TRUSTED_COLOUR = "#8fc99a"
UNTRUSTED_COLOUR = "#d9626b"


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
    if bs.perturbative is not None:
        return comparison_figure(bs, energy_window_eV)
    fig = Figure(figsize=(6.4, 4.8), layout="constrained")
    ax = fig.subplots()
    _draw_bands_panel(ax, bs, energy_window_eV)
    _footer(fig, bs)
    return fig


def _draw_bands_panel(ax: Axes, bs: BandStructure,
                      energy_window_eV: tuple[float, float] | None) -> None:
    x = bs.path.distance_invA
    e = bs.relative_energies_eV
    if bs.energies_eV is not None:
        draw_leg_lines(ax, x, e, bs.path.leg_starts, color=EXACT_COLOUR, lw=1.3,
                       label="exact (diagonalisation)")
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
    ax.set_title(bs.material.name, fontsize=11)
    if bs.perturbative is None:
        ax.set_xlabel("Wave vector along the path")


def _footer(fig: Figure, bs: BandStructure) -> None:
    fig.text(0.01, 0.002, _wrap(f"Parameters: {bs.material.source}"), fontsize=6, color="0.35",
             va="bottom")
    fig.get_layout_engine().set(rect=(0, 0.05, 1, 0.95))


def comparison_figure(bs: BandStructure,
                      energy_window_eV: tuple[float, float] | None = None) -> Figure:
    """Perturbative bands beside exact bands, with the error panel and the validity map.

    Top: exact bands as lines; perturbative energies as markers, orange dots where the
    non-degenerate (Rayleigh–Schrödinger) series was used and teal diamonds where a subspace
    (Löwdin) treatment was used; hollow markers where the point is not trustworthy. Middle:
    on a log scale in meV, the true error |E_pert − E_exact| (solid, when the exact bands were
    computed) and the proven error bound (dotted) of every band, with the tolerance. Bottom: the
    validity map, one row per band, green where trustworthy and red where not.

    Parameters
    ----------
    bs : BandStructure
        Must carry perturbative bands.
    energy_window_eV : (float, float), optional
        Energy limits of the top panel (relative energies).

    Returns
    -------
    matplotlib.figure.Figure
    """
    pb = bs.perturbative
    fig = Figure(figsize=(6.8, 7.6), layout="constrained")
    ax, ax_err, ax_map = fig.subplots(
        3, 1, sharex=True, gridspec_kw={"height_ratios": [3.2, 1.5, 0.55]})
    _draw_bands_panel(ax, bs, energy_window_eV)
    x = bs.path.distance_invA
    e_pert = pb.energies_eV - bs.energy_zero_eV
    n_k, n_b = e_pert.shape
    stride = max(1, n_k // 70)
    xs = np.broadcast_to(x[:, None], e_pert.shape)
    sub = np.zeros(e_pert.shape, dtype=bool)
    sub[::stride] = True
    for code, colour, marker, name in ((0, NONDEGENERATE_COLOUR, "o", "non-degenerate"),
                                       (1, SUBSPACE_COLOUR, "D", "subspace (Löwdin)")):
        for trusted, face, suffix in ((True, colour, ""), (False, "none", ", not trustworthy")):
            m = sub & (pb.treatment == code) & (pb.trustworthy == trusted)
            if m.any():
                ax.scatter(xs[m], e_pert[m], s=9, marker=marker, facecolors=face,
                           edgecolors=colour, linewidths=0.7, zorder=4,
                           label=f"order {pb.settings.order}, {name}{suffix}")
    ax.legend(fontsize=6.5, loc="upper right", framealpha=0.9, ncol=1)
    # error panel
    tol_meV = pb.settings.tolerance_eV * 1e3
    floor = 1e-4
    for b in range(n_b):
        # the proven bound decides the mark; where it cannot vouch (inf) nothing is drawn
        est = np.maximum(np.where(np.isfinite(pb.error_bound_eV[:, b]),
                                  pb.error_bound_eV[:, b], np.nan) * 1e3, floor)
        ax_err.plot(x, est, ls=":", lw=0.8, color="0.45",
                    label="proven error bound" if b == 0 else "_nolegend_")
        if bs.comparison is not None:
            err = np.maximum(bs.comparison.abs_error_eV[:, b] * 1e3, floor)
            ax_err.plot(x, err, lw=0.9, color=matplotlib.colormaps["viridis"](b / max(n_b - 1, 1)),
                        label="|perturbative − exact|" if b == 0 else "_nolegend_")
    ax_err.axhline(tol_meV, color=UNTRUSTED_COLOUR, lw=1.0, ls="--",
                   label=f"tolerance {tol_meV:g} meV")
    ax_err.set_yscale("log")
    ax_err.set_ylim(floor, None)
    ax_err.set_ylabel("error (meV)")
    ax_err.legend(fontsize=6.5, loc="upper right", ncol=3, framealpha=0.9)
    for xv in x[bs.path.label_indices][1:-1]:
        ax_err.axvline(xv, color="0.6", lw=0.6, zorder=0)
    # validity map
    from matplotlib.colors import ListedColormap

    edges_x = np.concatenate([[x[0]], (x[1:] + x[:-1]) / 2, [x[-1]]])
    ax_map.pcolormesh(edges_x, np.arange(n_b + 1) + 0.5, pb.trustworthy.T.astype(float),
                      cmap=ListedColormap([UNTRUSTED_COLOUR, TRUSTED_COLOUR]), vmin=0, vmax=1,
                      shading="flat")
    ax_map.set_ylim(0.5, n_b + 0.5)
    ax_map.set_yticks([1, n_b])
    ax_map.set_ylabel("band", fontsize=8)
    share = pb.trustworthy.mean() * 100
    ax_map.set_title(f"validity map: trustworthy (green) on {share:.0f} % of (band, k) points",
                     fontsize=8, loc="left")
    for xv in x[bs.path.label_indices][1:-1]:
        ax_map.axvline(xv, color="white", lw=0.8)
    ax_map.set_xticks(x[bs.path.label_indices], bs.path.labels)
    ax_map.set_xlabel("Wave vector along the path")
    _footer(fig, bs)
    return fig


def _wrap(text: str, width: int = 150) -> str:
    import textwrap

    return "\n".join(textwrap.wrap(text, width))


FIRST_ORDER_COLOUR = "#e07a1f"
SECOND_ORDER_COLOUR = "#2a9d8f"
EXACT_GAP_COLOUR = "#b23a48"


def annotate_gaps(ax: Axes, report, energy_zero_eV: float = 0.0, *, crossings: bool = False,
                  label_fraction: float = 0.01) -> None:
    """Mark predicted against exact gaps at the examined points of a band plot.

    For every splitting of a free-electron degeneracy that is open in the exact levels
    (:class:`bandpert.gaps.GapReport`; degenerate perturbation theory, Ashcroft & Mermin,
    *Solid State Physics*, 1976, ch. 9): a bar at the point spanning the exact gap, and short
    ticks with a thin connector beside it for the first-order (left) and second-order Löwdin
    (right) levels bounding the same gap. Exact gaps larger than ``label_fraction`` of the
    energy axis are labelled ``exact (2nd order)`` in eV, skipping a label that would overlap
    one already placed at the same point. Crossings between labelled points are drawn thinner
    and unlabelled.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        A band plot whose x axis is the path distance (Å⁻¹) of the same path.
    report : bandpert.gaps.GapReport
    energy_zero_eV : float
        Subtracted from the (absolute) energies of the report, as in the band plot.
    crossings : bool
        Also mark the crossings (off by default: in a strong potential the free-electron
        crossings lie far from the exact bands and the marks crowd the figure).
    label_fraction : float
        Smallest exact gap labelled, as a fraction of the energy axis.
    """
    from ..physics.nfe_gaps import KIND_CROSSING

    x_lo, x_hi = ax.get_xlim()
    y_lo, y_hi = ax.get_ylim()
    dx = 0.012 * (x_hi - x_lo)
    placed: dict[float, list[float]] = {}
    for p in report.points:
        crossing = p.kind == KIND_CROSSING
        if crossing and not crossings:
            continue
        scale = 0.6 if crossing else 1.0
        for x in p.path_distance_invA:
            # keep the ticks inside the axes at the ends of the path
            left, right = x - dx, x + dx
            if left < x_lo:
                left, right = x + dx, x + 2 * dx
            elif right > x_hi:
                left, right = x - 2 * dx, x - dx
            for g in p.groups:
                for j in np.flatnonzero(g.open_gaps):
                    ex = g.exact_eV[j:j + 2] - energy_zero_eV
                    ax.plot([x, x], ex, color=EXACT_GAP_COLOUR, lw=2.4 * scale, alpha=0.75,
                            solid_capstyle="butt", zorder=6)
                    for xs, lev, colour in ((left, g.first_order_eV, FIRST_ORDER_COLOUR),
                                            (right, g.second_order_eV, SECOND_ORDER_COLOUR)):
                        e = lev[j:j + 2] - energy_zero_eV
                        ax.plot([xs, xs], e, color=colour, lw=0.7 * scale, zorder=6)
                        ax.plot([xs, xs], e, ls="none", marker="_", ms=6 * scale, mew=1.2,
                                color=colour, zorder=6)
                    gap = ex[1] - ex[0]
                    taken = placed.setdefault(round(float(x), 9), [])
                    if not crossing and gap > label_fraction * (y_hi - y_lo) \
                            and y_lo < ex.mean() < y_hi \
                            and all(abs(ex.mean() - y) > 0.03 * (y_hi - y_lo) for y in taken):
                        taken.append(ex.mean())
                        pred = g.second_order_eV[j + 1] - g.second_order_eV[j]
                        room = right + 8 * dx < x_hi
                        ax.text(right + 0.6 * dx if room else left - 0.6 * dx, ex.mean(),
                                f"{gap:.2f} ({pred:.2f})", fontsize=5.5,
                                color=EXACT_GAP_COLOUR, va="center",
                                ha="left" if room else "right", zorder=7,
                                bbox={"boxstyle": "round,pad=0.1", "fc": "white", "ec": "none",
                                      "alpha": 0.7})
    ax.set_xlim(x_lo, x_hi)
    ax.set_ylim(y_lo, y_hi)


def gap_figure(bs: BandStructure, report,
               energy_window_eV: tuple[float, float] | None = None, *,
               crossings: bool = False) -> Figure:
    """Exact bands with the gaps at free-electron degeneracies, predicted beside exact.

    The band plot of :func:`band_figure` (exact bands only) with :func:`annotate_gaps`: bars
    for the exact gaps, first-order ticks on the left and second-order (Löwdin) ticks on the
    right of each examined point, and a legend.

    Parameters
    ----------
    bs : BandStructure
        Exact bands along the same path and model as ``report``.
    report : bandpert.gaps.GapReport
    energy_window_eV : (float, float), optional
        Limits of the energy axis (relative energies).
    crossings : bool
        Also mark the crossings between labelled points.

    Returns
    -------
    matplotlib.figure.Figure
    """
    from matplotlib.lines import Line2D

    fig = band_figure(bs, energy_window_eV)
    ax = fig.axes[0]
    annotate_gaps(ax, report, bs.energy_zero_eV, crossings=crossings)
    handles = [
        Line2D([], [], color=EXACT_COLOUR, lw=1.3, label="exact bands"),
        Line2D([], [], color=EXACT_GAP_COLOUR, lw=2.4, alpha=0.75,
               label="exact gap at a degeneracy"),
        Line2D([], [], color=FIRST_ORDER_COLOUR, marker="_", ms=6, mew=1.2, lw=0.7,
               label="first order (V block)"),
        Line2D([], [], color=SECOND_ORDER_COLOUR, marker="_", ms=6, mew=1.2, lw=0.7,
               label="second order (Löwdin)"),
    ]
    ax.legend(handles=handles, fontsize=6, loc="best", framealpha=0.9,
              title="labels: exact (second-order) gap, eV", title_fontsize=6)
    ax.set_title(f"{bs.material.name}: gaps at free-electron degeneracies", fontsize=10)
    return fig


KP_STYLES = {"two-band": ("#9c6ade", ":"), "six-band": ("#e07a1f", "--"),
             "eight-band": ("#2a9d8f", "-")}


def kp_figure(title: str, source: str, bands_by_model: dict, exact: dict | None = None,
              exact_label: str = "") -> Figure:
    """k·p bands near Γ along several directions, one panel per direction.

    Parameters
    ----------
    title, source : str
        Figure title and the parameters' source (printed beneath).
    bands_by_model : dict
        Model name → {direction label → :class:`bandpert.kp.DirectionalBands`}.
    exact : dict, optional
        Direction label → (k in units of 2π/a, (n_k, n) energies from the valence top) of a
        plane-wave model, drawn as dots beside the k·p lines.
    exact_label : str
        Legend text of the exact bands.
    """
    directions = list(next(iter(bands_by_model.values())))
    fig = Figure(figsize=(3.0 * len(directions) + 0.6, 4.6), layout="constrained")
    axes = fig.subplots(1, len(directions), sharey=True)
    axes = np.atleast_1d(axes)
    for ax, name in zip(axes, directions, strict=True):
        for model, per_dir in bands_by_model.items():
            colour, style = KP_STYLES.get(model, ("0.3", "-"))
            db = per_dir[name]
            x = db.k_frac if db.k_frac is not None else db.k_invA
            lines = ax.plot(x, db.energies_eV, color=colour, ls=style, lw=1.2)
            lines[0].set_label(model)
            for line in lines[1:]:
                line.set_label("_nolegend_")
        if exact is not None and name in exact:
            kx, e = exact[name]
            step = max(1, len(kx) // 25)
            pts = ax.plot(kx[::step], e[::step], "o", ms=2.6, color=EXACT_COLOUR)
            pts[0].set_label(exact_label or "plane-wave (exact)")
            for p in pts[1:]:
                p.set_label("_nolegend_")
        ax.axhline(0.0, color="0.6", lw=0.6, ls="--", zorder=0)
        ax.set_title(f"Γ → {name}", fontsize=9)
        ax.set_xlabel("k (2π/a)")
        ax.set_xlim(0, None)
    all_kp = np.concatenate([db.energies_eV.ravel() for per_dir in bands_by_model.values()
                             for db in per_dir.values()])
    span = all_kp.max() - all_kp.min()
    axes[0].set_ylim(all_kp.min() - 0.08 * span, all_kp.max() + 0.08 * span)
    axes[0].set_ylabel("Energy − valence-band top (eV)")
    axes[-1].legend(fontsize=7, loc="best")
    fig.suptitle(title, fontsize=10)
    fig.text(0.01, 0.002, _wrap(f"Parameters: {source}"), fontsize=6, color="0.35", va="bottom")
    fig.get_layout_engine().set(rect=(0, 0.05, 1, 0.95))
    return fig


def fullzone_figure(bs: BandStructure, convergence, shown_index: int | None = None) -> Figure:
    """Full-zone k·p bands beside the exact ones, and their convergence with the basis.

    Parameters
    ----------
    bs : BandStructure
        Exact bands along the path.
    convergence : bandpert.physics.fullzone.KpConvergence
    shown_index : int, optional
        Which basis size to draw in the band panel (default: ``convergence.shown_index``, a
        truncated size whose error is visible beside the exact bands).
    """
    fig = Figure(figsize=(9.6, 4.4), layout="constrained")
    ax, ax_c = fig.subplots(1, 2, gridspec_kw={"width_ratios": [2.2, 1]})
    _draw_bands_panel(ax, bs, None)
    sizes = convergence.basis_sizes
    i = shown_index if shown_index is not None else convergence.shown_index
    x = bs.path.distance_invA
    e = convergence.energies_eV[i] - bs.energy_zero_eV
    lines = ax.plot(x, e, ls="--", lw=1.0, color=NONDEGENERATE_COLOUR)
    lines[0].set_label(f"full-zone k·p, {sizes[i]} Γ states")
    for line in lines[1:]:
        line.set_label("_nolegend_")
    ax.legend(fontsize=7, loc="upper right")
    ax.set_xlabel("Wave vector along the path")
    err = np.maximum(convergence.max_error_eV * 1e3, 1e-9)
    rms = np.maximum(convergence.rms_error_eV * 1e3, 1e-9)
    ax_c.loglog(sizes, err, "o-", color=SUBSPACE_COLOUR, label="largest error")
    ax_c.loglog(sizes, rms, "s--", color="0.4", label="rms error")
    ax_c.set_xticks(sizes, [str(n) for n in sizes])
    ax_c.xaxis.set_minor_locator(matplotlib.ticker.NullLocator())
    ax_c.set_xlabel("Γ states in the k·p basis")
    ax_c.set_ylabel("error along the path (meV)")
    ax_c.set_title("convergence", fontsize=9)
    ax_c.legend(fontsize=7)
    _footer(fig, bs)
    return fig


#: Panels of the sweep figure: title, y label, and which columns go in (by name pattern).
SWEEP_PANELS = (
    ("gaps", "gap (eV)", lambda n: n == "gap_eV" or n == "direct_gap_eV"
     or (n.startswith("gap_") and n.endswith("_eV"))),
    ("band edges", "energy (eV, absolute)", lambda n: n in ("valence_max_eV",
                                                            "conduction_min_eV")),
    ("levels at the points", "energy (eV, absolute)",
     lambda n: n.startswith(("lower_", "upper_")) and n.endswith("_eV")),
    ("edge positions", "k (reciprocal fractions)", lambda n: n.endswith("_frac")),
    ("conduction-band masses", "mass (m0)", lambda n: re.fullmatch(r"conduction_m\d", n)
     or n in ("conduction_dos_mass", "conduction_conductivity_mass")),
    ("valence-band masses", "mass (m0)", lambda n: re.fullmatch(r"valence_m\d", n)
     or n in ("valence_dos_mass", "valence_conductivity_mass")),
    ("valence Luttinger parameters", "γ", lambda n: n.startswith("valence_gamma")),
    ("basis", "plane waves", lambda n: n == "basis_size"),
    ("two-band k·p masses at Γ", "mass (m0)", lambda n: n.startswith("two_band_")),
    ("six-band k·p masses at Γ", "mass (m0)", lambda n: n.startswith("six_band_")),
    ("eight-band k·p masses at Γ", "mass (m0)", lambda n: n.startswith("eight_band_")),
)


def sweep_figure(result) -> Figure:
    """Each swept quantity against the first varied parameter, one panel per kind.

    With several varied keys, each quantity has one line per combination of the other keys
    (lighter for later combinations). Failed points leave gaps in the lines and a red cross
    on the parameter axis.
    """
    spec = result.spec
    x = result.values[:, 0]
    others = result.values[:, 1:]
    combos = np.unique(others, axis=0) if others.shape[1] else np.zeros((1, 0))
    panels = [(t, y, [n for n in result.columns if rule(n)]) for t, y, rule in SWEEP_PANELS]
    panels = [p for p in panels if p[2]]
    n_col = 2 if len(panels) > 1 else 1
    n_row = max(1, -(-len(panels) // n_col))
    fig = Figure(figsize=(5.2 * n_col, 3.1 * n_row))
    axes = fig.subplots(n_row, n_col, squeeze=False)
    if not panels:  # every point failed: say so rather than draw nothing
        axes[0, 0].text(0.5, 0.5, "no quantity could be computed at any point",
                        ha="center", va="center", transform=axes[0, 0].transAxes)
    failed = np.array([f.values[0] for f in result.failures]) if result.failures else None
    cycle = matplotlib.rcParams["axes.prop_cycle"].by_key()["color"]
    for ax, (title, ylabel, names) in zip(axes.flat, panels, strict=False):
        for j, name in enumerate(names):
            for c, combo in enumerate(combos):
                sel = np.all(others == combo, axis=1) if len(combo) else np.ones(len(x), bool)
                ax.plot(x[sel], result.columns[name][sel], "-o" if sel.sum() <= 60 else "-",
                        ms=2.5, lw=1.2,
                        color=cycle[j % len(cycle)], alpha=1.0 / (1 + 0.6 * c),
                        label=_sweep_label(name) if c == 0 else "_nolegend_")
        if failed is not None:
            ax.plot(failed, np.full(len(failed), ax.get_ylim()[0]), "x", color=UNTRUSTED_COLOUR,
                    ms=6, clip_on=False, label="failed point")
        ax.set_title(title, fontsize=10, loc="left")
        ax.set_ylabel(ylabel)
        ax.set_xlabel(spec.axes[0].key)
        ax.grid(alpha=0.3, lw=0.5)
        ax.legend(fontsize=7, ncol=2 if len(names) > 4 else 1, frameon=False)
    for ax in list(axes.flat)[len(panels):]:
        ax.set_visible(False)
    vca = " (virtual-crystal approximation)" if any(a.kind == "alloy" for a in spec.axes) else ""
    more = ("; one line per value of " + ", ".join(a.key for a in spec.axes[1:])
            if len(spec.axes) > 1 else "")
    fig.suptitle(f"{spec.source}: sweep of {spec.axes[0].key}{vca}", fontsize=11)
    fig.text(0.01, 0.005, _wrap(result.form_factor_note + more + f". {result.n_points} points, "
                                f"{len(result.failures)} failed."), fontsize=7, va="bottom")
    fig.tight_layout(rect=(0, 0.04, 1, 0.97))
    return fig


def _sweep_label(name: str) -> str:
    for prefix in ("two_band_", "six_band_", "eight_band_"):
        name = name.removeprefix(prefix)
    for suffix in ("_eV", "_frac", "_m0"):
        name = name.removesuffix(suffix)
    return name.replace("_", " ")


def dos_figure(result) -> Figure:
    """Density of states (filled below the Fermi level) and its integral, energies from the zero.
    """
    d = result.dos
    e = d.energies_eV - result.energy_zero_eV
    fig = Figure(figsize=(6.4, 5.6))
    ax, ax2 = fig.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": [2.2, 1]})
    ax.plot(e, d.dos_per_eV, color=EXACT_COLOUR, lw=1.1)
    if result.fermi_level_eV is not None:
        ef = result.fermi_level_eV - result.energy_zero_eV
        below = e <= ef
        ax.fill_between(e[below], 0, d.dos_per_eV[below], color=EXACT_COLOUR, alpha=0.18, lw=0)
        for a in (ax, ax2):
            a.axvline(ef, color=UNTRUSTED_COLOUR, lw=0.9, ls="--")
        ax.annotate(f"E_F = {result.fermi_level_eV:.3f} eV (absolute)",
                    (ef, ax.get_ylim()[1] * 0.92),
                    xytext=(4, 0), textcoords="offset points", fontsize=8,
                    color=UNTRUSTED_COLOUR)
    ax.set_ylabel("states / eV / cell")
    ax.set_ylim(bottom=0)
    ax2.plot(e, d.integrated, color=SUBSPACE_COLOUR, lw=1.1)
    ax2.set_ylabel("electrons / cell")
    ax2.set_xlabel(f"energy (eV) from the {result.energy_zero_kind}")
    for a in (ax, ax2):
        a.grid(alpha=0.3, lw=0.5)
    how = d.method + ("" if d.smearing_eV is None else f", σ = {d.smearing_eV:g} eV")
    mesh = "×".join(str(n) for n in result.mesh.shape)
    ax.set_title(f"{result.material.name}\n{how}, mesh {mesh} "
                 f"({len(result.mesh.k_frac)} irreducible points)", fontsize=10)
    fig.text(0.01, 0.005, _wrap(f"{result.basis_size} plane waves; the DOS is complete below "
                                f"{result.complete_below_eV - result.energy_zero_eV:.2f} eV "
                                "(the bottom of the highest band computed)."), fontsize=7,
             va="bottom")
    fig.tight_layout(rect=(0, 0.03, 1, 1))
    return fig
