"""What a valid material file describes, before any band is computed (``bandpert check``).

:func:`check_material` validates nothing beyond the reader (:func:`~bandpert.input.material
.load_material` has done that); it gathers what the file implies: direct and reciprocal lattice,
atoms, space group (spglib), the labelled path, and the plane-wave basis of the one cutoff rule
(:func:`~bandpert.planewave.cutoff.choose_cutoff`, whose converged search has a budget in plane
waves and time, so a check answers in about a second whatever the file says).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..crystal.lattice import crystal_symmetry, reciprocal_vectors, standard_path
from ..input.material import Material
from ..physics.bands import default_bands
from ..planewave.cutoff import choose_cutoff
from ..planewave.model import build_model


@dataclass(frozen=True)
class MaterialCheck:
    """A material file's crystal, path and basis, as plain values.

    Attributes
    ----------
    name, source, file : str
        From the file.
    lattice_type : str
    dimension : int
    a_A : float
        Lattice constant.
    vectors_A : numpy.ndarray
        (d, d) direct lattice vectors as rows.
    reciprocal_invA : numpy.ndarray
        (d, d) reciprocal vectors b_i as rows, a_i·b_j = 2π δ_ij.
    cell_size : float
        Length (Å), area (Å²) or volume (Å³) of the primitive cell; :attr:`cell_unit` says which.
    cell_unit : str
        "Å", "Å²" or "Å³".
    species : tuple of str
        Species of each atom.
    positions_frac : numpy.ndarray
        (n_atoms, d) fractional positions.
    space_group_number : int or None
        International number (3D only, spglib).
    space_group_symbol : str or None
    has_inversion : bool or None
    potential_summary : str
        One line on the potential's form, its coefficients and the file's unit.
    spin_orbit_summary : str or None
        One line on the spin–orbit parameters of each species (None: no spin–orbit coupling).
    nonlocal_summary : str or None
        One line on the nonlocal wells of each species (None: a local potential).
    path_legs : tuple of tuple of str
        Labelled points of each continuous leg of the path.
    path_points_frac : dict of str to numpy.ndarray
        Fractional coordinates (reciprocal basis) of each label on the path.
    cutoff_eV : float
        The cutoff a run would use.
    cutoff_given : bool
        True when it came from the caller or the file, False when the converged search chose it.
    basis_size : int
        Plane waves in the Γ-centred basis of that cutoff.
    hamiltonian_real : bool
        True when H(k) is real symmetric (a real V(G) with V(−G) = V(G)).
    spinor : bool
        True when the basis holds spinor plane waves (spin–orbit coupling: 2 × 2 blocks).
    valence_electrons : int or None
        Electrons per primitive cell (None: absolute energies only).
    default_bands : int
        Bands a command computes by default (:func:`~bandpert.physics.bands.default_bands`).
    """

    name: str
    source: str
    file: str
    lattice_type: str
    dimension: int
    a_A: float
    vectors_A: np.ndarray
    reciprocal_invA: np.ndarray
    cell_size: float
    cell_unit: str
    species: tuple[str, ...]
    positions_frac: np.ndarray
    space_group_number: int | None
    space_group_symbol: str | None
    has_inversion: bool | None
    potential_summary: str
    spin_orbit_summary: str | None
    nonlocal_summary: str | None
    path_legs: tuple[tuple[str, ...], ...]
    path_points_frac: dict[str, np.ndarray]
    cutoff_eV: float
    cutoff_given: bool
    basis_size: int
    hamiltonian_real: bool
    spinor: bool
    valence_electrons: int | None
    default_bands: int


def potential_summary(material: Material) -> str:
    """One line on a material's potential: its form, what it holds, the file's unit (and the
    kinetic factor β of H0 = β ħ²|k+G|²/2m0 when it is not 1)."""
    beta = material.potential.kinetic_factor
    text = _potential_form(material)
    if beta != 1.0:
        text += f"; kinetic factor β = {beta:.6g}"
    targets = material.potential.deformation_targets
    if targets:  # what the strain runs fit the slopes of v(q) to (physics/deformation_fit)
        text += "; deformation targets " + ", ".join(
            f"{t.name} {t.value_eV:+.4g} ± {t.uncertainty_eV:.2g} eV" for t in targets)
    return text


def _potential_form(material: Material) -> str:
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


def spin_orbit_summary(material: Material) -> str | None:
    """One line on the spin–orbit parameters of each species, or None without them."""
    if material.spin_orbit is None:
        return None
    return "; ".join(
        f"{s}: λ = {p.strength_eV:.6g} eV" + ("" if p.core_shell is None else
                                              f", core {p.core_shell}p, ζ = "
                                              f"{p.slater_exponent_invA:g} 1/Å")
        for s, p in material.spin_orbit.species.items())


def nonlocal_summary(material: Material) -> str | None:
    """One line on the nonlocal wells of each species (depth and radius of each channel, an
    energy-dependent l = 0 depth as A0 + s·E; :mod:`bandpert.planewave.nonlocal_term`), or
    None without them."""
    if material.nonlocal_terms is None:
        return None
    parts = []
    for s, channels in material.nonlocal_terms.species.items():
        slope = material.nonlocal_terms.energy_slopes.get(s)
        wells = [f"A{ell} = {depth:.6g} eV" + (f" {slope:+.6g}·E" if ell == 0 and slope else "")
                 + f", R{ell} = {radius:g} Å" for ell, depth, radius in channels]
        parts.append(f"{s}: " + (", ".join(wells) if wells else "no wells"))
    return "; ".join(parts)


def check_material(material: Material, cutoff_eV: float | None = None) -> MaterialCheck:
    """Everything a material file implies before any band is computed.

    Parameters
    ----------
    material : Material
    cutoff_eV : float, optional
        Cutoff to report the basis for (default: the file's, else the converged one; the
        convergence of a given cutoff is not checked here).

    Returns
    -------
    MaterialCheck
    """
    nb = default_bands(material)
    # the cutoff rule runs on the spinless model (as every command's); the basis reported is
    # the spinor one when the file has spin–orbit coupling
    spinless = material.local_spinless()
    cutoff = choose_cutoff(spinless, default_bands(spinless), cutoff_eV, check_convergence=False)
    model = build_model(material, cutoff, spin_orbit=True)
    sym = crystal_symmetry(material)
    points, legs = standard_path(material)
    labels = dict.fromkeys(x for leg in legs for x in leg)
    return MaterialCheck(
        name=material.name, source=material.source, file=material.file,
        lattice_type=material.lattice_type, dimension=material.dimension, a_A=material.a_A,
        vectors_A=np.asarray(material.vectors_A, dtype=float),
        reciprocal_invA=reciprocal_vectors(material.vectors_A),
        cell_size=float(material.volume_A), cell_unit={1: "Å", 2: "Å²", 3: "Å³"}[
            material.dimension],
        species=tuple(a.species for a in material.atoms),
        positions_frac=np.array([a.position_frac for a in material.atoms], dtype=float),
        space_group_number=sym.number, space_group_symbol=sym.international,
        has_inversion=sym.has_inversion, potential_summary=potential_summary(material),
        spin_orbit_summary=spin_orbit_summary(material),
        nonlocal_summary=nonlocal_summary(material),
        path_legs=tuple(tuple(leg) for leg in legs),
        path_points_frac={label: np.asarray(points[label], dtype=float) for label in labels},
        cutoff_eV=float(cutoff), cutoff_given=bool(cutoff_eV or material.cutoff_eV),
        basis_size=int(model.size), hamiltonian_real=bool(model.is_real),
        spinor=model.n_components == 2,
        valence_electrons=material.valence_electrons, default_bands=int(nb))
