"""Internal strain: how the two atoms of a diamond or zincblende cell move under a shear.

A homogeneous strain ε carries the lattice, but in a crystal with two atoms per cell the atoms
need not follow it: under a shear the sublattices shift against each other. In Kleinman's
description (L. Kleinman, Phys. Rev. 128, 2614 (1962)) the shift of the atom at r_1 relative to
the atom at r_2 of a diamond or zincblende cell is

    u_1 − u_2 = −ζ (a/2) s (ε_yz, ε_zx, ε_xy),      s = sign(b_x b_y b_z),

with b = r_1 − r_2 a nearest-neighbour bond (the four bonds of a tetrahedron share the sign of
b_x b_y b_z; Cartesian axes along the cube edges). ζ = 0 is no relaxation (atoms at fixed
fractional positions), ζ = 1 keeps every bond length to first order (only bond angles change);
the normalisation is checked in the tests. Hydrostatic and [100]-uniaxial strains move no atom.

The atoms' shift changes the potential to first order by

    δV(G) = (Ω0/Ω_atom) w(|G|) (1/N) Σ_j v_j(|G|) (−i G·u_j) exp(−i G·r_j)

(differentiating :func:`bandpert.planewave.potential.continuous_fourier_coefficients`), which
:mod:`bandpert.physics.deformation` adds to the homogeneous strain perturbation.
"""

from __future__ import annotations

import numpy as np

from ..input.material import Material
from ..planewave.potential import continuous_scale, species_form_factor, taper_weight

#: Measured Kleinman internal-strain parameters, by the sorted species names of a two-atom cell.
KLEINMAN_ZETA: dict[tuple[str, ...], tuple[float, str]] = {
    ("Si",): (0.72, "Cousins, Gerward, Staun Olsen, Selsmark & Sheldon, J. Phys. C 20, 29 "
                    "(1987), X-ray diffraction under stress (ζ = 0.72 ± 0.04); from memory"),
}

#: What outputs say when no value is known.
NO_ZETA = ("no measured internal-strain parameter is known to bandpert for this crystal: the "
           "atoms keep their fractional positions under shear (ζ = 0)")

#: Relative tolerance for recognising a tetrahedral bond along ±(1, ±1, ±1).
_BOND_RTOL = 1e-6


def tetrahedral_bond_sign(material: Material) -> int:
    """s = sign(b_x b_y b_z) of the bond r_1 − r_2 of a two-atom fcc cell, or 0 if there is none.

    0 for anything that is not two atoms on an fcc lattice a nearest-neighbour bond
    (a√3/4 along a cube diagonal) apart: internal strain is then not modelled.
    """
    if material.dimension != 3 or len(material.atoms) != 2 or material.lattice_type != "fcc":
        return 0
    frac = np.array([a.position_frac for a in material.atoms], dtype=float)
    d = frac[0] - frac[1]
    images = d[None, :] - np.array(np.meshgrid(*[[-1, 0, 1]] * 3)).reshape(3, -1).T
    bonds = images @ material.vectors_A
    b = bonds[np.argmin(np.linalg.norm(bonds, axis=1))]
    a = material.a_A
    if not np.allclose(np.abs(b), a / 4.0, rtol=_BOND_RTOL, atol=0.0):
        return 0
    return int(np.sign(np.prod(b)))


def internal_strain_parameter(material: Material) -> tuple[float, str]:
    """Kleinman's ζ of the crystal and where it comes from (:data:`KLEINMAN_ZETA`).

    Returns ``(0.0, NO_ZETA)`` for a crystal without a tabulated value or without a tetrahedral
    two-atom cell.
    """
    species = tuple(sorted({a.species for a in material.atoms}))
    if tetrahedral_bond_sign(material) == 0 or species not in KLEINMAN_ZETA:
        return 0.0, NO_ZETA
    return KLEINMAN_ZETA[species]


def internal_displacements(material: Material, strain: np.ndarray, zeta: float) -> np.ndarray:
    """Displacements u_j (Å, Cartesian) of the atoms under ``strain`` (module docstring).

    The pair moves symmetrically, u_1 = −u_2 = (u_1 − u_2)/2, so the centre of the cell stays.

    Parameters
    ----------
    material : Material
    strain : numpy.ndarray
        (3, 3) symmetric strain (first order: the result is linear in it).
    zeta : float
        Kleinman's ζ.

    Returns
    -------
    numpy.ndarray
        (n_atoms, 3); zeros where internal strain is not modelled.
    """
    eps = np.asarray(strain, dtype=float)
    out = np.zeros((len(material.atoms), 3))
    s = tetrahedral_bond_sign(material)
    if s == 0 or zeta == 0.0:
        return out
    shear = np.array([eps[1, 2], eps[2, 0], eps[0, 1]])
    relative = -zeta * (material.a_A / 2.0) * s * shear
    out[0], out[1] = relative / 2.0, -relative / 2.0
    return out


def internal_strain_potential(material: Material, g_cart_invA: np.ndarray,
                              displacements_A: np.ndarray) -> np.ndarray:
    """δV(G) (eV) of displacing the atoms by ``displacements_A`` (module docstring).

    Parameters
    ----------
    material : Material
        With ``potential.form == "continuous"``.
    g_cart_invA : numpy.ndarray
        (..., 3) Cartesian G (Å⁻¹), e.g. the differences G − G' of a basis.
    displacements_A : numpy.ndarray
        (n_atoms, 3) from :func:`internal_displacements`.

    Returns
    -------
    numpy.ndarray
        Complex, leading shape of ``g_cart_invA``; 0 at G = 0.
    """
    pot = material.potential
    g = np.asarray(g_cart_invA, dtype=float)
    q = np.sqrt(np.einsum("...i,...i->...", g, g))
    positions = material.positions_cart_A
    scale = continuous_scale(material)
    out = np.zeros(q.shape, dtype=complex)
    for atom, r, u in zip(material.atoms, positions, displacements_A, strict=True):
        if not np.any(u):
            continue
        v = species_form_factor(material, atom.species, q)
        out += v * (-1j * (g @ u)) * np.exp(-1j * (g @ r))
    if pot.taper_invA is not None:
        out *= taper_weight(q, *pot.taper_invA)
    return np.where(q == 0.0, 0.0, scale * out)
