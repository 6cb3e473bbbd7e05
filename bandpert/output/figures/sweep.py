"""The sweep figure: each swept quantity against the first varied parameter."""

from __future__ import annotations

import re

import numpy as np
from matplotlib.figure import Figure
from matplotlib.ticker import MaxNLocator

from .. import style
from ..sweep_report import sweep_columns

#: Panels of the sweep figure: title, y label, and which columns go in (by name pattern).
SWEEP_PANELS = (
    ("gaps", "gap (eV)", lambda n: n == "gap_eV" or n == "direct_gap_eV"
     or (n.startswith("gap_") and n.endswith("_eV"))),
    ("band edges", "{energy}", lambda n: n in ("valence_max_eV", "conduction_min_eV")),
    ("levels at the points", "{energy}",
     lambda n: n.startswith(("lower_", "upper_")) and n.endswith("_eV")
     and not n.endswith("_absolute_eV")),
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

#: Words for the keys a sweep commonly varies: (label, factor applied to the values).
KEY_WORDS = {"lattice.a_A": ("lattice constant (Å)", 1.0),
             "lattice.c_A": ("lattice constant c (Å)", 1.0),
             "alloy.x": ("alloy fraction x", 1.0),
             "strain.hydrostatic": ("hydrostatic strain (%)", 100.0)}


def parameter_axis(key: str) -> tuple[str, float]:
    """Axis label in words with units for a varied key, and the factor for its values.

    Strains are shown in per cent; a key ending in a unit suffix (``_A``, ``_eV``) gets the
    unit in brackets.
    """
    if key in KEY_WORDS:
        return KEY_WORDS[key]
    if key.startswith("strain."):
        comp = key.split(".", 1)[1]
        return f"strain ε$_{{{comp}}}$ (%)", 100.0
    m = re.fullmatch(r"potential\.coefficients\[(\d+)\]\.value", key)
    if m:
        return f"Fourier coefficient {int(m.group(1)) + 1} of the potential (file unit)", 1.0
    for suffix, unit in (("_eV", "eV"), ("_A", "Å"), ("_invA", "Å⁻¹"), ("_m0", "m0"),
                         ("_K", "K")):
        if key.endswith(suffix):
            return f"{key.removesuffix(suffix).replace('_', ' ')} ({unit})", 1.0
    return key, 1.0


def level_axis_label(result) -> str:
    """The y label of energy levels in a sweep: from each point's own energy zero."""
    kinds = [k for k in dict.fromkeys(result.text.get("energy_zero", [])) if k]
    if kinds == ["absolute"]:
        return "energy (eV, model zero)"
    if len(kinds) == 1:
        return f"energy − {style.ZERO_NAMES.get(kinds[0], kinds[0])} (eV)"
    return "energy − each point's zero (eV)"


def _constant(v: np.ndarray) -> bool:
    good = v[np.isfinite(v)]
    return good.size > 0 and np.ptp(good) <= 1e-9 * max(1.0, float(np.abs(good).max()))


def sweep_figure(result) -> Figure:
    """Each swept quantity against the first varied parameter, one panel per kind.

    With several varied keys, each quantity has one line per combination of the other keys
    (lighter for later combinations). Lines are told apart by colour, then line style and
    marker (:data:`~bandpert.output.style.PALETTE`, ``LINE_STYLES``, ``MARKERS``), so more
    than ten stay distinguishable. A panel whose quantities do not change over the sweep is
    left out and its values are stated in the note beneath. Failed points leave gaps in the
    lines and a red cross on the parameter axis.

    Parameters
    ----------
    result : bandpert.runs.sweep.SweepResult

    Returns
    -------
    matplotlib.figure.Figure
    """
    spec = result.spec
    columns = sweep_columns(result)
    energy_label = level_axis_label(result)
    xlabel, factor = parameter_axis(spec.axes[0].key)
    x = result.values[:, 0] * factor
    others = result.values[:, 1:]
    combos = np.unique(others, axis=0) if others.shape[1] else np.zeros((1, 0))
    constant_notes = []
    panels = []
    for title, ylabel, rule in SWEEP_PANELS:
        ylabel = ylabel.format(energy=energy_label)
        names = [n for n in columns if rule(n)]
        if not names:
            continue
        if result.n_points > 1 and all(_constant(columns[n]) for n in names):
            values = ", ".join(f"{_sweep_label(n)} {_first(columns[n]):.6g}"
                               for n in names[:4])
            constant_notes.append(f"Constant over the sweep: {title} ({values}"
                                  + (", …" if len(names) > 4 else "") + ")")
            continue
        panels.append((title, ylabel, names))
    if not panels:  # everything constant: still draw the first panel
        panels = [(t, y.format(energy=energy_label), [n for n in columns if r(n)])
                  for t, y, r in SWEEP_PANELS if any(r(n) for n in columns)][:1]
    n_col = 2 if len(panels) > 1 else 1
    n_row = max(1, -(-len(panels) // n_col))
    fig = style.new_figure(6.6 * n_col, 2.9 * n_row + 1.0)
    axes = fig.subplots(n_row, n_col, squeeze=False)
    if not panels:  # every point failed: say so rather than draw nothing
        axes[0, 0].text(0.5, 0.5, "no quantity could be computed at any point",
                        ha="center", va="center", transform=axes[0, 0].transAxes,
                        fontsize=style.LABEL_SIZE)
    failed = (np.array([f.values[0] for f in result.failures]) * factor if result.failures
              else None)
    dense = result.n_points > 60
    for ax, (title, ylabel, names) in zip(axes.flat, panels, strict=False):
        for j, name in enumerate(names):
            colour = style.PALETTE[j % len(style.PALETTE)]
            ls = style.LINE_STYLES[(j // len(style.PALETTE)) % len(style.LINE_STYLES)]
            marker = None if dense else style.MARKERS[j % len(style.MARKERS)]
            for c, combo in enumerate(combos):
                sel = np.all(others == combo, axis=1) if len(combo) else np.ones(len(x), bool)
                ax.plot(x[sel], columns[name][sel], ls=ls, marker=marker, ms=3.2,
                        lw=1.2, color=colour, alpha=1.0 / (1 + 0.6 * c),
                        label=_sweep_label(name) if c == 0 else "_nolegend_")
        if failed is not None:
            ax.plot(failed, np.full(len(failed), ax.get_ylim()[0]), "x",
                    color=style.WARNING_COLOUR, ms=6, clip_on=False, label="failed point")
        ax.set_title(title, fontsize=style.LABEL_SIZE, loc="left")
        ax.set_ylabel(ylabel, fontsize=style.LABEL_SIZE)
        ax.set_xlabel(xlabel, fontsize=style.LABEL_SIZE)
        ax.xaxis.set_major_locator(MaxNLocator(nbins=5, steps=[1, 2, 2.5, 5, 10]))
        style.style_axes(ax, grid=True)
        style.legend_outside(ax, ncol=2 if len(names) > 8 else 1)
    for ax in list(axes.flat)[max(1, len(panels)):]:
        ax.set_visible(False)
    vca = " (virtual-crystal approximation)" if any(a.kind == "alloy" for a in spec.axes) else ""
    name = spec.document.get("name") or spec.source
    fig.suptitle(style.title(f"{name}: sweep of the {xlabel.split(' (')[0]}{vca}"),
                 fontsize=style.TITLE_SIZE)
    more = ("One line per value of " + ", ".join(a.key for a in spec.axes[1:]) + ". "
            if len(spec.axes) > 1 else "")
    zero = ""
    if any(t.startswith(("band edges", "levels")) for t, _, _ in panels):
        zero = ("Energy levels from each point's own energy zero (absolute values in the CSV "
                "and JSON)." if energy_label != "energy (eV, model zero)" else "")
    note = " ".join(s for s in (result.form_factor_note.rstrip(".") + "." if
                                result.form_factor_note else "", zero, more,
                                "; ".join(constant_notes) + ("." if constant_notes else ""),
                                f"{result.n_points} points, {len(result.failures)} failed.")
                    if s)
    style.footer(fig, note, width=int(19 * 6.6 * n_col))
    return fig


def _first(v: np.ndarray) -> float:
    good = v[np.isfinite(v)]
    return float(good[0]) if good.size else float("nan")


def _sweep_label(name: str) -> str:
    for prefix in ("two_band_", "six_band_", "eight_band_"):
        name = name.removeprefix(prefix)
    for suffix in ("_eV", "_frac", "_m0"):
        name = name.removesuffix(suffix)
    return name.replace("_", " ")
