"""``bandpert masses``: effective masses at band edges or at a chosen point."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import numpy as np
import typer
from rich.table import Table

from ...crystal.lattice import point_group_rotations
from ...errors import InputError
from ...input.material import load_material
from ...input.reader import read_toml_document
from ...io import atomic_path, write_json
from ...output.energy_zero import zero_phrase
from ...output.report import document, masses_results
from ...output.text import fixed
from ...physics.bands import compute_band_structure
from ...physics.deformation import STRAIN_FOLLOWING_FORMS, material_deformation_potentials
from ...physics.deformation import describe as describe_deformation
from ...physics.kp_from_planewave import extract_kp_parameters, kp_material_text
from ...physics.masses import band_masses, edge_masses
from ...physics.nfe_gaps import resolve_points
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

    if cutoff_eV is not None and not cutoff_eV > 0:
        raise InputError(f"must be positive, got {cutoff_eV}", key="--cutoff-eV")
    if band is not None and band < 1:
        raise InputError(f"must be at least 1, got {band}", key="--band")
    material = load_material(file)
    with progress_bar("diagonalising") as progress:
        bs = compute_band_structure(material, n_k=120, cutoff_eV=cutoff_eV, progress=progress)
    deformation = None
    if point is None and band is None:
        edges, entries = edge_masses(bs, temperature_K)
        locations = [e.where for e in edges]
        if material.dimension == 3 and material.potential.form in STRAIN_FOLLOWING_FORMS:
            source_doc = read_toml_document(material.file)  # the resolved path, not the name
            deformation = material_deformation_potentials(material, source_doc, bs, edges)
    else:
        label, k_frac, _ = resolve_points(material, [parse_point(point or "Γ")])[0]
        n_el = material.valence_electrons
        b = band - 1 if band is not None else (n_el // 2 if n_el else 0)
        entry = band_masses(material, bs.model, k_frac @ bs.model.reciprocal_invA, b,
                            point_group_rotations(material), temperature_K,
                            f"band {b + 1} at {label}", where=label)
        entries, locations = [entry], [label]
    kp_params = kp_text = None
    if material.dimension == 3 and material.valence_electrons:
        try:
            extracted = extract_kp_parameters(material, bs.model)
        except InputError:
            extracted = None
        if extracted is not None:
            kp_params = {**extracted.parameters.as_dict(),
                         "conduction_band": extracted.conduction_band + 1,
                         "conduction_mass_m0": extracted.conduction_mass_m0}
            kp_text = kp_material_text(material, extracted)
    if kp_file is not None and kp_text is None:
        raise InputError("this model has no threefold valence top at Γ with an s-like "
                         "conduction state, so it implies no Kane parameters", str(file),
                         "--write-kp")
    settings = {"cutoff_eV": bs.model.basis.cutoff_eV, "basis_size": bs.model.size,
                "temperature_K": temperature_K, "point": point, "band": band}
    doc = document("masses", material, settings,
                   masses_results(entries, bs.energy_zero_eV, bs.energy_zero_kind, locations,
                                  kp_params, deformation))
    default = f"{file.stem}-masses"
    if point is not None or band is not None:
        default += f"-{locations[0]}-band{entries[0].band + 1}"
    base = output_base(out_dir, name, default)
    json_path = json_path or base.with_name(f"{base.name}.json")
    write_json(json_path, doc)
    written = [json_path]
    if kp_file is not None:
        with atomic_path(kp_file) as tmp:
            tmp.write_text(kp_text, encoding="utf-8")
        written.append(kp_file)
    for entry, location in zip(entries, locations, strict=True):
        _masses_table(entry, location, bs.energy_zero_eV, bs.energy_zero_kind)
    if deformation is not None:
        out.print("deformation potentials at the reference lattice ("
                  + deformation[1] + "):")
        for line in describe_deformation(deformation[0]):
            out.print("  " + line)
    if kp_params is not None:
        out.print("k·p parameters implied at Γ (Δso = 0): "
                  + ", ".join(f"{k} = {v:.4g}" for k, v in extracted.parameters.as_dict().items()
                              if k != "Delta_so_eV"))
    out.print("wrote " + ", ".join(str(w) for w in written))


def _masses_table(m, location: str, zero_eV: float, zero_kind: str) -> None:
    table = Table(title=f"{m.label}: {location}", show_header=False, title_justify="left")
    table.add_column(style="bold")
    table.add_column()
    table.add_row("k (fractional)", _vec(m.k_frac))
    table.add_row("energy", f"{fixed(m.energy_eV - zero_eV)} eV from "
                  f"{zero_phrase(zero_kind, zero_eV)}; band(s) "
                  + ", ".join(str(b + 1) for b in m.degenerate_bands))
    cp = m.critical_point
    table.add_row("point", cp.kind + (f" (index {cp.saddle_index})" if cp.kind == "saddle"
                                      else ""))
    if cp.curvatures is not None:
        table.add_row("principal m0/m* (signed)", ", ".join(f"{c:+.4f}" for c in cp.curvatures))
    if m.tensor is not None:
        t = m.tensor
        kinds = ["electron-like" if s > 0 else "hole-like" for s in t.curvature_sign]
        for i in range(len(t.principal_masses)):
            table.add_row(f"principal mass {i + 1}", f"{t.principal_masses[i]:.4f} m0 "
                          f"({kinds[i]}) along {_vec(t.principal_axes[:, i])}")
        if m.relative_difference is not None:
            table.add_row("finite-difference check",
                          f"relative difference {m.relative_difference:.1e}")
            conv = ", ".join(f"{n}: {np.max(row):.4f}" for n, row in
                             zip(m.convergence_counts, m.convergence_masses, strict=True))
            table.add_row("largest mass vs states kept", conv)
        if m.valleys is not None:
            table.add_row("valleys", str(m.valleys))
        if m.dos_mass is not None:
            table.add_row("density-of-states mass", f"{m.dos_mass:.4f} m0")
            table.add_row("conductivity mass", f"{m.conductivity_mass:.4f} m0")
            table.add_row(f"effective DOS at {m.temperature_K:g} K", f"{m.effective_dos_cm3:.3e} "
                          "cm⁻³")
    if m.edge is not None:
        e = m.edge
        if e.dkk_LMN is not None:
            big_l, big_m, big_n = e.dkk_LMN
            table.add_row("DKK L, M, N (ħ²/2m0)", f"{big_l:.3f}, {big_m:.3f}, {big_n:.3f} (usual: "
                          "free-electron term excluded)")
            table.add_row("  alternative L, M, N", f"{big_l + 1:.3f}, {big_m + 1:.3f}, "
                          f"{big_n:.3f} (free-electron term included)")
            g1, g2, g3 = e.luttinger
            table.add_row("Luttinger γ1, γ2, γ3", f"{g1:.3f}, {g2:.3f}, {g3:.3f} (spinless "
                          "triplet; Γ8 hole formulas need spin–orbit)")
        for name, curv in e.direction_curvatures.items():
            signed = ", ".join(f"{c:+.4f}" for c in curv)
            table.add_row(f"m0/m* along {name}", f"{signed} (bands of the set, signed)")
        if m.dos_mass is not None:
            table.add_row("density-of-states mass", f"{m.dos_mass:.4f} m0 (all bands of the set)")
            table.add_row(f"effective DOS at {m.temperature_K:g} K",
                          f"{m.effective_dos_cm3:.3e} cm⁻³")
    out.print(table)
    out.print(m.summary)
    if cp.warning:
        out.print(f"warning: {cp.warning}")



def _vec(v) -> str:
    return "(" + ", ".join(f"{x:.4f}" for x in np.asarray(v, dtype=float)) + ")"

