"""``bandpert sweep``: keys of a material file over ranges."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import numpy as np
import typer
from rich.table import Table

from ...data import find_material
from ...errors import InputError
from ...input.material import read_toml_document
from ...io import write_json, write_table
from ...output.figures import sweep_figure
from ...output.report import document
from ...output.sweep_report import (
    column_unit,
    sweep_columns,
    sweep_results,
    sweep_table,
    sweep_zero_note,
)
from ...runs.sweep import prepare, run_sweep
from ...runs.sweep_spec import parse_axis
from ..options import (
    DEFAULT_OUT,
    BandsOption,
    CutoffOption,
    EngineKind,
    EngineOption,
    FormatOption,
    ImageFormat,
    MaterialFile,
    PlotCsvJsonDir,
    SchedulerOption,
    WorkersOption,
    check_count,
    engine_from_options,
    err,
    in_flag_terms,
    json_option,
    name_option,
    out,
    output_base,
    output_paths,
    progress_bar,
    save_figure,
)


def sweep(
    file: MaterialFile,
    vary: Annotated[list[str], typer.Option(
        "--vary", metavar="KEY=START:STOP:COUNT", help="A key of the material file and its "
        "range, e.g. lattice.a_A=5.3:5.6:31 or potential.symmetric[0]=-0.25:-0.19:13; also "
        "strain.xx|yy|zz|xy|xz|yz|hydrostatic and alloy.x (with --alloy-end). Repeat to vary "
        "several keys (all combinations).", show_default=False)],
    quantity: Annotated[list[str] | None, typer.Option(
        "--quantity", metavar="edges|gaps|masses|deformation",
        help="What to compute at each point: edges (band-edge energies, "
        "positions, gaps), gaps (at the labelled points), masses (band-edge masses), "
        "deformation (deformation potentials at each point; needs --form-factors continuous). "
        "Repeatable; default edges and gaps.", show_default=False)] = None,
    point: Annotated[list[str] | None, typer.Option(
        "--point", metavar="LABEL",
        help="Label of the path for the gaps (G/Gamma for Γ); repeatable; default "
        "every label of the path.", show_default=False)] = None,
    between: Annotated[int | None, typer.Option(
        "--between", metavar="N", help="Gaps at the points are between bands N and N+1 "
        "(1-based; default: the highest occupied band).", show_default=False)] = None,
    form_factors: Annotated[str, typer.Option(
        "--form-factors", metavar="tabulated|continuous",
        help="tabulated: keep the file's form factors fixed on their |G|² "
        "shells; continuous: fit a v(q) to them (Friedel-Hybertsen-Schlüter form, 1/Ω "
        "scaling) that follows the lattice (needed for strain).")] = "tabulated",
    basis: Annotated[str, typer.Option(
        "--basis", metavar="scaled|fixed",
        help="scaled: cutoff × (Ω_ref/Ω)^(2/d), the same plane waves under a "
        "uniform change of the lattice constant; fixed: the same cutoff in eV.")] = "scaled",
    alloy_end: Annotated[Path | None, typer.Option(
        "--alloy-end", help="Material file of the x = 1 end of an alloy.x sweep "
        "(virtual-crystal approximation).", show_default=False)] = None,
    k_points: Annotated[int, typer.Option("--k-points", help="k-points along the path at "
                                          "each parameter point.")] = 60,
    n_bands: BandsOption = None,
    cutoff_eV: CutoffOption = None,
    temperature: Annotated[float, typer.Option("--temperature", help="Temperature (K) for the "
                                               "effective densities of states.")] = 300.0,
    engine: EngineOption = EngineKind.local,
    workers: WorkersOption = None,
    scheduler: SchedulerOption = None,
    out_dir: PlotCsvJsonDir = DEFAULT_OUT,
    image_format: FormatOption = ImageFormat.png,
    json_path: Annotated[Path | None, json_option("sweep")] = None,
    name: Annotated[str | None, name_option("<file>-sweep-<varied keys>")] = None,
) -> None:
    """Sweep keys of a material file over ranges; tabulate and plot gaps, band edges and masses.

    A k·p parameter file works too: its keys are swept and the masses at Γ of each of its models
    are tabulated along [001], [110] and [111].

    Every point is validated like a file; a failed point is reported with its parameters and
    the others are kept (exit status 3 when any point failed). Runs on a local Dask cluster by
    default, on an existing scheduler with --scheduler, or in this process with --engine serial.
    """

    axes = tuple(parse_axis(v) for v in vary)
    check_count(k_points, "--k-points", 2)
    check_count(n_bands, "--bands", 2)
    check_count(between, "--between", 1)
    if cutoff_eV is not None and not cutoff_eV > 0:
        raise InputError(f"must be positive, got {cutoff_eV}", key="--cutoff-eV")
    if not temperature > 0:
        raise InputError(f"expected a positive temperature in K, got {temperature}",
                         key="--temperature")
    run_on = engine_from_options(engine, workers, scheduler)
    doc = read_toml_document(find_material(file))
    end = None if alloy_end is None else read_toml_document(find_material(alloy_end))
    spec, reference, note = prepare(
        doc, str(file), axes, quantities=tuple(quantity or ("edges", "gaps")),
        points=tuple(point) if point else None, n_k=k_points, n_bands=n_bands,
        cutoff_eV=cutoff_eV, lower_band=between, form_factors=form_factors, basis=basis,
        alloy_end=end, alloy_source=str(alloy_end or ""), temperature_K=temperature)
    note = in_flag_terms(note)  # the note reaches the terminal, the figure and the files
    n_points = int(np.prod([len(a.values) for a in spec.axes]))
    err.print(f"bandpert: {n_points} points on {run_on.describe()}; {note}", highlight=False)
    with progress_bar("sweeping") as progress:
        result = run_sweep(spec, run_on, progress, note)
    settings = {"varied": [a.key for a in spec.axes], "quantities": list(spec.quantities),
                "points": list(spec.points), "between_bands": [spec.lower_band,
                                                               spec.lower_band + 1],
                "k_points": spec.n_k, "bands": spec.n_bands,
                "reference_cutoff_eV": spec.reference_cutoff_eV, "basis_rule": spec.basis,
                "form_factors": form_factors, "alloy_end": str(alloy_end or ""),
                "temperature_K": temperature, "engine": result.engine}
    image, csv_path, json_path = output_paths(output_base(
        out_dir, name, "-".join([f"{file.stem}-sweep", *(a.key for a in spec.axes)])),
        image_format, json_path)
    fig = sweep_figure(result)
    save_figure(fig, image, image_format)
    write_table(csv_path, *sweep_table(result))
    write_json(json_path, document("sweep", reference, settings, sweep_results(result)))
    _sweep_summary(result)
    out.print(f"wrote {image}, {csv_path}, {json_path}")
    if result.failures:
        for f in result.failures[:10]:
            values = ", ".join(f"{a.key} = {v:g}" for a, v in zip(spec.axes, f.values,
                                                                   strict=True))
            err.print(f"bandpert: failed point {values}: {f.error}", highlight=False,
                      markup=False)
        if len(result.failures) > 10:
            err.print(f"bandpert: … and {len(result.failures) - 10} more failed points (all in "
                      "the JSON)", highlight=False)
        raise typer.Exit(3)


def _sweep_summary(result) -> None:
    table = Table(title=f"sweep of {', '.join(a.key for a in result.spec.axes)}",
                  title_justify="left")
    table.add_column("quantity")
    table.add_column("unit")
    table.add_column("first", justify="right")
    table.add_column("last", justify="right")
    table.add_column("min", justify="right")
    table.add_column("max", justify="right")

    for name, v in sweep_columns(result).items():
        if name.startswith(("lower_", "upper_")) or name.endswith(("_frac", "_absolute_eV")):
            continue
        ok = np.isfinite(v)
        if not ok.any():
            continue
        good = v[ok]
        table.add_row(name, column_unit(name), f"{good[0]:.5g}", f"{good[-1]:.5g}",
                      f"{good.min():.5g}", f"{good.max():.5g}")
    out.print(table)
    out.print(sweep_zero_note(result))
    out.print(f"{result.n_points} points, {len(result.failures)} failed; ran on {result.engine}")
    outside = [t for t in result.text.get("faithful_window", []) if t.startswith("no")]
    if outside:
        out.print(f"{len(outside)} of {result.n_points} points lie outside the faithful window of "
                  "the fitted v(q) (shells inside its taper; column faithful_window)")

