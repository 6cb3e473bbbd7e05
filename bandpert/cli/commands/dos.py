"""``bandpert dos``: density of states on a k-mesh and the Fermi level."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer
from rich.table import Table

from ...errors import InputError
from ...input.material import load_material
from ...io import write_csv, write_json
from ...output.dense_mesh_report import interpolation_line, interpolation_results
from ...output.dos_report import dos_results, dos_table
from ...output.energy_zero import zero_phrase
from ...output.figures import dos_figure, smearing_warning
from ...output.report import document
from ...output.text import fixed
from ...runs.mesh_dos import compute_dos
from ..dense_mesh_options import (
    DEFAULT_BASIS,
    DEFAULT_COARSE,
    DEFAULT_TOLERANCE_MEV,
    BasisToleranceOption,
    CoarseMeshOption,
    InterpolateOption,
    InterpolationToleranceOption,
    interpolation_settings,
)
from ..options import (
    DEFAULT_OUT,
    BandsOption,
    CutoffOption,
    EMaxOption,
    EMinOption,
    EngineKind,
    EngineOption,
    FormatOption,
    ImageFormat,
    MaterialFile,
    PlotCsvJsonDir,
    SchedulerOption,
    WorkersOption,
    check_count,
    energy_window,
    engine_from_options,
    err,
    json_option,
    name_option,
    out,
    output_base,
    output_paths,
    progress_bar,
    save_figure,
)


def dos(
    file: MaterialFile,
    mesh: Annotated[int, typer.Option("--mesh", help="Points per reciprocal axis of the "
                                      "Γ-centred mesh (symmetry-reduced in 3D).")] = 16,
    method: Annotated[str, typer.Option("--method", metavar="tetrahedron|gaussian",
                                        help="tetrahedron (linear tetrahedra, "
                                        "Blöchl-Jepsen-Andersen 1994) or gaussian.")]
    = "tetrahedron",
    smearing_eV: Annotated[float, typer.Option("--smearing-eV", help="Gaussian width (with "
                                               "--method gaussian).")] = 0.05,
    step_meV: Annotated[float, typer.Option("--step-meV", help="Spacing of the energy grid.")]
    = 10.0,
    n_bands: BandsOption = None,
    cutoff_eV: CutoffOption = None,
    engine: EngineOption = EngineKind.local,
    workers: WorkersOption = None,
    scheduler: SchedulerOption = None,
    out_dir: PlotCsvJsonDir = DEFAULT_OUT,
    image_format: FormatOption = ImageFormat.png,
    e_min: EMinOption = None,
    e_max: EMaxOption = None,
    json_path: Annotated[Path | None, json_option("dos")] = None,
    name: Annotated[str | None, name_option("<file>-dos")] = None,
    interpolate: InterpolateOption = False,
    tolerance_meV: InterpolationToleranceOption = DEFAULT_TOLERANCE_MEV,
    basis_tolerance: BasisToleranceOption = DEFAULT_BASIS,
    coarse_mesh: CoarseMeshOption = DEFAULT_COARSE,
) -> None:
    """Density of states on a dense k-mesh and the Fermi level from the electron count.

    The exact bands are computed on the irreducible points of the mesh, spread over a local
    Dask cluster (default), an existing scheduler (--scheduler) or this process (--engine
    serial); the result does not depend on which. With --interpolate the bands come from
    reduced bases built on a coarse mesh (in this process), checked against exact bands at 1 %
    of the points.
    """

    check_count(mesh, "--mesh", 2)
    check_count(n_bands, "--bands", 1)
    if cutoff_eV is not None and not cutoff_eV > 0:
        raise InputError(f"must be positive, got {cutoff_eV}", key="--cutoff-eV")
    if not smearing_eV > 0:
        raise InputError(f"must be positive, got {smearing_eV}", key="--smearing-eV")
    run_on = engine_from_options(engine, workers, scheduler)
    window = energy_window(e_min, e_max)
    interpolation = (interpolation_settings(tolerance_meV, basis_tolerance, coarse_mesh)
                     if interpolate else None)
    material = load_material(file)
    with progress_bar("diagonalising on the mesh") as progress:
        result = compute_dos(material, mesh, method=method, smearing_eV=smearing_eV,
                             n_bands=n_bands, cutoff_eV=cutoff_eV,
                             energy_step_eV=step_meV * 1e-3, engine=run_on, progress=progress,
                             interpolation=interpolation)
    settings = {"mesh": mesh, "method": method,
                "smearing_eV": smearing_eV if method == "gaussian" else None,
                "step_eV": step_meV * 1e-3, "bands": int(result.energies_eV.shape[1]),
                "cutoff_eV": result.cutoff_eV, "basis_size": result.basis_size,
                "engine": result.engine}
    image, csv_path, json_path = output_paths(output_base(out_dir, name, f"{file.stem}-dos"),
                                              image_format, json_path)
    fig = dos_figure(result, window)
    save_figure(fig, image, image_format)
    write_csv(csv_path, *dos_table(result))
    results = dos_results(result)
    if result.interpolation is not None:
        settings["interpolate"] = True
        results["interpolation"] = interpolation_results(result.interpolation)
    write_json(json_path, document("dos", material, settings, results))
    table = Table(title=f"{material.name}: density of states", show_header=False,
                  title_justify="left")
    table.add_column(style="bold")
    table.add_column()
    table.add_row("mesh", f"{mesh} per axis: {result.mesh.n_full} points, "
                  f"{len(result.mesh.k_frac)} irreducible")
    table.add_row("basis", f"{result.basis_size} plane waves, cutoff {result.cutoff_eV:.2f} eV")
    table.add_row("method", method + (f", σ = {smearing_eV:g} eV" if method == "gaussian"
                                      else ""))
    zero = result.energy_zero_eV
    table.add_row("energy zero", zero_phrase(result.energy_zero_kind, zero))
    kind = ("" if result.fermi_level_eV is None else
            "semiconductor or insulator (a gap on the mesh)" if result.gap_eV is not None
            else "metal (no gap between occupied and empty bands on the mesh)")
    if kind:
        table.add_row("kind", kind)
    if result.fermi_level_eV is not None:
        note = " (mid-gap)" if result.gap_eV is not None else ""
        table.add_row("Fermi level", f"{fixed(result.fermi_level_eV - zero)} eV from the "
                      f"zero ({result.fermi_level_eV:.4f} eV absolute){note}")
    if result.gap_eV is not None:
        table.add_row("gap on the mesh", f"{result.gap_eV:.3f} eV")
    table.add_row("complete below", f"{fixed(result.complete_below_eV - zero, 3)} eV from the zero")
    if result.interpolation is not None:
        table.add_row("interpolation", interpolation_line(result.interpolation))
    table.add_row("ran on", result.engine)
    out.print(table)
    if smearing_warning(result):
        err.print(f"bandpert: warning: {smearing_warning(result)}", highlight=False)
    out.print(f"wrote {image}, {csv_path}, {json_path}")

