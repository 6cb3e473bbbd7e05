"""Band figures along a path: exact bands, and exact beside perturbative with their validity."""

from __future__ import annotations

import numpy as np
from matplotlib.axes import Axes
from matplotlib.colors import ListedColormap
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from ...physics.bands import BandStructure
from ...physics.van_hove import PointCriticalPoints
from ...symmetry.labels import PointSymmetry
from .. import style
from ..energy_zero import zero_phrase
from .level_labels import draw_critical_points, draw_level_labels


def band_figure(bs: BandStructure, energy_window_eV: tuple[float, float] | None = None,
                level_labels: tuple[PointSymmetry, ...] = (),
                critical_points: tuple[PointCriticalPoints, ...] = ()) -> Figure:
    """The exact bands of ``bs`` along its path, energies from the energy zero.

    The energy zero is drawn as a dashed line; for a semiconductor the gap is shaded and the
    valence maximum and conduction minimum marked. The material's source is printed beneath.
    With perturbative bands in ``bs`` this is :func:`comparison_figure`.

    Parameters
    ----------
    bs : BandStructure
    energy_window_eV : (float, float), optional
        Limits of the energy axis (energies from the energy zero); default: all bands with a
        margin.
    level_labels : tuple of PointSymmetry, optional
        Symmetry labels written beside the levels at the labelled points
        (:func:`~bandpert.output.figures.level_labels.draw_level_labels`).
    critical_points : tuple of PointCriticalPoints, optional
        Van Hove types marked on the levels at the labelled points, with their legend
        (:func:`~bandpert.output.figures.level_labels.draw_critical_points`).

    Returns
    -------
    matplotlib.figure.Figure
    """
    if bs.perturbative is not None:
        return comparison_figure(bs, energy_window_eV, level_labels, critical_points)
    fig = style.new_figure(6.4, 4.8)
    ax = fig.subplots()
    draw_bands_panel(ax, bs, energy_window_eV)
    ax.set_xlabel("Wave vector along the path", fontsize=style.LABEL_SIZE)
    # 120 characters fit the 6.4-inch figure (130 left aluminium's note 2 px outside it)
    style.footer(fig, source_note(bs), width=120)
    _level_labels(ax, bs, level_labels, critical_points)
    return fig


def _level_labels(ax: Axes, bs: BandStructure, level_labels: tuple[PointSymmetry, ...],
                  critical_points: tuple[PointCriticalPoints, ...] = ()) -> None:
    """Van Hove markers, then symmetry labels beside the levels, drawn last so that they avoid
    every other text."""
    if critical_points:
        draw_critical_points(ax, bs.path.distance_invA, bs.path.label_indices, bs.path.labels,
                             bs.energy_zero_eV, critical_points)
    if level_labels:
        draw_level_labels(ax, bs.path.distance_invA, bs.path.label_indices, bs.path.labels,
                          bs.energy_zero_eV, level_labels, 9.0 if critical_points else 4.0)


def source_note(bs: BandStructure) -> str:
    """The note beneath a band figure: where the parameters come from, and the energy zero."""
    return (f"Parameters: {style.short_source(bs.material.source)}. Energy zero: "
            f"{zero_phrase(bs.energy_zero_kind, bs.energy_zero_eV)}.")


def draw_bands_panel(ax: Axes, bs: BandStructure,
                     energy_window_eV: tuple[float, float] | None,
                     *, gap_label: bool = True) -> None:
    """Exact bands, energy zero, shaded gap and band-edge markers on ``ax``."""
    x = bs.path.distance_invA
    e = bs.relative_energies_eV
    if bs.energies_eV is not None:
        style.draw_leg_lines(ax, x, e, bs.path.leg_starts, label="exact (diagonalisation)",
                             gid="band", color=style.EXACT_COLOUR, lw=1.3)
    style.draw_path_axes(ax, x, bs.path.label_indices, bs.path.labels)
    ax.axhline(0.0, color=style.REFERENCE_LINE_COLOUR, lw=0.8, ls="--", zorder=0)
    lo, hi = style.energy_limits(e, energy_window_eV)
    ax.set_ylim(lo, hi)
    if bs.edges is not None:
        g = bs.edges
        ec = g.conduction_min_eV - bs.energy_zero_eV
        ev = g.valence_max_eV - bs.energy_zero_eV
        ax.axhspan(ev, ec, color=style.GAP_COLOUR, alpha=0.25, lw=0, zorder=0)
        # the edge markers may sit on the frame: drawn unclipped so they stay whole
        ax.plot(x[g.valence_max_index], ev, "o", ms=5, color=style.VALENCE_EDGE_COLOUR,
                zorder=5, clip_on=not lo <= ev <= hi)
        ax.plot(x[g.conduction_min_index], ec, "o", ms=5, color=style.CONDUCTION_EDGE_COLOUR,
                zorder=5, clip_on=not lo <= ec <= hi)
        if gap_label and lo < (ev + ec) / 2 < hi:
            kind = "direct" if g.valence_max_index == g.conduction_min_index else "indirect"
            xc = x[g.conduction_min_index]
            ax.annotate("", xy=(xc, ec), xytext=(xc, ev),
                        arrowprops={"arrowstyle": "<->", "color": "0.25", "lw": 0.8})
            right = xc < x[0] + 0.6 * (x[-1] - x[0])
            ax.annotate(f"$E_g$ = {g.gap_eV:.2f} eV ({kind})", (xc, (ev + ec) / 2),
                        xytext=(5 if right else -5, 0), textcoords="offset points",
                        ha="left" if right else "right", va="center",
                        fontsize=style.ANNOTATION_SIZE, zorder=8,
                        bbox={"boxstyle": "round,pad=0.2", "fc": "white", "ec": "0.7",
                              "alpha": 0.9})
    style.energy_ticks(ax)
    style.style_axes(ax)
    ax.set_ylabel(style.energy_label(bs.energy_zero_kind), fontsize=style.LABEL_SIZE)
    ax.set_title(style.title(bs.material.name), fontsize=style.TITLE_SIZE)


def band_groups(bs: BandStructure) -> list[tuple[str, np.ndarray]]:
    """Bands gathered for the error panel: valence and conduction bands of a semiconductor,
    else at most four runs of consecutive bands.

    Returns
    -------
    list of (name, band indices)
    """
    n_b = bs.reference_energies_eV.shape[1]
    if bs.edges is not None:
        e = bs.reference_energies_eV[bs.edges.valence_max_index]
        n_v = int(np.sum(e <= bs.edges.valence_max_eV + 1e-9))
        if 0 < n_v < n_b:
            return [(f"valence (bands 1–{n_v})" if n_v > 1 else "valence (band 1)",
                     np.arange(n_v)),
                    (f"conduction (bands {n_v + 1}–{n_b})" if n_b - n_v > 1
                     else f"conduction (band {n_b})", np.arange(n_v, n_b))]
    size = max(1, -(-n_b // 4))
    groups = []
    for start in range(0, n_b, size):
        stop = min(n_b, start + size)
        name = f"band {start + 1}" if stop - start == 1 else f"bands {start + 1}–{stop}"
        groups.append((name, np.arange(start, stop)))
    return groups


def validity_states(bs: BandStructure) -> np.ndarray:
    """(n_k, n_bands) map states: 1 trusted, 0 not trusted, 2 undetermined.

    Undetermined are the points the perturbative result marks so (an ``undetermined`` mask,
    when the bands carry one) and, at the k-points where the convergence radius was computed,
    the bands whose radius is undetermined (NaN).
    """
    pb = bs.perturbative
    states = pb.trustworthy.astype(np.int8)
    und = getattr(pb, "undetermined", None)
    if und is not None:
        states[np.asarray(und, dtype=bool)] = 2
    radius = np.asarray(pb.convergence_radius, dtype=float)
    if radius.size:
        rows = np.asarray(pb.radius_k_indices, dtype=int)
        nan = np.isnan(radius)
        for r, k in enumerate(rows):
            states[k, nan[r]] = 2
    return states


def comparison_figure(bs: BandStructure,
                      energy_window_eV: tuple[float, float] | None = None,
                      level_labels: tuple[PointSymmetry, ...] = (),
                      critical_points: tuple[PointCriticalPoints, ...] = ()) -> Figure:
    """Perturbative bands beside exact bands, with the error panel and the validity map.

    Top: exact bands as lines; perturbative energies as markers (at most
    :data:`~bandpert.output.style.MAX_MARKERS_PER_BAND` per band), circles where the
    non-degenerate (Rayleigh–Schrödinger) series was used and diamonds where a subspace
    (Löwdin) treatment was used, filled blue where trustworthy and hollow orange where not.
    Middle: on a log scale in meV, per band group (:func:`band_groups`), the largest true
    error |E_pert − E_exact| (solid, when the exact bands were computed) and the largest error
    bound or estimate (dashed; gaps where it cannot vouch), with the tolerance. Bottom: the
    validity map, one row per band, blue where trustworthy, orange where not, grey where
    undetermined (:func:`validity_states`).

    Parameters
    ----------
    bs : BandStructure
        Must carry perturbative bands.
    energy_window_eV : (float, float), optional
        Energy limits of the top panel (energies from the energy zero).

    Returns
    -------
    matplotlib.figure.Figure
    """
    pb = bs.perturbative
    x = bs.path.distance_invA
    e_pert = pb.energies_eV - bs.energy_zero_eV
    n_k, n_b = e_pert.shape
    map_height = 0.3 + 0.075 * n_b
    fig = style.new_figure(8.2, 6.6 + map_height)
    ax, ax_err, ax_map = fig.subplots(3, 1, sharex=True,
                                      height_ratios=[3.4, 1.6, map_height])
    draw_bands_panel(ax, bs, energy_window_eV)
    stride = style.marker_stride(n_k)
    xs = np.broadcast_to(x[:, None], e_pert.shape)
    sub = np.zeros(e_pert.shape, dtype=bool)
    sub[::stride] = True
    sub[-1] = True
    lo, hi = ax.get_ylim()
    sub &= (e_pert >= lo) & (e_pert <= hi)
    for code, marker, name in ((0, "o", "non-degenerate (Rayleigh–Schrödinger)"),
                               (1, "D", "subspace (Löwdin)")):
        for trusted, colour, suffix in ((True, style.TRUSTED_COLOUR, "trustworthy"),
                                        (False, style.UNTRUSTED_COLOUR, "not trustworthy")):
            m = sub & (pb.treatment == code) & (pb.trustworthy == trusted)
            if m.any():
                ax.scatter(xs[m], e_pert[m], s=14 if code == 0 else 11, marker=marker,
                           facecolors=colour if trusted else "white", edgecolors=colour,
                           linewidths=0.8, zorder=4, label=f"{name},\n{suffix}")
    style.legend_outside(ax, title=f"order {pb.settings.order} perturbative"
                         + (f" (one k-point in {stride})" if stride > 1 else ""))
    _error_panel(ax_err, bs)
    _validity_map(ax_map, bs)
    ax.tick_params(labelbottom=False)
    ax_err.tick_params(labelbottom=False)
    style.draw_path_axes(ax_map, x, bs.path.label_indices, bs.path.labels)
    ax_map.set_xlabel("Wave vector along the path", fontsize=style.LABEL_SIZE)
    style.footer(fig, source_note(bs))
    _level_labels(ax, bs, level_labels, critical_points)
    return fig


def _error_panel(ax: Axes, bs: BandStructure) -> None:
    pb = bs.perturbative
    x = bs.path.distance_invA
    tol_meV = pb.settings.tolerance_eV * 1e3
    # a proven bound, where the bands carry one, else the estimate; where it cannot vouch
    # (infinite) nothing is drawn
    bound = getattr(pb, "error_bound_eV", None)
    est_name = "error estimate" if bound is None else "proven error bound"
    est = np.asarray(pb.error_estimate_eV if bound is None else bound, dtype=float) * 1e3
    est = np.where(np.isfinite(est), est, np.nan)
    true = None if bs.comparison is None else bs.comparison.abs_error_eV * 1e3
    shown = [v[np.isfinite(v) & (v > 0)] for v in (est, true) if v is not None]
    values = np.concatenate(shown) if shown else np.array([tol_meV])
    if values.size == 0:
        values = np.array([tol_meV])
    # the axis starts at the smallest error worth reading: the 2nd percentile of the errors,
    # but never below a hundredth of the tolerance, and at least a decade under it
    floor = max(np.percentile(values, 2), tol_meV * 1e-2)
    floor = min(10.0 ** np.floor(np.log10(floor)), 10.0 ** (np.floor(np.log10(tol_meV)) - 1))
    top = 10.0 ** np.ceil(np.log10(max(values.max(), tol_meV) * 1.5))
    handles = []
    for i, (name, bands) in enumerate(band_groups(bs)):
        colour = style.GROUP_COLOURS[i % len(style.GROUP_COLOURS)]
        ax.plot(x, np.clip(np.fmax.reduce(est[:, bands], axis=1), floor, top), ls="--", lw=1.0,
                color=colour)
        if true is not None:
            ax.plot(x, np.clip(true[:, bands].max(axis=1), floor, top), ls="-", lw=1.2,
                    color=colour)
        handles.append(Patch(color=colour, label=name))
    ax.axhline(tol_meV, color=style.WARNING_COLOUR, lw=0.9, ls=":")
    if true is not None:
        handles.append(Line2D([], [], color="0.2", lw=1.2, ls="-",
                              label="|perturbative − exact|\n(largest in the group)"))
    handles.append(Line2D([], [], color="0.2", lw=1.0, ls="--",
                          label=f"{est_name}\n(largest in the group)"))
    handles.append(Line2D([], [], color=style.WARNING_COLOUR, lw=0.9, ls=":",
                          label=f"tolerance {tol_meV:g} meV"))
    ax.set_yscale("log")
    ax.set_ylim(floor, top)
    ax.set_ylabel("error (meV)", fontsize=style.LABEL_SIZE)
    style.style_axes(ax)
    for xv in x[bs.path.label_indices][1:-1]:
        ax.axvline(xv, color=style.GUIDE_COLOUR, lw=0.6, zorder=0)
    style.legend_outside(ax, handles)


def _validity_map(ax: Axes, bs: BandStructure) -> None:
    pb = bs.perturbative
    x = bs.path.distance_invA
    n_b = pb.energies_eV.shape[1]
    states = validity_states(bs)
    edges_x = np.concatenate([[x[0]], (x[1:] + x[:-1]) / 2, [x[-1]]])
    cmap = ListedColormap([style.UNTRUSTED_COLOUR, style.TRUSTED_COLOUR,
                           style.UNDETERMINED_COLOUR])
    ax.pcolormesh(edges_x, np.arange(n_b + 1) + 0.5, states.T.astype(float), cmap=cmap,
                  vmin=-0.5, vmax=2.5, shading="flat")
    ax.set_ylim(0.5, n_b + 0.5)
    ax.set_yticks(np.arange(1, n_b + 1))
    step = 1 if n_b <= 12 else -(-n_b // 12)
    ax.set_yticklabels([str(b) if (b - 1) % step == 0 else "" for b in range(1, n_b + 1)])
    ax.tick_params(axis="y", labelsize=style.TICK_SIZE - 1.5, length=2)
    ax.tick_params(axis="x", labelsize=style.TICK_SIZE)
    ax.set_ylabel("band", fontsize=style.LABEL_SIZE - 1)
    share = float(pb.trustworthy.mean() * 100)
    head = ("validity map: no point trustworthy" if not pb.trustworthy.any() else
            f"validity map: trustworthy on {share:.0f} % of (band, k) points")
    ax.set_title(head, fontsize=style.LABEL_SIZE - 1, loc="left")
    for xv in x[bs.path.label_indices][1:-1]:
        ax.axvline(xv, color="white", lw=0.8)
    handles = [Patch(color=style.TRUSTED_COLOUR, label="trustworthy"),
               Patch(color=style.UNTRUSTED_COLOUR, label="not trustworthy")]
    if (states == 2).any():
        handles.append(Patch(color=style.UNDETERMINED_COLOUR, label="undetermined"))
    style.legend_outside(ax, handles)
