"""``bandpert subbands``: subbands of a heterostructure file at k∥ = 0."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer
from rich.table import Table

from ...errors import InputError
from ...heterostructure import MODELS, compute_subbands, in_plane_dispersion
from ...input.structure_file import load_structure
from ...io import write_json, write_table
from ...output.figures.subbands import subband_figure
from ...output.subbands_report import subband_document, subband_table
from ..options import (
    DEFAULT_OUT,
    FormatOption,
    ImageFormat,
    PlotCsvJsonDir,
    json_option,
    name_option,
    out,
    output_base,
    output_paths,
    save_figure,
)


def subbands(
    file: Annotated[Path, typer.Argument(metavar="FILE", show_default=False,
                                         help="Heterostructure file (TOML): layers of k·p "
                                         "files or alloys.")],
    levels: Annotated[int, typer.Option("--levels", help="Levels per band.")] = 3,
    spacing_nm: Annotated[float, typer.Option("--spacing-nm", help="Grid spacing along z, nm "
                                              "(each layer a whole number of it).")] = 0.1,
    model: Annotated[str, typer.Option("--model", metavar="|".join(MODELS),
                                       help="Envelope-function model.")] = MODELS[0],
    in_plane: Annotated[float | None, typer.Option(
        "--in-plane", metavar="KMAX", help="Also the subbands along [100] and [110] up to KMAX "
        "(1/Å) and their in-plane masses (multiband models).", show_default=False)] = None,
    k_points: Annotated[int, typer.Option("--k-points", help="Points along each in-plane "
                                          "direction.")] = 21,
    out_dir: PlotCsvJsonDir = DEFAULT_OUT,
    image_format: FormatOption = ImageFormat.png,
    json_path: Annotated[Path | None, json_option("subbands")] = None,
    name: Annotated[str | None, name_option("<file>-subbands")] = None,
) -> None:
    """Subbands of a heterostructure at k∥ = 0: levels, envelope functions, transitions, and
    the band-edge profile with |ψ|² drawn at each level."""
    structure = load_structure(file)
    result = compute_subbands(structure, spacing_nm, levels, model)
    settings = {"model": model, "levels": levels, "spacing_nm": spacing_nm,
                "in_plane_k_max_invA": in_plane, "k_points": k_points}
    doc = subband_document(result, settings)
    dispersion = None
    if in_plane is not None:
        if model == "one-band":
            raise InputError("the in-plane dispersion needs a multiband model (four-band, "
                             "six-band or eight-band)", key="--in-plane")
        dispersion = in_plane_dispersion(structure, model, in_plane, k_points, levels,
                                         spacing_nm)
        doc["results"]["in_plane"] = {
            "k_invA": dispersion.k_invA,
            "directions": {d: {"conduction_eV": dispersion.conduction_eV[d],
                               "valence_eV": dispersion.valence_eV[d],
                               "in_plane_mass_m0": dispersion.in_plane_mass_m0[d]}
                           for d in dispersion.conduction_eV}}
    fig = subband_figure(result)
    image, csv_path, json_path = output_paths(
        output_base(out_dir, name, f"{Path(file).stem}-subbands"), image_format, json_path)
    save_figure(fig, image, image_format)
    write_table(csv_path, *subband_table(result))
    write_json(json_path, doc)
    table = Table(title=f"{structure.name}: {model} subbands at k∥ = 0 (eV, common scale)",
                  title_justify="left")
    for col in ("band", "level", "energy (eV)", "bound"):
        table.add_column(col, justify="right" if col == "energy (eV)" else "left")
    for band, energies in result.levels_eV.items():
        for i, e in enumerate(energies):
            table.add_row(band, result.labels[band][i], f"{e:.5f}",
                          "yes" if result.bound[band][i] else "no")
    out.print(table)
    if result.transitions_eV:
        out.print("transitions (eV): " + ", ".join(f"{k} {v:.4f}"
                                                   for k, v in result.transitions_eV.items()))
    if dispersion is not None:
        for d, m in dispersion.in_plane_mass_m0.items():
            text = "; ".join(f"{side} " + ", ".join(f"{x:+.4f}" for x in v)
                             for side, v in m.items() if len(v))
            out.print(f"in-plane masses at k∥ = 0 along [{d}] (m0, negative: hole-like, sorted "
                      f"from the gap): {text}")
    out.print(f"wrote {image}, {csv_path}, {json_path}")
