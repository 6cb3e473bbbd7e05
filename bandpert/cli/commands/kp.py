"""``bandpert kp``: k·p models at Γ from a parameter file."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer
from rich.table import Table

from ...errors import InputError
from ...input.kp_file import load_kp_material
from ...input.material import load_material
from ...io import write_json
from ...kp import CUBIC_DIRECTIONS, MODEL_NAMES, analyse_kp_material, strain_state
from ...output.figures import kp_figure
from ...output.kp_report import kp_results
from ...output.report import document
from ...physics.kp_from_planewave import exact_lines_from_gamma
from ..options import (
    DEFAULT_OUT,
    EMaxOption,
    EMinOption,
    FormatOption,
    ImageFormat,
    OutDir,
    energy_window,
    json_option,
    name_option,
    out,
    output_base,
    output_paths,
    require_kind,
    save_figure,
)


def kp(
    file: Annotated[Path, typer.Argument(metavar="FILE|NAME", show_default=False,
                                         help="k·p parameter file (TOML), or the name of a "
                                         "bundled one.")],
    model_name: Annotated[str | None, typer.Option("--model",
                                                   metavar="two-band|six-band|eight-band",
                                                   help="two-band, six-band or "
                                                   "eight-band (default: every model the file "
                                                   "supports).", show_default=False)] = None,
    compare: Annotated[Path | None, typer.Option("--compare", help="A plane-wave material file "
                                                 "whose exact bands are drawn beside the k·p "
                                                 "ones.", show_default=False)] = None,
    k_max: Annotated[float, typer.Option("--k-max", help="Extent of the lines from Γ, in units "
                                         "of 2π/a.")] = 0.1,
    out_dir: OutDir = DEFAULT_OUT,
    image_format: FormatOption = ImageFormat.png,
    e_min: EMinOption = None,
    e_max: EMaxOption = None,
    json_path: Annotated[Path | None, json_option("kp")] = None,
    name: Annotated[str | None, name_option("<file>-kp, without a doubled -kp")] = None,
    strain: Annotated[str | None, typer.Option(
        "--strain", metavar="E6", help="A homogeneous strain tensor as six numbers "
        "XX,YY,ZZ,YZ,XZ,XY (cubic axes; needs the file's [deformation] table).",
        show_default=False)] = None,
    hydrostatic: Annotated[float | None, typer.Option(
        "--hydro",  help="Hydrostatic strain ε_xx = ε_yy = ε_zz (negative: compression).",
        show_default=False)] = None,
    substrate: Annotated[str | None, typer.Option(
        "--on", metavar="A", help="Pseudomorphic growth on a substrate: its lattice "
        "constant in Å, or a k·p file (or bundled name) whose a_A is used.",
        show_default=False)] = None,
    growth: Annotated[str, typer.Option("--growth", metavar="HKL",
                                        help="Growth direction with --on: 001, 110, 111.")] = "001",
) -> None:
    """k·p models at Γ from a parameter file: band-edge masses along [001], [110] and [111],
    nonparabolicity, and bands near Γ (beside a plane-wave model's exact bands with --compare).
    """

    if not 0.0 < k_max <= 0.5:
        raise InputError(f"expected 0 < --k-max ≤ 0.5 (a fraction of 2π/a), got {k_max}",
                         key="--k-max")
    if model_name is not None and model_name not in MODEL_NAMES:
        raise InputError(f"'{model_name}' is not one of {', '.join(MODEL_NAMES)}", key="--model")
    require_kind(file, "kp", "kp")
    window = energy_window(e_min, e_max)
    kpm = load_kp_material(file)
    state = strain_state(kpm, _strain_components(strain), hydrostatic, _substrate(substrate),
                         growth)
    analysis = analyse_kp_material(kpm, (model_name,) if model_name else None, k_max,
                                   strain=state)
    lines = None if compare is None else exact_lines_from_gamma(load_material(compare), k_max)
    results = kp_results(analysis, None if lines is None else (lines, str(compare)))
    settings = {"models": list(analysis.models), "k_max_frac": k_max}
    if state is not None:
        settings["strain"] = {"strain": strain, "hydrostatic": hydrostatic,
                              "substrate": substrate, "growth": growth}
    doc = document("kp", kpm, settings, results)
    exact = None if lines is None else {d: (lines.k_frac, e) for d, e in lines.energies_eV.items()}
    fig = kp_figure(kpm.name, kpm.source, {n: m.lines for n, m in analysis.models.items()}, exact,
                    "" if compare is None else f"{Path(compare).stem} (plane-wave, exact)",
                    energy_window_eV=window)
    default = file.stem if file.stem.endswith("-kp") else f"{file.stem}-kp"
    image, _, json_path = output_paths(output_base(out_dir, name, default), image_format,
                                       json_path)
    save_figure(fig, image, image_format)
    write_json(json_path, doc)
    directions = CUBIC_DIRECTIONS
    table = Table(title=f"{kpm.name}: masses at Γ (m0)", title_justify="left")
    table.add_column("model")
    table.add_column("band")
    for label in directions:
        table.add_column(label, justify="right")
    for name, entry in results["models"].items():
        for band_name in entry["masses_m0"]["[001]"]:
            table.add_row(name, band_name, *(f"{entry['masses_m0'][d][band_name]:.4f}"
                                             for d in directions))
    out.print(table)
    out.print(f"energies from the {analysis.energy_zero}"
              + ("; the plane-wave bands drawn beside from their own valence-band maximum"
                 if lines is not None else ""))
    if kpm.parameters.Delta_so_eV == 0:
        out.print("Delta_so_eV = 0: Γ8 and Γ7 coincide, so the heavy/light/split-off names only "
                  "label the sorted curvatures of the threefold (spinless) valence top")
    kane_source = None
    for name, entry in results["models"].items():
        if "nonparabolicity" in entry:
            npb = entry["nonparabolicity"]
            kane_source = npb["kane_alpha_source"]
            out.print(f"{name}: conduction nonparabolicity along [001] (m* = "
                      f"{npb['edge_mass_m0']:.4f} m0): the model's own α = "
                      f"{npb['model_alpha_per_eV']:.3f} /eV; Kane's (1 − m*)²/Eg = "
                      f"{npb['kane_alpha_per_eV']:.3f} /eV")
    if kane_source:
        out.print(f"Kane's α: bare free-electron k² terms, {kane_source}")
    if state is not None:
        _print_strain(state, results)
    out.print(f"wrote {image}, {json_path}")



def _strain_components(text: str | None) -> list[float] | None:
    """``--strain XX,YY,ZZ,YZ,XZ,XY`` as six numbers."""
    if text is None:
        return None
    try:
        values = [float(x) for x in text.split(",")]
    except ValueError:
        values = []
    if len(values) != 6:
        raise InputError(f"'{text}' is not six comma-separated numbers; expected "
                         "XX,YY,ZZ,YZ,XZ,XY, e.g. -0.01,-0.01,0.009,0,0,0", key="--strain")
    return values


def _substrate(text: str | None) -> float | None:
    """``--on``: a lattice constant in Å, or a k·p file whose a_A is used."""
    if text is None:
        return None
    try:
        return float(text)
    except ValueError:
        return load_kp_material(text).a_A


def _print_strain(state, results) -> None:
    eps = state.tensor
    how = f", growth [{state.axis}]" if state.kind == "pseudomorphic" else ""
    out.print(f"strain ({state.kind}{how}): "
              f"ε_xx, ε_yy, ε_zz = {eps[0, 0]:.5f}, {eps[1, 1]:.5f}, {eps[2, 2]:.5f}; "
              f"ε_yz, ε_xz, ε_xy = {eps[1, 2]:.5f}, {eps[0, 2]:.5f}, {eps[0, 1]:.5f}")
    for name, entry in results["models"].items():
        edges = entry.get("strain_edges")
        if edges is None:
            continue
        shifts = ", ".join(f"{band} {1e3 * v:+.1f}" for band, v in edges["shifts_eV"].items())
        out.print(f"{name}: band-edge shifts at Γ (meV): {shifts}; E_hh − E_lh = "
                  f"{1e3 * edges['hh_lh_splitting_eV']:+.1f} meV")
