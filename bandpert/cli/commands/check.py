"""``bandpert check``: validate a material file and describe it."""

from __future__ import annotations

from typing import Annotated

import numpy as np
import typer
from rich.table import Table

from ...input.material import load_material
from ...physics.material_check import check_material
from ..options import MaterialFile, out


def check(
    file: MaterialFile,
    cutoff_eV: Annotated[float | None, typer.Option("--cutoff-eV", help="Cutoff to report the "
                                                    "basis for (default: the file's, else a "
                                                    "converged one).", show_default=False)] = None,
) -> None:
    """Validate a material file and print what it describes: lattice, symmetry, path, basis."""
    c = check_material(load_material(file), cutoff_eV)
    table = Table(title=f"{c.name}  ({file})", show_header=False, title_justify="left")
    table.add_column(style="bold")
    table.add_column()
    table.add_row("source", c.source)
    table.add_row("lattice", f"{c.lattice_type} ({c.dimension}D), a = {c.a_A:g} Å")
    for i, v in enumerate(c.vectors_A):
        table.add_row(f"a{i + 1} (Å)", _vec(v))
    for i, v in enumerate(c.reciprocal_invA):
        table.add_row(f"b{i + 1} (1/Å)", _vec(v))
    table.add_row("cell size", f"{c.cell_size:.4f} {c.cell_unit}")
    for i, (species, position) in enumerate(zip(c.species, c.positions_frac, strict=True)):
        table.add_row(f"atom {i + 1}", f"{species} at {_vec(position)} (fractional)")
    if c.space_group_number is not None:
        inv = "with" if c.has_inversion else "without"
        table.add_row("space group", f"{c.space_group_symbol} ({c.space_group_number}), {inv} "
                      "inversion")
    table.add_row("potential", c.potential_summary)
    if c.spin_orbit_summary is not None:
        table.add_row("spin-orbit", c.spin_orbit_summary)
    if c.nonlocal_summary is not None:
        table.add_row("nonlocal", c.nonlocal_summary)
    table.add_row("path", " | ".join("–".join(leg) for leg in c.path_legs))
    for label, point in c.path_points_frac.items():
        table.add_row(f"  {label}", _vec(point))
    source = "given" if c.cutoff_given else "converged default"
    kind = "real symmetric" if c.hamiltonian_real else "complex Hermitian"
    table.add_row("basis", f"{c.basis_size} plane waves at cutoff {c.cutoff_eV:.2f} eV "
                  f"({source}); H(k) {kind}" + (" (spinor, 2 × 2 blocks)" if c.spinor else ""))
    table.add_row("electrons", "not given (absolute energies)" if c.valence_electrons is None
                  else f"{c.valence_electrons} per cell; {c.default_bands} bands by default")
    out.print(table)


def _vec(v) -> str:
    return "(" + ", ".join(f"{x:.4f}" for x in np.asarray(v, dtype=float)) + ")"
