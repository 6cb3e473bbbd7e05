"""The empirical spin–orbit term of a plane-wave model, on a basis of spinor plane waves.

The basis is |K, s⟩ = |k + G⟩ ⊗ |s⟩, s = ↑, ↓, with the spin index slowest (the first n rows
are spin up). The Hamiltonian is

    H = 1₂ ⊗ (H0 + V) + H_so,
    H_so(K s, K′ s′) = −i Σ_species λ_s S_s(G − G′) B_s(|K|) B_s(|K′|)
                       [(K × K′)/(2π/a)²] · ⟨s|σ|s′⟩,

the form of Weisz, Phys. Rev. 149, 504 (1966), Bloom & Bergstresser, Solid State Commun. 6, 465
(1968), and Chelikowsky & Cohen, Phys. Rev. B 14, 556 (1976) (eq. 4 there; quoted from memory).
S_s(G) = (1/N) Σ_{j ∈ s} exp(−iG·r_j) is the structure factor of species s (same normalisation
as V(G), CONVENTIONS.md); for a two-atom cell it splits into the symmetric part
(λ_1 + λ_2)/2 · cos(G·τ) and the antisymmetric part (λ_1 − λ_2)/2 · i sin(G·τ) of those papers.
Measuring K × K′ in units of (2π/a)² keeps λ_s an energy (eV).

The radial factor B_s is the overlap of a plane wave with the core p orbital of the species,
B(K) ∝ ∫ j1(Kr) R(r) r² dr, as in Chelikowsky & Cohen (1976), with a Slater-type orbital
R(r) ∝ r^(n−1) e^(−ζr) (J. C. Slater, Phys. Rev. 36, 57 (1930)) and normalised so that
B(0) = 1 (B(K) ∝ K near 0, divided by K). With x = K²/ζ² the integral has closed forms
(repeated ζ-derivatives of ∫ r² e^(−ζr) j1(Kr) dr = 2K/(ζ² + K²)²; checked against quadrature in
the tests):

    n = 2:  B = (1 + x)^−3
    n = 3:  B = (1 − x/5) (1 + x)^−4
    n = 4:  B = (1 − 3x/5) (1 + x)^−5
    n = 5:  B = (1 − 6x/5 + 3x²/35) (1 + x)^−6

This form is chosen over the bare λ (K × K′) form (B ≡ 1, also available: give no core shell)
because the bare form grows without bound with |K|, so its matrix elements between high plane
waves, and hence the converged Δso, depend on the cutoff; the core-orbital factor cuts them off
at |K| ≈ ζ, as the projection on a localised core state does.

H_so is Hermitian (S_s(−G) = S_s(G)*, K × K′ = −K′ × K) and time-reversal invariant, so
Kramers pairs E(k, ↑) = E(−k, ↓) hold by construction; with inversion symmetry every band is
twofold at every k.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..crystal.lattice import reciprocal_vectors
from ..errors import InputError
from ..input.material import Material


def require_spinless(material: Material) -> None:
    """Refuse spin–orbit or nonlocal parameters where only the local spinless model is built.

    So that no computation returns numbers of the local spinless model for a material that asks
    for more.

    Raises
    ------
    InputError
        Naming the ``spin_orbit`` or ``nonlocal`` key of the file.
    """
    if material.spin_orbit is not None:
        raise InputError("this computation uses the spinless model and the material has "
                         "spin-orbit parameters; expected a material without a spin_orbit table "
                         "(spin-orbit coupling is supported by the exact and perturbative bands, "
                         "gap openings, full-zone k·p, the valence-top masses, the DOS, optics, "
                         "check and fit)",
                         material.file, "spin_orbit")
    if material.nonlocal_terms is not None:
        raise InputError("this computation uses a local potential and the material has "
                         "nonlocal terms; expected a material without a nonlocal table "
                         "(nonlocal terms are supported where spin-orbit coupling is)",
                         material.file, "nonlocal")


def radial_factor(k_invA: np.ndarray, core_shell: int | None, zeta_invA: float | None
                  ) -> np.ndarray:
    """B(K) of a Slater-type core p orbital, B(0) = 1 (module docstring); 1 without a shell.

    Parameters
    ----------
    k_invA : numpy.ndarray
        |K| in Å⁻¹ (any shape).
    core_shell : int or None
        Principal quantum number n (2–5) of R(r) ∝ r^(n−1) e^(−ζr).
    zeta_invA : float or None
        ζ in Å⁻¹.

    Returns
    -------
    numpy.ndarray
        B(|K|), shape of ``k_invA``.
    """
    k = np.asarray(k_invA, dtype=float)
    if core_shell is None:
        return np.ones_like(k)
    x = np.square(k / zeta_invA)
    head = {2: 1.0, 3: 1.0 - x / 5.0, 4: 1.0 - 0.6 * x,
            5: 1.0 - 1.2 * x + 3.0 * x * x / 35.0}[core_shell]
    return head / (1.0 + x) ** (core_shell + 1)


def structure_factors(material: Material, miller: np.ndarray) -> tuple[tuple[str, ...],
                                                                        np.ndarray]:
    """Per-species structure factors S_s(G) = (1/N) Σ_{j∈s} exp(−iG·r_j).

    Parameters
    ----------
    material : Material
    miller : numpy.ndarray
        Integer G (…, 3).

    Returns
    -------
    species : tuple of str
        Sorted species names (the order of the first axis).
    s : numpy.ndarray
        (n_species, …) complex.
    """
    g = np.asarray(miller) @ reciprocal_vectors(material.vectors_A)
    positions = material.positions_cart_A
    species = tuple(sorted({a.species for a in material.atoms}))
    out = np.zeros((len(species),) + g.shape[:-1], dtype=complex)
    for atom, r in zip(material.atoms, positions, strict=True):
        out[species.index(atom.species)] += np.exp(-1j * (g @ r))
    return species, out / len(material.atoms)


@dataclass(frozen=True)
class SpinOrbitTerm:
    """Per-species parameters of H_so in the arrays the builders use.

    Attributes
    ----------
    species : tuple of str
        Sorted species names.
    strengths_eV : numpy.ndarray
        λ_s (n_species,).
    core_shells : tuple
        n of each species' core p shell, or None.
    zetas_invA : tuple
        ζ of each species, or None.
    unit_invA : float
        2π/a: K × K′ is measured in its square.
    """

    species: tuple[str, ...]
    strengths_eV: np.ndarray
    core_shells: tuple[int | None, ...]
    zetas_invA: tuple[float | None, ...]
    unit_invA: float

    def radial(self, k_invA: np.ndarray) -> np.ndarray:
        """Radial factors B_s(|K|), shape (n_species, …)."""
        return np.stack([radial_factor(k_invA, n, z)
                         for n, z in zip(self.core_shells, self.zetas_invA, strict=True)])

    def coupling(self, kg_cart_invA: np.ndarray, structure: np.ndarray) -> np.ndarray:
        """W = Σ_s λ_s S_s(G_i − G_j) B_s(K_i) B_s(K_j) (K_i × K_j)/(2π/a)², H_so = −i W·σ.

        Parameters
        ----------
        kg_cart_invA : numpy.ndarray
            (n, 3) K = k + G of the basis.
        structure : numpy.ndarray
            (n_species, n, n) S_s(G_i − G_j).

        Returns
        -------
        numpy.ndarray
            (3, n, n) complex W_x, W_y, W_z.
        """
        kg = kg_cart_invA / self.unit_invA
        b = self.radial(np.linalg.norm(kg_cart_invA, axis=1))  # (n_s, n)
        weight = np.einsum("s,sij,si,sj->ij", self.strengths_eV, structure, b, b, optimize=True)
        x, y, z = kg[:, 0], kg[:, 1], kg[:, 2]
        return np.stack([weight * (y[:, None] * z[None, :] - z[:, None] * y[None, :]),
                         weight * (z[:, None] * x[None, :] - x[:, None] * z[None, :]),
                         weight * (x[:, None] * y[None, :] - y[:, None] * x[None, :])])


def spin_orbit_term(material: Material) -> SpinOrbitTerm | None:
    """The :class:`SpinOrbitTerm` of a material, None without a ``spin_orbit`` table."""
    so = material.spin_orbit
    if so is None:
        return None
    species = tuple(sorted(so.species))
    return SpinOrbitTerm(
        species=species,
        strengths_eV=np.array([so.species[s].strength_eV for s in species]),
        core_shells=tuple(so.species[s].core_shell for s in species),
        zetas_invA=tuple(so.species[s].slater_exponent_invA for s in species),
        unit_invA=2.0 * np.pi / material.a_A)


def spinor_hamiltonian(h_eV: np.ndarray, w: np.ndarray, out: np.ndarray | None = None
                       ) -> np.ndarray:
    """The 2n × 2n spinor matrix 1₂ ⊗ H − i W·σ, spin index slowest.

    Parameters
    ----------
    h_eV : numpy.ndarray
        (n, n) spinless H0 + V.
    w : numpy.ndarray
        (3, n, n) from :meth:`SpinOrbitTerm.coupling`.
    out : numpy.ndarray, optional
        (2n, 2n) complex array to fill (any memory order).

    Returns
    -------
    numpy.ndarray
        [[H − iW_z, −iW_x − W_y], [−iW_x + W_y, H + iW_z]].
    """
    n = h_eV.shape[0]
    if out is None:
        out = np.empty((2 * n, 2 * n), dtype=complex)
    wx, wy, wz = w
    out[:n, :n] = h_eV - 1j * wz
    out[n:, n:] = h_eV + 1j * wz
    out[:n, n:] = -1j * wx - wy
    out[n:, :n] = -1j * wx + wy
    return out
