"""``bandpert masses``: effective masses at band edges or at a chosen point."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer
from rich.table import Table

from ...errors import InputError
from ...input.material import load_material
from ...io import atomic_path, write_json
from ...output.masses_report import masses_notes, masses_results, masses_rows
from ...output.report import document
from ...physics.mass_analysis import compute_masses
from ..options import (
    DEFAULT_OUT,
    CutoffOption,
    MaterialFile,
    json_option,
    name_option,
    out,
    output_base,
    parse_point,
    progress_bar,
)
from .masses_spin_orbit import masses_with_spin_orbit


def masses(
    file: MaterialFile,
    point: Annotated[str | None, typer.Option("--point", metavar="LABEL|COORDS",
                                              help="Where: a path label (G/Gamma for Γ) "
                                              "or fractional coordinates '0.5,0,0.5'. Default: "
                                              "the conduction minimum and valence maximum, "
                                              "refined in 3D.", show_default=False)] = None,
    band: Annotated[int | None, typer.Option("--band", help="Band number (1 = lowest) at --point; "
                                             "default: the lowest empty band.",
                                             show_default=False)] = None,
    temperature_K: Annotated[float, typer.Option("--temperature", help="Temperature (K) of the "
                                                 "effective densities of states N_c, N_v.")]
    = 300.0,
    cutoff_eV: CutoffOption = None,
    json_path: Annotated[Path | None, json_option("masses")] = None,
    name: Annotated[str | None, name_option("<file>-masses; with --point or --band "
                                            "<file>-masses-<point>-band<N>")] = None,
    out_dir: Annotated[Path, typer.Option("--out", help="Folder for the JSON.")] = DEFAULT_OUT,
    kp_file: Annotated[Path | None, typer.Option("--write-kp", help="Also write the k·p parameter "
                                                 "file (Eg, Ep, F, γ1–γ3) this model implies.",
                                                 show_default=False)] = None,
) -> None:
    """Effective masses by second-order k·p, with the finite-difference cross-check.

    For each band edge: the inverse-mass tensor, principal masses and axes, the finite-difference
    tensor of the exact band and their relative difference, the convergence of the sum over
    states, the valley count, density-of-states and conductivity masses and N_c / N_v. At a
    degenerate edge (the valence top at Γ): the Löwdin k·p Hamiltonian, the Dresselhaus–Kip–Kittel
    L, M, N, the Luttinger γ1, γ2, γ3 and the masses along [100], [110] and [111].
    """

    material = load_material(file)
    if material.spin_orbit is not None:  # the spinor valence top (masses_spin_orbit.py)
        return masses_with_spin_orbit(material, file, cutoff_eV, point, band, out_dir, name,
                                      json_path, kp_file)
    with progress_bar("diagonalising") as progress:
        result = compute_masses(material, point=None if point is None else parse_point(point),
                                band=band, temperature_K=temperature_K, cutoff_eV=cutoff_eV,
                                implied_kp=None if kp_file is None else True,
                                progress=progress)
    if kp_file is not None and result.implied_kp_text is None:
        raise InputError("this model has no threefold valence top at Γ with an s-like "
                         "conduction state, so it implies no Kane parameters", str(file),
                         "--write-kp")
    bs = result.bands
    settings = {"cutoff_eV": bs.model.basis.cutoff_eV, "basis_size": bs.model.size,
                "temperature_K": temperature_K, "point": point, "band": band}
    doc = document("masses", material, settings, masses_results(result))
    default = f"{file.stem}-masses"
    if not result.at_edges:
        default += f"-{result.locations[0]}-band{result.entries[0].band + 1}"
    base = output_base(out_dir, name, default)
    json_path = json_path or base.with_name(f"{base.name}.json")
    write_json(json_path, doc)
    written = [json_path]
    if kp_file is not None:
        with atomic_path(kp_file) as tmp:
            tmp.write_text(result.implied_kp_text, encoding="utf-8")
        written.append(kp_file)
    for m, location in zip(result.entries, result.locations, strict=True):
        table = Table(title=f"{m.label}: {location}", show_header=False, title_justify="left")
        table.add_column(style="bold")
        table.add_column()
        for row in masses_rows(m, location, result.energy_zero_eV, result.energy_zero_kind):
            table.add_row(*row)
        out.print(table)
        out.print(m.summary)
    for line in masses_notes(result):
        out.print(line)
    out.print("wrote " + ", ".join(str(w) for w in written))
