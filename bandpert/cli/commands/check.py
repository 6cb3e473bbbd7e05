"""``bandpert check``: validate a material file and describe it."""

from __future__ import annotations

from typing import Annotated

import numpy as np
import typer
from rich.table import Table

from ...crystal.lattice import crystal_symmetry, reciprocal_vectors, standard_path
from ...input.material import Material, load_material
from ...physics.bands import default_bands
from ...planewave.cutoff import choose_cutoff
from ...planewave.model import build_model
from ..options import MaterialFile, out


def check(
    file: MaterialFile,
    cutoff_eV: Annotated[float | None, typer.Option("--cutoff-eV", help="Cutoff to report the "
                                                    "basis for (default: the file's, else a "
                                                    "converged one).", show_default=False)] = None,
) -> None:
    """Validate a material file and print what it describes: lattice, symmetry, path, basis."""
    material = load_material(file)
    nb = default_bands(material)
    spinless = material.without_spin_orbit()
    cutoff = choose_cutoff(spinless, default_bands(spinless), cutoff_eV, check_convergence=False)
    model = build_model(material, cutoff, spin_orbit=True)
    sym = crystal_symmetry(material)
    points, legs = standard_path(material)
    table = Table(title=f"{material.name}  ({file})", show_header=False, title_justify="left")
    table.add_column(style="bold")
    table.add_column()
    table.add_row("source", material.source)
    table.add_row("lattice", f"{material.lattice_type} ({material.dimension}D), "
                  f"a = {material.a_A:g} Å")
    for i, v in enumerate(material.vectors_A):
        table.add_row(f"a{i + 1} (Å)", _vec(v))
    for i, v in enumerate(reciprocal_vectors(material.vectors_A)):
        table.add_row(f"b{i + 1} (1/Å)", _vec(v))
    unit = {1: "Å", 2: "Å²", 3: "Å³"}[material.dimension]
    table.add_row("cell size", f"{material.volume_A:.4f} {unit}")
    for i, atom in enumerate(material.atoms):
        table.add_row(f"atom {i + 1}", f"{atom.species} at {_vec(atom.position_frac)} (fractional)")
    if sym.number is not None:
        inv = "with" if sym.has_inversion else "without"
        table.add_row("space group", f"{sym.international} ({sym.number}), {inv} inversion")
    table.add_row("potential", _describe_potential(material))
    if material.spin_orbit is not None:
        table.add_row("spin-orbit", "; ".join(
            f"{s}: λ = {p.strength_eV:.6g} eV" + ("" if p.core_shell is None else
                                                  f", core {p.core_shell}p, ζ = "
                                                  f"{p.slater_exponent_invA:g} 1/Å")
            for s, p in material.spin_orbit.species.items()))
    table.add_row("path", " | ".join("–".join(leg) for leg in legs))
    for label in dict.fromkeys(x for leg in legs for x in leg):
        table.add_row(f"  {label}", _vec(points[label]))
    source = "given" if (cutoff_eV or material.cutoff_eV) else "converged default"
    table.add_row("basis", f"{model.size} plane waves at cutoff {cutoff:.2f} eV ({source}); "
                  f"H(k) {'real symmetric' if model.is_real else 'complex Hermitian'}"
                  + (" (spinor, 2 × 2 blocks)" if model.n_components == 2 else ""))
    table.add_row("electrons", "not given (absolute energies)" if material.valence_electrons is None
                  else f"{material.valence_electrons} per cell; {nb} bands by default")
    out.print(table)



def _vec(v) -> str:
    return "(" + ", ".join(f"{x:.4f}" for x in np.asarray(v, dtype=float)) + ")"


def _describe_potential(material: Material) -> str:
    p = material.potential
    if p.form == "empty":
        return "empty lattice (V = 0)"
    if p.form == "fourier":
        return f"{len(p.fourier_eV)} Fourier coefficients (±G completed), file unit {p.file_unit}"
    if p.form == "continuous":
        taper = ("" if p.taper_invA is None else
                 f", taper {p.taper_invA[0]:.4g}–{p.taper_invA[1]:.4g} Å⁻¹")
        return (f"continuous v(q) for {', '.join(p.continuous)} (Friedel–Hybertsen–Schlüter "
                f"form), Ω0 = {p.reference_volume_A:.4g}{taper}, file unit {p.file_unit}")
    return (f"{p.form} form factors on |G|² = {', '.join(f'{s:g}' for s in p.shells_g2)} "
            f"(2π/a)², file unit {p.file_unit}")

