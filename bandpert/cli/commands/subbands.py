"""``bandpert subbands``: subbands of a heterostructure file at k∥ = 0."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer
from rich.table import Table

from ...errors import InputError
from ...heterostructure import MODELS, compute_subbands
from ...input.structure_file import load_structure
from ...io import write_json, write_table
from ...output.figures.subband_dispersion import dispersion_figure
from ...output.figures.subbands import subband_figure
from ...output.subbands_report import subband_document, subband_table
from ...runs.in_plane import in_plane_on_engine
from ..options import (
    DEFAULT_OUT,
    EngineKind,
    EngineOption,
    FormatOption,
    ImageFormat,
    PlotCsvJsonDir,
    SchedulerOption,
    WorkersOption,
    engine_from_options,
    json_option,
    name_option,
    out,
    output_base,
    output_paths,
    progress_bar,
    save_figure,
)


def subbands(
    file: Annotated[Path, typer.Argument(metavar="FILE|NAME", show_default=False,
                                         help="Heterostructure file (TOML): layers of k·p "
                                         "files or alloys; or a bundled one by name "
                                         "(gallium-arsenide-well).")],
    levels: Annotated[int, typer.Option("--levels", help="Levels per band.")] = 3,
    spacing_nm: Annotated[float, typer.Option("--spacing-nm", help="Grid spacing along z, nm "
                                              "(each layer a whole number of it).")] = 0.1,
    model: Annotated[str, typer.Option("--model", metavar="|".join(MODELS),
                                       help="Envelope-function model.")] = MODELS[0],
    in_plane: Annotated[float | None, typer.Option(
        "--in-plane", metavar="KMAX", help="Also the subbands along two in-plane directions "
        "([100] and [110] for [001] growth) up to KMAX (1/Å) and their in-plane masses "
        "(multiband models).", show_default=False)] = None,
    k_points: Annotated[int, typer.Option("--k-points", help="Points along each in-plane "
                                          "direction.")] = 21,
    engine: EngineOption = EngineKind.local,
    workers: WorkersOption = None,
    scheduler: SchedulerOption = None,
    out_dir: PlotCsvJsonDir = DEFAULT_OUT,
    image_format: FormatOption = ImageFormat.png,
    json_path: Annotated[Path | None, json_option("subbands")] = None,
    name: Annotated[str | None, name_option("<file>-subbands")] = None,
) -> None:
    """Subbands of a heterostructure at k∥ = 0: levels, envelope functions, transitions, and
    the band-edge profile with |ψ|² drawn at each level.

    With --in-plane also the subbands along two in-plane directions (a second figure,
    NAME-in-plane);
    their k∥ points run on a local Dask cluster by default, on an existing scheduler with
    --scheduler, or in this process with --engine serial.
    """
    run_on = engine_from_options(engine, workers, scheduler)
    if in_plane is not None and model == "one-band":
        raise InputError("the in-plane dispersion needs a multiband model (four-band, "
                         "six-band or eight-band)", key="--in-plane")
    structure = load_structure(file)
    result = compute_subbands(structure, spacing_nm, levels, model)
    settings = {"model": model, "levels": levels, "spacing_nm": spacing_nm,
                "in_plane_k_max_invA": in_plane, "k_points": k_points}
    dispersion = None
    if in_plane is not None:
        settings["engine"] = run_on.describe()
        with progress_bar("in-plane points") as progress:
            dispersion = in_plane_on_engine(structure, model, in_plane, k_points, levels,
                                            spacing_nm, run_on, progress)
    doc = subband_document(result, settings, dispersion)
    fig = subband_figure(result)
    base = output_base(out_dir, name, f"{Path(file).stem}-subbands")
    image, csv_path, json_path = output_paths(base, image_format, json_path)
    save_figure(fig, image, image_format)
    written = [image]
    if dispersion is not None:
        written.append(base.with_name(f"{base.name}-in-plane.{image_format.value}"))
        save_figure(dispersion_figure(dispersion), written[-1], image_format)
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
    out.print(f"wrote {', '.join(str(p) for p in (*written, csv_path, json_path))}")
