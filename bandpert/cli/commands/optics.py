"""``bandpert optics``: the one-electron optical spectrum ε2, ε1, the joint DOS and the f-sum."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer
from rich.table import Table

from ...errors import InputError
from ...input.material import load_material
from ...io import write_csv, write_json
from ...output.dense_mesh_report import interpolation_line, optics_results, optics_table
from ...output.figures.optics import optics_figure
from ...output.report import document
from ...physics.optical_spectrum import DEFAULT_BROADENING_EV, optical_spectrum
from ..dense_mesh_options import (
    DEFAULT_BASIS,
    DEFAULT_COARSE,
    DEFAULT_TOLERANCE_MEV,
    BasisToleranceOption,
    CoarseMeshOption,
    InterpolationToleranceOption,
    interpolation_settings,
)
from ..options import (
    DEFAULT_OUT,
    BandsOption,
    CutoffOption,
    FormatOption,
    ImageFormat,
    MaterialFile,
    PlotCsvJsonDir,
    check_count,
    json_option,
    name_option,
    out,
    output_base,
    output_paths,
    save_figure,
)


def optics(
    file: MaterialFile,
    mesh: Annotated[int, typer.Option("--mesh", help="Points per reciprocal axis of the "
                                      "Γ-centred mesh (symmetry-reduced).")] = 24,
    broadening_meV: Annotated[float, typer.Option("--broadening-meV", help="Gaussian width "
                                                  "of every transition.")]
    = DEFAULT_BROADENING_EV * 1e3,
    step_meV: Annotated[float, typer.Option("--step-meV", help="Spacing of the photon-energy "
                                            "grid.")] = 10.0,
    exact: Annotated[bool, typer.Option("--exact", metavar="",
                                        help="Diagonalise every point in the fixed "
                                        "plane-wave set instead of interpolating.")] = False,
    all_bands: Annotated[bool, typer.Option("--all-bands", metavar="",
                                            help="Every band of the basis "
                                            "(exact, small meshes): the f-sum is complete.")]
    = False,
    n_bands: BandsOption = None,
    cutoff_eV: CutoffOption = None,
    tolerance_meV: InterpolationToleranceOption = DEFAULT_TOLERANCE_MEV,
    basis_tolerance: BasisToleranceOption = DEFAULT_BASIS,
    coarse_mesh: CoarseMeshOption = DEFAULT_COARSE,
    out_dir: PlotCsvJsonDir = DEFAULT_OUT,
    image_format: FormatOption = ImageFormat.png,
    json_path: Annotated[Path | None, json_option("optics")] = None,
    name: Annotated[str | None, name_option("<file>-optics")] = None,
) -> None:
    """One-electron optical spectrum: ε2 from interband velocity matrix elements, ε1 by
    Kramers–Kronig, the joint DOS and the f-sum, on a dense mesh.

    The matrix elements are those of the velocity (1/ħ)∂H/∂k of the whole model, spin–orbit and
    nonlocal terms included; with those terms the f-sum is compared with the effective-mass sum
    rule (m0/ħ²)⟨∂²H/∂k²⟩ of the occupied states instead of the electron count. The bands and
    matrix elements come from reduced bases (checked against exact bands at 1 % of the points)
    unless --exact or --all-bands is given. No excitonic or local-field effects.
    """
    check_count(mesh, "--mesh", 2)
    check_count(n_bands, "--bands", 1)
    if cutoff_eV is not None and not cutoff_eV > 0:
        raise InputError(f"must be positive, got {cutoff_eV}", key="--cutoff-eV")
    interpolation = (None if exact or all_bands else
                     interpolation_settings(tolerance_meV, basis_tolerance, coarse_mesh))
    material = load_material(file)
    result = optical_spectrum(material, mesh, n_bands=n_bands, cutoff_eV=cutoff_eV,
                              broadening_eV=broadening_meV * 1e-3,
                              energy_step_eV=step_meV * 1e-3, interpolation=interpolation,
                              all_bands=all_bands)
    settings = {"mesh": mesh, "broadening_eV": broadening_meV * 1e-3,
                "step_eV": step_meV * 1e-3, "bands": result.n_bands,
                "cutoff_eV": result.cutoff_eV, "interpolate": interpolation is not None,
                "all_bands": all_bands}
    image, csv_path, json_path = output_paths(output_base(out_dir, name, f"{file.stem}-optics"),
                                              image_format, json_path)
    save_figure(optics_figure(result), image, image_format)
    write_csv(csv_path, *optics_table(result))
    write_json(json_path, document("optics", material, settings, optics_results(result)))
    table = Table(title=f"{material.name}: optical spectrum (one-electron)", show_header=False,
                  title_justify="left")
    table.add_column(style="bold")
    table.add_column()
    table.add_row("mesh", f"{mesh} per axis: {result.mesh.n_full} points, "
                  f"{len(result.mesh.k_frac)} irreducible; {result.n_bands} bands")
    table.add_row("f-sum", f"n_eff = {result.n_eff_total:.4f} (interband "
                  f"{result.n_eff_interband:.4f}, intraband {result.n_eff_intraband:.4f}) of "
                  f"{material.valence_electrons} valence electrons{_rule(result)}")
    table.add_row("ε1(0)", f"{result.eps1[0]:.3f} (Kramers–Kronig), "
                  f"{result.eps1_zero_direct:.3f} (from the transitions)")
    if result.critical_points_eV:
        table.add_row("transitions", ", ".join(f"{k} {v:.3f} eV" for k, v in
                                               result.critical_points_eV.items()))
    if len(result.peaks_eV):
        table.add_row("ε2 peaks", ", ".join(f"{p:.2f}" for p in result.peaks_eV) + " eV")
    if result.interpolation is not None:
        table.add_row("interpolation", interpolation_line(result.interpolation))
    out.print(table)
    out.print(f"wrote {image}, {csv_path}, {json_path}")


def _rule(result) -> str:
    """What n_eff tends to, named: N, βN, or the effective-mass sum rule of a k-dependent H."""
    material = result.material
    n, beta = material.valence_electrons, material.potential.kinetic_factor
    kinetic = f"the kinetic factor β = {beta:g}" if beta != 1.0 else ""
    if result.k_terms:
        terms = " and ".join(result.k_terms) + " terms"
        local = f"β × {n} = {beta * n:.4f}" if beta != 1.0 else f"{n}"
        return (f"; with {' and '.join(filter(None, (kinetic, terms)))} ∂²H/∂k² is not ħ²/m0 "
                "and the sum rule (effective-mass sum rule: the occupied states' zone average "
                f"of (m0/ħ²)⟨∂²H/∂k²⟩; {local} without the {terms}) is {result.sum_rule:.4f}")
    if beta == 1.0:
        return ""
    return (f"; with {kinetic} the sum rule of H0 = βħ²|k+G|²/2m0 is "
            f"β × {n} = {result.sum_rule:.4f}")
