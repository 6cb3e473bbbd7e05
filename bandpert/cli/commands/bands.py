"""``bandpert bands``: bands along the path, exact and perturbative side by side."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import numpy as np
import typer
from rich.markup import escape
from rich.table import Table

from ...crystal.lattice import describe_position, standard_path
from ...errors import InputError
from ...input.file_kind import file_kind
from ...input.material import load_material
from ...io import write_csv, write_json, write_table
from ...output.energy_zero import zero_phrase
from ...output.figures import band_figure
from ...output.report import (
    band_structure_results,
    band_structure_table,
    document,
    perturbative_table,
    with_k_labels,
)
from ...output.symmetry_report import symmetry_results, symmetry_rows
from ...perturbation import DEFAULT_COUPLING_THRESHOLD
from ...physics.bands import compute_band_structure
from ...physics.perturbative_bands import (
    DEFAULT_RADIUS_POINTS,
    DEFAULT_TOLERANCE_EV,
    TOLERANCE_RANGE_EV,
    PerturbationSettings,
)
from ...physics.van_hove import label_and_classify
from ...planewave.solver import SOLVERS
from ...symmetry.labels import unlabelled_reason
from ..options import (
    DEFAULT_OUT,
    CutoffOption,
    EMaxOption,
    EMinOption,
    FermiMeshOption,
    FormatOption,
    ImageFormat,
    MaterialFile,
    PlotCsvJsonDir,
    check_count,
    check_fermi_mesh,
    energy_window,
    json_option,
    name_option,
    out,
    output_base,
    output_paths,
    progress_bar,
    save_figure,
)
from .kp_bands import kp_bands


def _check_range(value: float, name: str, lo: float, hi: float) -> None:
    """Refuse a setting outside ``[lo, hi]`` (``name`` is the flag; NaN is refused too)."""
    if not lo <= value <= hi:
        raise InputError(f"expected a value from {lo:g} to {hi:g}, got {value:g}", key=name)


def bands(
    file: MaterialFile,
    out_dir: PlotCsvJsonDir = DEFAULT_OUT,
    k_points: Annotated[int, typer.Option("--k-points", help="Number of k-points along the path.")]
    = 200,
    n_bands: Annotated[int | None, typer.Option("--bands", help="Number of bands (default: the "
                                                "file's basis.bands, else occupied + 4).",
                                                show_default=False)] = None,
    cutoff_eV: CutoffOption = None,
    fermi_mesh: FermiMeshOption = None,
    image_format: FormatOption = ImageFormat.png,
    json_path: Annotated[Path | None, json_option("bands")] = None,
    name: Annotated[str | None, name_option("<file>-bands; with --exact-only "
                                            "<file>-exact-bands; with --no-exact "
                                            "<file>-perturbative-bands")] = None,
    e_min: EMinOption = None,
    e_max: EMaxOption = None,
    order: Annotated[int, typer.Option("--order", help="Perturbation order in λ (1 to 6).")]
    = 2,
    threshold: Annotated[float, typer.Option("--threshold", help="Coupling ratio |V_mn|/|E_m−E_n| "
                                             "above which levels are treated together in a "
                                             "subspace (Löwdin), 0.05 to 0.45.")]
    = DEFAULT_COUPLING_THRESHOLD,
    tolerance_meV: Annotated[float, typer.Option("--tolerance-meV", help="A point is trustworthy "
                                                 "when its proven error bound is below this "
                                                 "(0.01 to 1000).")]
    = DEFAULT_TOLERANCE_EV * 1e3,
    radius_points: Annotated[int, typer.Option("--radius-points", help="k-points at which the "
                                               "convergence radius in λ is computed (0: none).")]
    = DEFAULT_RADIUS_POINTS,
    no_exact: Annotated[bool, typer.Option("--no-exact", metavar="",
                                           help="Skip the exact diagonalisation "
                                           "(perturbative bands only, no comparison).")] = False,
    exact_only: Annotated[bool, typer.Option("--exact-only", metavar="",
                                             help="Skip the perturbative bands.")]
    = False,
    mark_critical: Annotated[bool, typer.Option(
        "--van-hove-marks", metavar="",
        help="Mark the van Hove type of each level at the labelled points on the figure "
             "(M0 minimum, M1/M2 saddle, M3 maximum, crossing); JSON and table carry it "
             "always.")] = False,
    solver: Annotated[str, typer.Option("--solver", metavar="auto|dense|iterative",
                                        help="Eigensolver of the exact bands: auto "
                                        "(iterative from 1000 plane waves for local spinless "
                                        "models, else LAPACK), dense (LAPACK) or iterative "
                                        "(warm-started LOBPCG, potential by FFT).")]
    = "auto",
) -> None:
    """Bands along the Brillouin-zone path, exact and perturbative side by side.

    Writes the plot, a CSV of the bands (and one of the perturbative bands) and the JSON, and
    prints a short summary: space group, basis, energy zero, gap and band edges, and how much
    of the path perturbation theory can be trusted on.
    """

    check_count(k_points, "--k-points", 2)
    if file_kind(file) == "kp":  # a k·p parameter file: its models' bands along a path near Γ
        return kp_bands(file, out_dir, name, image_format, json_path, e_min, e_max)
    check_count(n_bands, "--bands", 1)
    if cutoff_eV is not None and not cutoff_eV > 0:
        raise InputError(f"must be positive, got {cutoff_eV}", key="--cutoff-eV")
    if no_exact and exact_only:
        raise InputError("--no-exact and --exact-only leave nothing to compute; give one",
                         key="--no-exact")
    # order and threshold are checked by PerturbationSettings (its keys map to the flags); the
    # tolerance here, in the unit of the flag
    _check_range(tolerance_meV, "--tolerance-meV", *(1e3 * t for t in TOLERANCE_RANGE_EV))
    settings_p = None if exact_only else PerturbationSettings(
        order=order, coupling_threshold=threshold, tolerance_eV=tolerance_meV * 1e-3,
        radius_points=radius_points)
    if solver not in SOLVERS:
        raise InputError(f"expected one of {', '.join(SOLVERS)}, got {solver!r}", key="--solver")
    window = energy_window(e_min, e_max)
    material = load_material(file)
    if solver == "iterative" and (material.spin_orbit or material.nonlocal_terms):
        raise InputError("the iterative solver takes local spinless models only; expected "
                         "--solver dense or auto for a material with spin-orbit or nonlocal "
                         "terms", key="--solver")
    check_fermi_mesh(fermi_mesh, material.dimension)
    with progress_bar("diagonalising") as progress:
        bs = compute_band_structure(material, n_k=k_points, n_bands=n_bands, cutoff_eV=cutoff_eV,
                                    progress=progress, fermi_mesh=fermi_mesh,
                                    exact=not no_exact,
                                    perturbation=settings_p, solver=solver)
    settings = {"k_points": len(bs.path.k_frac), "bands": bs.n_bands,
                "cutoff_eV": bs.model.basis.cutoff_eV, "basis_size": bs.model.size,
                "real_hamiltonian": bs.model.is_real, "fermi_mesh": bs.fermi_mesh,
                "solver": bs.solver, "exact": not no_exact,
                "perturbative": not exact_only}
    labels, critical = label_and_classify(material, bs.model.basis.cutoff_eV,
                                          standard_path(material)[0], bs.n_bands,
                                          model=bs.k_centred)
    results = band_structure_results(bs)
    results["irreps"] = symmetry_results(labels, bs.energy_zero_eV, unlabelled_reason(material),
                                         critical)
    doc = document("bands", material, settings, results)
    header, cols, rows = band_structure_table(bs)
    fig = band_figure(bs, window, labels, critical if mark_critical else ())
    mode = "exact-" if exact_only else "perturbative-" if no_exact else ""
    base = output_base(out_dir, name, f"{file.stem}-{mode}bands")
    image, csv_path, json_path = output_paths(base, image_format, json_path)
    written = [image, csv_path]
    save_figure(fig, image, image_format)
    write_table(csv_path, header, *with_k_labels(bs, cols, rows))
    if bs.perturbative is not None:
        pert_csv = base.with_name(f"{base.name}-perturbative.csv")
        write_csv(pert_csv, *perturbative_table(bs))
        written.append(pert_csv)
    write_json(json_path, doc)
    written.append(json_path)
    _summary(bs)
    title, cols, rows = symmetry_rows(labels, bs.energy_zero_eV, critical)
    if rows:
        table = Table(title=escape(title), title_justify="left")
        for c in cols:
            table.add_column(escape(c), overflow="fold")
        for r in rows:
            table.add_row(*(escape(x) for x in r))  # [M0] is text, not markup
        out.print(table)
    out.print("wrote " + ", ".join(str(w) for w in written))


def _summary(bs) -> None:
    table = Table(title=bs.material.name, show_header=False, title_justify="left")
    table.add_column(style="bold")
    table.add_column()
    sym = bs.symmetry
    if sym.number is not None:
        table.add_row("space group", f"{sym.international} ({sym.number})")
    table.add_row("basis", f"{bs.model.size} plane waves, cutoff {bs.model.basis.cutoff_eV:.2f} eV"
                  + ("; iterative solver (LOBPCG)" if bs.solver == "iterative" else ""))
    table.add_row("energy zero", zero_phrase(bs.energy_zero_kind, bs.energy_zero_eV)
                  + "; the zero of every output (terminal, CSV, JSON, figure)")
    if bs.edges is None and bs.material.valence_electrons:
        table.add_row("kind", "metal (no gap between occupied and empty bands on the path)")
    if bs.edges is not None:
        g = bs.edges
        table.add_row("kind", "semiconductor or insulator (a gap on the path)")
        table.add_row("gap", f"{g.gap_eV:.3f} eV")
        table.add_row("valence maximum", describe_position(bs.path, g.valence_max_index))
        table.add_row("conduction minimum", describe_position(bs.path, g.conduction_min_index))
        table.add_row("smallest direct gap", f"{g.direct_gap_eV:.3f} eV at "
                      f"{describe_position(bs.path, g.direct_gap_index)}")
    pb = bs.perturbative
    if pb is not None:
        s = pb.settings
        share = (f"trustworthy on {100 * pb.trustworthy.mean():.1f} % of (band, k) points"
                 if pb.trustworthy.any() else "no point trustworthy")
        table.add_row(f"perturbative (order {s.order})",
                      f"{share} (proven error bound < {s.tolerance_eV * 1e3:g} meV); subspace "
                      f"treatment on {100 * (pb.treatment == 1).mean():.1f} %")
        if bs.comparison is not None:
            c = bs.comparison
            on = ("no point trustworthy" if c.max_error_trustworthy_eV is None else
                  f"on trustworthy points {1e3 * c.max_error_trustworthy_eV:.2f} meV "
                  f"({c.over_tolerance_trustworthy} over the tolerance)")
            table.add_row("against exact", f"largest error {1e3 * c.abs_error_eV.max():.1f} meV; "
                          f"{on}; bound ≥ true error on {100 * c.bound_coverage:.1f} %, "
                          f"two-more-orders estimate on {100 * c.estimate_coverage:.1f} %")
        if len(pb.radius_k_indices):
            radius = pb.convergence_radius
            known = ~np.isnan(radius)
            smallest = np.min(radius[known]) if known.any() else np.nan
            table.add_row("convergence radius", f"λ = {s.lam:g} inside on "
                          f"{100 * (radius > s.lam).mean():.0f} % of the sampled (band, k) "
                          f"points, undetermined on {100 * (~known).mean():.0f} % "
                          f"(smallest radius {_radius(smallest)})")
    out.print(table)


def _radius(r: float) -> str:
    """A convergence radius for the summary: infinite when every series terminates (V = 0)."""
    if np.isnan(r):
        return "undetermined"
    return f"{r:.2f}" if np.isfinite(r) else "unbounded: the series terminate"
