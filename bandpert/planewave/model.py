"""Plane-wave (nearly-free-electron / empirical-pseudopotential) model of a crystal.

    H(k)_{GG'} = ħ²|k+G|²/(2m0) δ_{GG'} + V(G − G')

H0 (the kinetic diagonal, which depends on k) and V (the potential matrix, the same at every k for
a local potential) are kept apart: the exact solver adds them, the perturbative solver treats V as
the perturbation of H0. The basis is a fixed set of reciprocal-lattice vectors with
ħ²|G|²/2m0 ≤ cutoff, independent of k.

Basis layout: the Hamiltonian index runs over (component, G) with the component index slowest;
``n_components`` is 1 for the spinless models here, so a spinor extension only adds a second
component block and a spin–orbit term without changing the G bookkeeping.
"""

from __future__ import annotations

from contextlib import AbstractContextManager
from dataclasses import dataclass

import numpy as np

from ..crystal.lattice import reciprocal_vectors
from ..errors import InputError
from ..input.material import Material
from ..planewave.formfactor import continuous_fourier_coefficients
from ..units import HBAR2_OVER_2M0_EV_A2

#: Relative tolerance for matching |G|² to a form-factor shell.
SHELL_TOLERANCE = 1e-6

#: Largest basis the tool will build (a 4000 × 4000 complex matrix is 256 MB).
MAX_BASIS = 4000


_THREADPOOLS: list = []


def single_blas_thread() -> AbstractContextManager:
    """Context in which BLAS/LAPACK run on one thread (threadpoolctl), for the per-k work.

    The matrices of a plane-wave model are small (n of a few hundred): on the 2-core benchmark
    machine one BLAS thread is as fast as two for the exact and the perturbative bands when the
    machine is idle, and several times faster when the other core is busy (the second thread
    then waits for a core at every synchronisation).
    """
    if not _THREADPOOLS:
        from threadpoolctl import ThreadpoolController

        _THREADPOOLS.append(ThreadpoolController())
    return _THREADPOOLS[0].limit(limits=1, user_api="blas")


@dataclass(frozen=True)
class PlaneWaveBasis:
    """Reciprocal-lattice vectors G with ħ²|G|²/2m0 ≤ cutoff.

    Attributes
    ----------
    miller : numpy.ndarray
        (n_G, d) integer coordinates of G in the reciprocal primitive basis.
    g_cart_invA : numpy.ndarray
        (n_G, d) Cartesian G in Å⁻¹.
    cutoff_eV : float
        Kinetic-energy cutoff.
    n_components : int
        Spinor components per plane wave (1: spinless).
    """

    miller: np.ndarray
    g_cart_invA: np.ndarray
    cutoff_eV: float
    n_components: int = 1

    @property
    def size(self) -> int:
        """Dimension of the Hamiltonian (plane waves × components)."""
        return int(self.miller.shape[0] * self.n_components)


def plane_wave_basis(reciprocal_invA: np.ndarray, cutoff_eV: float) -> PlaneWaveBasis:
    """All G = Σ m_i b_i with ħ²|G|²/2m0 ≤ ``cutoff_eV``, sorted by |G| then by Miller index.

    Parameters
    ----------
    reciprocal_invA : numpy.ndarray
        Reciprocal primitive vectors as rows (Å⁻¹).
    cutoff_eV : float
        Kinetic-energy cutoff in eV.

    Returns
    -------
    PlaneWaveBasis
    """
    b = np.asarray(reciprocal_invA, dtype=float)
    d = b.shape[0]
    g_max = np.sqrt(cutoff_eV / HBAR2_OVER_2M0_EV_A2)
    # |m_i| = |G·a_i|/2π ≤ |G| |a_i|/2π with a_i the direct vectors
    a_norms = np.linalg.norm(2.0 * np.pi * np.linalg.inv(b).T, axis=1)
    n_max = np.ceil(g_max * a_norms / (2.0 * np.pi)).astype(int)
    n_total = int(np.prod(2 * n_max + 1))
    if n_total > 50_000_000:
        raise InputError(f"a cutoff of {cutoff_eV:.4g} eV needs a search over {n_total} lattice "
                         "vectors; expected a smaller cutoff", key="basis.cutoff_eV")
    axes = [np.arange(-n, n + 1) for n in n_max]
    grid = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, d)
    g = grid @ b
    g2 = np.einsum("ij,ij->i", g, g)
    keep = g2 * HBAR2_OVER_2M0_EV_A2 <= cutoff_eV * (1 + 1e-12)
    grid, g, g2 = grid[keep], g[keep], g2[keep]
    order = np.lexsort((*grid.T[::-1], np.round(g2, 10)))
    return PlaneWaveBasis(miller=grid[order], g_cart_invA=g[order], cutoff_eV=float(cutoff_eV))


def fourier_coefficients(material: Material, miller: np.ndarray) -> np.ndarray:
    """V(G) in eV for integer reciprocal coordinates ``miller`` (any leading shape, last axis d).

    Implements the conventions of CONVENTIONS.md:

    - per species: V(G) = (1/N_atoms) Σ_j v_j(|G|²) exp(−i G·τ_j);
    - symmetric-antisymmetric (two atoms): V(G) = e^{−iG·c} [V_S cos(G·τ) + i V_A sin(G·τ)], with
      c the bond centre and τ = r_1 − c (for the diamond and zincblende structures with the origin
      at the bond centre, c = 0 and τ = a(1,1,1)/8; Cohen & Bergstresser, Phys. Rev. 141, 789
      (1966), eq. 2);
    - explicit Fourier coefficients by Miller index; 0 elsewhere;
    - continuous: V(G) = (Ω0/Ω_atom) w(|G|) (1/N) Σ_j v_j(|G|) exp(−iG·r_j), V(0) = 0, with
      v_j(q) = a1 (q² − a2) / (a3 exp(a4 q²) − 1) (Friedel, Hybertsen & Schlüter, Phys. Rev. B
      39, 7974 (1989); :func:`bandpert.formfactor.continuous_fourier_coefficients`), on any
      lattice.

    Tabulated form factors are defined on the listed |G|² shells (units (2π/a)²) and are zero
    off them.

    Parameters
    ----------
    material : Material
    miller : numpy.ndarray
        Integer array (..., d).

    Returns
    -------
    numpy.ndarray
        Complex V(G) with the leading shape of ``miller``.
    """
    pot = material.potential
    miller = np.asarray(miller)
    shape = miller.shape[:-1]
    if pot.form == "empty":
        return np.zeros(shape, dtype=complex)
    if pot.form == "fourier":
        return _lookup_fourier(np.array(pot.miller), np.array(pot.fourier_eV), miller)
    b = reciprocal_vectors(material.vectors_A)
    g = miller @ b
    if pot.form == "continuous":
        return continuous_fourier_coefficients(material, g, np.all(miller == 0, axis=-1))
    g2 = np.einsum("...i,...i->...", g, g) / (2.0 * np.pi / material.a_A) ** 2
    shells = np.array(pot.shells_g2)
    match = np.abs(g2[..., None] - shells) <= SHELL_TOLERANCE * np.maximum(shells, 1.0)
    on_shell = match.any(axis=-1)
    shell_index = match.argmax(axis=-1)
    positions = np.array([a.position_frac for a in material.atoms]) @ material.vectors_A
    if pot.form == "symmetric-antisymmetric":
        centre = positions.mean(axis=0)
        tau = positions[0] - centre
        gt = g @ tau
        vs = np.array(pot.symmetric_eV)[shell_index]
        va = np.array(pot.antisymmetric_eV)[shell_index]
        value = np.exp(-1j * (g @ centre)) * (vs * np.cos(gt) + 1j * va * np.sin(gt))
    else:
        value = np.zeros(shape, dtype=complex)
        for atom, r in zip(material.atoms, positions, strict=False):
            v_j = np.array(pot.species_eV[atom.species])[shell_index]
            value = value + v_j * np.exp(-1j * (g @ r))
        value = value / len(material.atoms)
    return np.where(on_shell, value, 0.0)


def _lookup_fourier(keys: np.ndarray, values: np.ndarray, miller: np.ndarray) -> np.ndarray:
    """Vectorised dictionary lookup of V by integer Miller index (0 where absent)."""
    span = int(max(np.abs(keys).max(), np.abs(miller).max())) * 2 + 1
    def code(m: np.ndarray) -> np.ndarray:
        c = np.zeros(m.shape[:-1], dtype=np.int64)
        for i in range(m.shape[-1]):
            c = c * span + (m[..., i] + span // 2)
        return c
    key_codes = code(keys)
    order = np.argsort(key_codes)
    sorted_codes = key_codes[order]
    q = code(miller)
    pos = np.clip(np.searchsorted(sorted_codes, q), 0, len(sorted_codes) - 1)
    found = sorted_codes[pos] == q
    return np.where(found, values[order][pos], 0.0)


def check_shells_exist(material: Material, basis: PlaneWaveBasis) -> None:
    """Refuse form-factor shells that no reciprocal-lattice vector of the basis reaches.

    Only the tabulated forms have shells; the other forms (empty, fourier, continuous) pass.

    Raises
    ------
    InputError
        Naming ``potential.shells`` and the |G|² values the lattice does have nearby.
    """
    pot = material.potential
    if pot.form not in ("symmetric-antisymmetric", "per-species"):
        return
    g2 = np.einsum("ij,ij->i", basis.g_cart_invA, basis.g_cart_invA)
    g2 = np.unique(np.round(g2 / (2 * np.pi / material.a_A) ** 2, 6))
    for s in pot.shells_g2:
        if g2.max() < s:
            continue  # beyond the basis: harmless, the shell is simply not reached
        if np.min(np.abs(g2 - s)) > SHELL_TOLERANCE * max(s, 1.0):
            near = ", ".join(f"{x:g}" for x in g2[np.argsort(np.abs(g2 - s))[:3]])
            raise InputError(f"|G|² = {s:g} (2π/a)² is not a shell of this lattice (nearest: "
                             f"{near}); expected |G|² values of the reciprocal lattice",
                             material.file, "potential.shells")


@dataclass(frozen=True)
class PlaneWaveModel:
    """H0 and V of a plane-wave model, kept apart.

    Attributes
    ----------
    basis : PlaneWaveBasis
    reciprocal_invA : numpy.ndarray
        Reciprocal primitive vectors (rows, Å⁻¹).
    potential_eV : numpy.ndarray
        (n, n) Hermitian V(G − G'); real symmetric (float64) when every V(G) is real, which
        happens for a centrosymmetric crystal with the origin at an inversion centre.
    """

    basis: PlaneWaveBasis
    reciprocal_invA: np.ndarray
    potential_eV: np.ndarray

    @property
    def size(self) -> int:
        """Basis size."""
        return self.basis.size

    @property
    def is_real(self) -> bool:
        """True when H(k) is real symmetric at every k."""
        return not np.iscomplexobj(self.potential_eV)

    def kinetic_eV(self, k_cart_invA: np.ndarray) -> np.ndarray:
        """H0: ħ²|k+G|²/2m0 for each k (rows) and G (columns), shape (n_k, n) in eV."""
        k = np.atleast_2d(np.asarray(k_cart_invA, dtype=float))
        kg = k[:, None, :] + self.basis.g_cart_invA[None, :, :]
        return HBAR2_OVER_2M0_EV_A2 * np.einsum("kgi,kgi->kg", kg, kg)

    def hamiltonian(self, k_cart_invA: np.ndarray) -> np.ndarray:
        """Full H(k) = H0(k) + V for one k-point, shape (n, n)."""
        h = self.potential_eV.copy()
        idx = np.arange(self.size)
        h[idx, idx] += self.kinetic_eV(k_cart_invA)[0]
        return h


def build_model(material: Material, cutoff_eV: float) -> PlaneWaveModel:
    """Build the plane-wave model of a material at a given cutoff.

    The potential matrix V_{GG'} = V(G − G') is built once, vectorised over all pairs.

    Parameters
    ----------
    material : Material
    cutoff_eV : float
        Kinetic-energy cutoff.

    Returns
    -------
    PlaneWaveModel
    """
    b = reciprocal_vectors(material.vectors_A)
    basis = plane_wave_basis(b, cutoff_eV)
    if basis.size > MAX_BASIS:
        gib = basis.size**2 * 16 / 2**30
        raise InputError(f"a cutoff of {cutoff_eV:.4g} eV gives {basis.size} plane waves "
                         f"(matrices of {gib:.1f} GiB each; the limit is {MAX_BASIS}); expected a "
                         "smaller cutoff", material.file, "basis.cutoff_eV")
    check_shells_exist(material, basis)
    diff = basis.miller[:, None, :] - basis.miller[None, :, :]
    v = fourier_coefficients(material, diff)
    if not np.allclose(v, v.conj().T, atol=1e-12):
        raise InputError("the potential matrix is not Hermitian; expected V(-G) = V(G)*",
                         material.file, "potential")
    if np.max(np.abs(v.imag), initial=0.0) <= 1e-12 * max(1.0, np.max(np.abs(v), initial=0.0)):
        v = np.ascontiguousarray(v.real)
    return PlaneWaveModel(basis=basis, reciprocal_invA=b, potential_eV=v)
