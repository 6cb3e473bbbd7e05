"""Figures of every command, built small (few k-points) for the text-layout tests.

Each builder returns a :class:`matplotlib.figure.Figure` drawn the way the command draws it.
``python tests/figure_cases.py DIR`` writes them all as PNG files for a look.
"""

from __future__ import annotations

import dataclasses
import sys
from pathlib import Path

import numpy as np
from conftest import MATERIALS, bundled, make_material

from bandpert.crystal.lattice import standard_path
from bandpert.input.kp_file import load_kp_material
from bandpert.input.material import Material, read_toml_document
from bandpert.kp import material_model
from bandpert.kp.bands import bands_along, bands_along_path
from bandpert.output import figures
from bandpert.physics.bands import compute_band_structure
from bandpert.physics.fullzone import kp_convergence
from bandpert.physics.nfe_gaps import gap_analysis
from bandpert.physics.perturbative_bands import PerturbationSettings
from bandpert.physics.van_hove import label_and_classify
from bandpert.runs.execution import SERIAL
from bandpert.runs.mesh_dos import compute_dos
from bandpert.runs.sweep import prepare, run_sweep
from bandpert.runs.sweep_spec import parse_axis
from bandpert.symmetry import label_points


def own_crystal() -> Material:
    """A bcc crystal of the tests' own with a strong local potential (two Fourier shells)."""
    return make_material({"type": "bcc", "a_A": 3.3}, [{"species": "X", "position": [0, 0, 0]}],
                         {"form": "fourier", "unit": "eV", "coefficients": [
                             {"miller": [1, 1, 0], "value": -1.2},
                             {"miller": [2, 0, 0], "value": 0.6}]},
                         electrons={"valence": 2})


def long_named(m: Material) -> Material:
    """The material under a name of 130 characters (the titles that carry it must wrap)."""
    return dataclasses.replace(m, name=f"{m.name}: a name long enough to run past both edges "
                                       "of every figure whose title carries it, unless it wraps")


def bands_exact(m: Material, n_k: int = 30, window=None):
    return figures.band_figure(compute_band_structure(m, n_k=n_k), window)


def bands_labelled(m: Material, n_k: int = 30, window=None, comparison: bool = False):
    """A band figure with the symmetry labels beside the levels (as ``bandpert bands``)."""
    bs = compute_band_structure(
        m, n_k=n_k, perturbation=PerturbationSettings(radius_points=4) if comparison else None)
    labels = label_points(m, bs.k_centred.cutoff_eV, standard_path(m)[0], bs.n_bands,
                          model=bs.k_centred)
    return figures.band_figure(bs, window, labels)


def bands_van_hove(m: Material, n_k: int = 30, window=None, comparison: bool = False):
    """A band figure with labels and van Hove markers (``bandpert bands --van-hove-marks``)."""
    bs = compute_band_structure(
        m, n_k=n_k, perturbation=PerturbationSettings(radius_points=4) if comparison else None)
    labels, critical = label_and_classify(m, bs.k_centred.cutoff_eV, standard_path(m)[0],
                                          bs.n_bands, model=bs.k_centred)
    return figures.band_figure(bs, window, labels, critical)


def bands_comparison(m: Material, n_k: int = 30, window=None):
    bs = compute_band_structure(m, n_k=n_k, perturbation=PerturbationSettings(radius_points=4))
    return figures.band_figure(bs, window)


def gaps(m: Material, n_k: int = 30, crossings: bool = False, cutoff_eV: float | None = None):
    bs = compute_band_structure(m, n_k=n_k, cutoff_eV=cutoff_eV)
    report = gap_analysis(m, model=bs.model, n_bands=bs.n_bands, crossings=crossings)
    return figures.gap_figure(bs, report)


def kp(name: str = "gallium-arsenide", window=None):
    kpm = load_kp_material(name)
    dirs = {"[001]": "001", "[110]": "110", "[111]": "111"}
    plotted = {name: {label: bands_along(material_model(kpm, name), d, k_max_frac=0.1, n_k=41)
                      for label, d in dirs.items()} for name in kpm.models}
    return figures.kp_figure(kpm.name, kpm.source, plotted, energy_window_eV=window)


def kp_path(name: str = "gallium-arsenide", window=None):
    kpm = load_kp_material(name)
    b = bands_along_path([material_model(kpm, n) for n in kpm.models], kpm.a_A)
    return figures.kp_path_figure(b, kpm.name, kpm.source, window)


def fullzone(m: Material, n_k: int = 30):
    bs = compute_band_structure(m, n_k=n_k)
    conv = kp_convergence(bs.model, np.zeros(m.dimension), bs.path.k_cart_invA, bs.n_bands,
                          (10, 20), exact_eV=bs.energies_eV)
    return figures.fullzone_figure(bs, conv)


def sweep(stem: str, vary: tuple[str, ...], quantities=("edges", "gaps"), n_k: int = 12,
          **options):
    path = MATERIALS / f"{stem}.toml"
    spec, _, note = prepare(read_toml_document(path), str(path),
                            tuple(parse_axis(v) for v in vary), quantities=quantities, n_k=n_k,
                            **options)
    return figures.sweep_figure(run_sweep(spec, SERIAL, None, note))


def dos(m: Material, mesh: int = 6, method: str = "tetrahedron", smearing_eV: float = 0.05):
    return figures.dos_figure(compute_dos(m, mesh, method=method, smearing_eV=smearing_eV,
                                          energy_step_eV=0.02))


def all_cases() -> dict:
    """Name → zero-argument builder of every command's figure on a few crystals."""
    own = own_crystal
    return {
        **subband_cases(),
        "bands-silicon": lambda: bands_exact(bundled("silicon")),
        "bands-own": lambda: bands_exact(own()),
        "bands-labelled-silicon": lambda: bands_labelled(bundled("silicon")),
        "bands-van-hove-gaas": lambda: bands_van_hove(bundled("gallium-arsenide")),
        # spin–orbit and nonlocal terms: Kramers pairs, double-group labels
        "bands-van-hove-germanium-fitted": lambda: bands_van_hove(
            bundled("germanium-fitted"), n_k=16, window=(-4.0, 4.0)),
        "bands-van-hove-aluminium-window": lambda: bands_van_hove(bundled("aluminium"),
                                                                  window=(-2.0, 8.0)),
        "comparison-van-hove-silicon": lambda: bands_van_hove(bundled("silicon"),
                                                              comparison=True),
        "bands-labelled-gaas": lambda: bands_labelled(bundled("gallium-arsenide")),
        "bands-labelled-germanium-window": lambda: bands_labelled(bundled("germanium"),
                                                                  window=(-4.0, 4.0)),
        "comparison-labelled-silicon": lambda: bands_labelled(bundled("silicon"),
                                                              comparison=True),
        "comparison-silicon": lambda: bands_comparison(bundled("silicon")),
        "comparison-aluminium": lambda: bands_comparison(bundled("aluminium")),
        "comparison-chain": lambda: bands_comparison(bundled("cosine-chain"), 60),
        "comparison-own": lambda: bands_comparison(own()),
        # spinor plane waves with spin-orbit and nonlocal terms, perturbative beside exact
        "comparison-silicon-fitted": lambda: bands_comparison(bundled("silicon-fitted"), 20),
        # a material name longer than a figure is wide (gallium-arsenide-fitted's is 102
        # characters): the title wraps instead of running past both edges
        "comparison-long-name": lambda: bands_comparison(long_named(bundled("silicon")), 20),
        "dos-long-name": lambda: dos(long_named(bundled("silicon"))),
        # a small basis keeps the gap search fast; the layout is what is tested
        "gaps-silicon": lambda: gaps(bundled("silicon"), cutoff_eV=60.0),
        "gaps-gaas": lambda: gaps(bundled("gallium-arsenide"), cutoff_eV=60.0),
        "gaps-own": lambda: gaps(own(), crossings=True),
        "gaps-silicon-fitted": lambda: gaps(bundled("silicon-fitted"), cutoff_eV=60.0),
        "kp-gaas": lambda: kp("gallium-arsenide"),
        "kp-inp": lambda: kp("indium-phosphide"),
        "kp-path-gaas": lambda: kp_path("gallium-arsenide"),
        "kp-path-inp": lambda: kp_path("indium-phosphide"),
        "fullzone-chain": lambda: fullzone(bundled("cosine-chain")),
        "fullzone-own": lambda: fullzone(own()),
        "sweep-silicon": lambda: sweep("silicon", ("lattice.a_A=5.3:5.5:3",)),
        "sweep-chain": lambda: sweep("cosine-chain",
                                     ("potential.coefficients[0].value=0.2:2.0:4",),
                                     ("gaps",), 12, lower_band=1),
        "dos-aluminium": lambda: dos(bundled("aluminium")),
        "dos-silicon": lambda: dos(bundled("silicon"), method="gaussian", smearing_eV=0.01),
        "dos-own": lambda: dos(own()),
    }


# --- heterostructure figures (bandpert subbands): the profile and the in-plane dispersion ------

def _well_structure():
    from bandpert.input.structure_file import parse_structure

    barrier = {"alloy": "aluminium-gallium-arsenide", "x": 0.3, "thickness_nm": 6.0}
    return parse_structure({"name": "GaAs/Al0.3Ga0.7As 8 nm well", "source": "the tests' own",
                            "layers": [barrier, {"material": "gallium-arsenide",
                                                 "thickness_nm": 8.0}, barrier]}, "well.toml")


def subband_cases() -> dict:
    """The subbands command's two figures on a small well (0.2 nm grid, few k∥)."""
    from bandpert.heterostructure import compute_subbands, in_plane_dispersion
    from bandpert.output.figures.subband_dispersion import dispersion_figure
    from bandpert.output.figures.subbands import subband_figure

    return {
        "subbands-profile-eight-band": lambda: subband_figure(
            compute_subbands(_well_structure(), 0.2, 3, "eight-band")),
        "subbands-profile-four-band": lambda: subband_figure(
            compute_subbands(_well_structure(), 0.2, 3, "four-band")),
        "subbands-in-plane-eight-band": lambda: dispersion_figure(
            in_plane_dispersion(_well_structure(), "eight-band", 0.04, 6, 3, 0.2)),
        "subbands-in-plane-four-band": lambda: dispersion_figure(
            in_plane_dispersion(_well_structure(), "four-band", 0.04, 6, 4, 0.2)),
    }


def text_problems(fig) -> list[str]:
    """Pairs of overlapping text labels, and labels that leave the figure (none is allowed).

    Every visible text is measured by matplotlib's renderer
    (:func:`bandpert.output.style.text_boxes`): tick labels, axis labels, titles, legend
    entries, annotations and notes. A 0.5-pixel tolerance absorbs rounding.
    """
    from bandpert.output.style import text_boxes

    boxes = text_boxes(fig)
    w, h = fig.canvas.get_width_height()
    problems = []
    for t, b in boxes:
        if b.x0 < -0.5 or b.y0 < -0.5 or b.x1 > w + 0.5 or b.y1 > h + 0.5:
            problems.append(f"{t.get_text()!r} leaves the figure ({b.bounds} in {w}×{h})")
    for i, (t1, b1) in enumerate(boxes):
        for t2, b2 in boxes[i + 1:]:
            dx = min(b1.x1, b2.x1) - max(b1.x0, b2.x0)
            dy = min(b1.y1, b2.y1) - max(b1.y0, b2.y0)
            if dx > 0.5 and dy > 0.5:
                problems.append(f"{t1.get_text()!r} overlaps {t2.get_text()!r}")
    return problems


if __name__ == "__main__":
    out = Path(sys.argv[1] if len(sys.argv) > 1 else "figs")
    out.mkdir(exist_ok=True)
    only = sys.argv[2:]
    for name, build in all_cases().items():
        if only and not any(o in name for o in only):
            continue
        fig = build()
        fig.savefig(out / f"{name}.png", dpi=110)
        print("wrote", out / f"{name}.png", *text_problems(fig), sep="\n  ")
