"""``bandpert gaps``: gaps at free-electron degeneracies against exact levels."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer
from rich import box
from rich.table import Table

from ...errors import InputError
from ...input.material import load_material
from ...io import write_json
from ...output.energy_zero import zero_phrase
from ...output.figures import gap_figure
from ...output.gaps_report import gap_results, gap_table
from ...output.report import document
from ...physics.bands import compute_band_structure
from ...physics.nfe_gaps import gap_analysis, resolve_points
from ..options import (
    DEFAULT_OUT,
    CutoffOption,
    EMaxOption,
    EMinOption,
    FermiMeshOption,
    FormatOption,
    ImageFormat,
    MaterialFile,
    check_count,
    check_fermi_mesh,
    energy_window,
    json_option,
    name_option,
    out,
    output_base,
    output_paths,
    parse_point,
    progress_bar,
    save_figure,
)


def gaps(
    file: MaterialFile,
    json_path: Annotated[Path | None, json_option("gaps")] = None,
    name: Annotated[str | None, name_option("<file>-gaps")] = None,
    point: Annotated[list[str] | None, typer.Option("--point", metavar="<label|coords>",
                                                    help="A point to examine: a "
                                                    "label of the path (G/Gamma for Γ) or "
                                                    "fractional coordinates such as "
                                                    "'0.5,0,0.5'; repeat for more (default: "
                                                    "every labelled point of the path).",
                                                    show_default=False)] = None,
    crossings: Annotated[bool | None, typer.Option("--crossings/--no-crossings", metavar="",
                                                   help="Also examine where free-electron "
                                                   "bands cross between labelled points "
                                                   "(default: on, off when --point is given).",
                                                   show_default=False)] = None,
    n_bands: Annotated[int | None, typer.Option("--bands", help="Examine the degeneracies "
                                                "among this many lowest levels (default: the "
                                                "file's basis.bands, else occupied + 4).",
                                                show_default=False)] = None,
    cutoff_eV: CutoffOption = None,
    fermi_mesh: FermiMeshOption = None,
    out_dir: Annotated[Path, typer.Option("--out", help="Folder for the figure and the JSON.")]
    = DEFAULT_OUT,
    k_points: Annotated[int, typer.Option("--k-points", help="k-points of the band plot.")] = 200,
    image_format: FormatOption = ImageFormat.png,
    e_min: EMinOption = None,
    e_max: EMaxOption = None,
) -> None:
    """Gaps at free-electron degeneracies: degenerate perturbation theory against exact levels.

    At every examined point the plane waves with equal |k+G|² are grouped; for each group the
    first-order (V block) and second-order (Löwdin) splittings are printed beside the exact
    ones, with the Fourier coefficients V(G−G′) that couple it and, when a degeneracy stays
    closed, why. Writes the band plot with the gaps marked and the JSON.
    """

    check_count(k_points, "--k-points", 2)
    check_count(n_bands, "--bands", 1)
    if cutoff_eV is not None and not cutoff_eV > 0:
        raise InputError(f"must be positive, got {cutoff_eV}", key="--cutoff-eV")
    window = energy_window(e_min, e_max)
    material = load_material(file)
    points = [parse_point(p) for p in point] if point else None
    resolve_points(material, points)  # refuse a bad --point before the diagonalisation
    search = (not point) if crossings is None else crossings
    check_fermi_mesh(fermi_mesh, material.dimension)
    with progress_bar("diagonalising") as progress:
        bs = compute_band_structure(material, n_k=k_points, n_bands=n_bands, cutoff_eV=cutoff_eV,
                                    progress=progress, fermi_mesh=fermi_mesh)
    report = gap_analysis(material, model=bs.model, n_bands=bs.n_bands, points=points,
                          crossings=search)
    settings = {"k_points": len(bs.path.k_frac), "bands": bs.n_bands,
                "cutoff_eV": bs.model.basis.cutoff_eV, "basis_size": bs.model.size,
                "real_hamiltonian": bs.model.is_real, "fermi_mesh": bs.fermi_mesh,
                "points": list(point) if point else "labelled points of the path",
                "crossings": search}
    doc = document("gaps", material, settings, gap_results(report, bs))
    image, _, json_path = output_paths(output_base(out_dir, name, f"{file.stem}-gaps"),
                                       image_format, json_path)
    fig = gap_figure(bs, report, window)
    save_figure(fig, image, image_format)
    write_json(json_path, doc)

    tables, notes = gap_table(report, bs.energy_zero_eV)
    out.print(f"{material.name}: free-electron degeneracies and their gaps")
    for title, cols, rows in tables:
        table = Table(title=title, title_justify="left", box=box.SIMPLE_HEAD, pad_edge=False)
        for c in cols:
            numeric = c in ("E0 (eV)", "g", "1st", "2nd", "exact")
            table.add_column(c, overflow="fold", justify="right" if numeric else "left")
        for r in rows:
            table.add_row(*r)
        out.print(table)
    for note in notes:
        out.print(note)
    zero = zero_phrase(bs.energy_zero_kind, bs.energy_zero_eV)
    out.print(f"E0 (the free-electron level of a group) from {zero}, "
              "as in the figure and the JSON; gaps in eV between consecutive levels of a group, "
              "shown where the exact splitting is open; exact levels matched by sorted position; "
              f"{report.n_bands} lowest levels, {report.basis_size} plane waves at "
              f"{report.cutoff_eV:.2f} eV")
    out.print(f"wrote {image}, {json_path}")

