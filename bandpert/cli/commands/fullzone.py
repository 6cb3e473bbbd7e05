"""``bandpert fullzone``: full-zone k·p from the Γ eigenstates against exact bands."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer
from rich.table import Table

from ...errors import InputError
from ...input.material import load_material
from ...io import write_json
from ...output.energy_zero import zero_phrase
from ...output.figures import fullzone_figure
from ...output.kp_report import fullzone_results
from ...output.report import document
from ...physics.fullzone import full_zone_kp
from ..options import (
    DEFAULT_OUT,
    CutoffOption,
    EMaxOption,
    EMinOption,
    FormatOption,
    ImageFormat,
    MaterialFile,
    OutDir,
    check_count,
    check_cutoff,
    energy_window,
    json_option,
    name_option,
    out,
    output_base,
    output_paths,
    require_kind,
    save_figure,
)


def fullzone(
    file: MaterialFile,
    basis: Annotated[str, typer.Option("--basis", metavar="N,N,…",
                                       help="Numbers of Γ eigenstates to try, "
                                       "comma-separated (the whole plane-wave basis is added).")]
    = "15,30,60,120",
    k_points: Annotated[int, typer.Option("--k-points", help="Number of k-points along the path.")]
    = 120,
    n_bands: Annotated[int | None, typer.Option("--bands", help="Bands compared (default: the "
                                                "file's basis.bands, else occupied + 4).",
                                                show_default=False)] = None,
    cutoff_eV: CutoffOption = None,
    out_dir: OutDir = DEFAULT_OUT,
    image_format: FormatOption = ImageFormat.png,
    e_min: EMinOption = None,
    e_max: EMaxOption = None,
    json_path: Annotated[Path | None, json_option("fullzone")] = None,
    name: Annotated[str | None, name_option("<file>-fullzone")] = None,
) -> None:
    """Full-zone k·p: bands along the whole path from the Γ eigenstates, against exact bands,
    and their convergence with the number of states kept (Cardona & Pollak 1966)."""

    try:
        sizes = tuple(int(x) for x in basis.replace(" ", "").split(",") if x)
    except ValueError:
        raise InputError(f"'{basis}' is not a comma-separated list of integers",
                         key="--basis") from None
    if not sizes or min(sizes) < 1:
        raise InputError("expected positive numbers of states", key="--basis")
    check_count(k_points, "--k-points", 2)
    check_cutoff(cutoff_eV)
    require_kind(file, "planewave", "fullzone")
    window = energy_window(e_min, e_max)
    material = load_material(file)
    result = full_zone_kp(material, sizes, n_k=k_points, n_bands=n_bands, cutoff_eV=cutoff_eV)
    bs, conv = result.exact, result.convergence
    fig = fullzone_figure(bs, conv, energy_window_eV=window)
    image, _, json_path = output_paths(output_base(out_dir, name, f"{file.stem}-fullzone"),
                                       image_format, json_path)
    settings = {"k_points": len(bs.path.k_frac), "bands": bs.n_bands,
                "cutoff_eV": bs.model.basis.cutoff_eV, "basis_size": bs.model.size,
                "expansion_point": "Γ"}
    save_figure(fig, image, image_format)
    write_json(json_path, document("fullzone", material, settings, fullzone_results(result)))
    table = Table(title=f"{material.name}: full-zone k·p from Γ", title_justify="left")
    table.add_column("Γ states", justify="right")
    table.add_column("largest error (meV)", justify="right")
    table.add_column("rms error (meV)", justify="right")
    for n, e_max, e_rms in zip(conv.basis_sizes, conv.max_error_eV, conv.rms_error_eV,
                               strict=True):
        table.add_row(str(n), f"{1e3 * e_max:.3g}", f"{1e3 * e_rms:.3g}")
    out.print(table)
    rounded = [f"{a} → {b}" for a, b in zip(conv.requested_sizes, conv.rounded_sizes,
                                              strict=True) if a != b]
    if rounded:
        out.print("basis sizes rounded up to close degenerate Γ multiplets (a cut multiplet "
                  "breaks the cubic symmetry): " + ", ".join(rounded))
    out.print(f"figure: {conv.basis_sizes[conv.shown_index]} Γ states beside the exact bands; "
              f"energies from {zero_phrase(bs.energy_zero_kind, bs.energy_zero_eV)}")
    out.print(f"wrote {image}, {json_path}")

