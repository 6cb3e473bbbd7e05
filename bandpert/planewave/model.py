"""Plane-wave (nearly-free-electron / empirical-pseudopotential) model of a crystal.

    H(k)_{GG'} = ħ²|k+G|²/(2m0) δ_{GG'} + V(G − G')

H0 (the kinetic diagonal, which depends on k) and V (the potential matrix, the same at every k for
a local potential) are kept apart: the exact solver adds them, the perturbative solver treats V as
the perturbation of H0. The basis is a fixed set of reciprocal-lattice vectors with
ħ²|G|²/2m0 ≤ cutoff, independent of k (:mod:`bandpert.planewave.basis`).

Two bases serve two purposes:

- :class:`KCentredModel`: at each k its own basis ħ²|k+G|²/2m0 ≤ cutoff, which keeps every
  degeneracy the little group of k requires. The exact bands along paths and on meshes use it
  (:func:`bandpert.planewave.solver.exact_energies`).
- :class:`PlaneWaveModel`: one fixed basis for every k. Built around Γ by :func:`build_model`
  (the perturbative series, reports of the basis size), or around a centre k0 by
  :func:`centred_model` for derivative stencils (masses, deformation potentials, gradients):
  the stencil's points must share one set of plane waves, or the differences would carry the
  jumps of the basis.

Basis layout: the Hamiltonian index runs over (component, G) with the component index slowest;
``n_components`` is 1 for a spinless model and 2 (spin up, spin down) when the material has a
``spin_orbit`` table: then H(k) = 1₂ ⊗ (H0 + V) + H_so(k) (:mod:`bandpert.planewave.spinorbit`),
with the same G bookkeeping. H_so depends on k, so V stays the spinless potential and the
spin–orbit term is built per k (:meth:`PlaneWaveModel.spin_orbit_coupling`).
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from ..crystal.lattice import reciprocal_vectors
from ..errors import InputError
from ..input.material import Material
from ..units import HBAR2_OVER_2M0_EV_A2
from .basis import MAX_BASIS, PlaneWaveBasis, k_centred_basis, plane_wave_basis
from .nonlocal_term import NonlocalTerm, nonlocal_term
from .potential import check_shells_exist, fourier_coefficients
from .spinorbit import (
    SpinOrbitTerm,
    require_spinless,
    spin_orbit_term,
    spinor_hamiltonian,
    structure_factors,
)


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
    spin_orbit : SpinOrbitTerm or None
        The spin–orbit parameters; None for a spinless model.
    structure : numpy.ndarray or None
        (n_species, n, n) S_s(G_i − G_j) of the spin–orbit and nonlocal terms.
    nonlocal_term : NonlocalTerm or None
        The nonlocal square wells (:mod:`~bandpert.planewave.nonlocal_term`); None for a local
        potential.
    kinetic_factor : float
        β of H0 = β ħ²|k+G|²/2m0 (1: the free-electron mass; the material's
        ``potential.kinetic_factor``). Every velocity ∂H0/∂k and curvature ∂²H0/∂k² carries it.
    """

    basis: PlaneWaveBasis
    reciprocal_invA: np.ndarray
    potential_eV: np.ndarray
    spin_orbit: SpinOrbitTerm | None = None
    structure: np.ndarray | None = field(default=None, repr=False)
    nonlocal_term: NonlocalTerm | None = None
    kinetic_factor: float = 1.0

    @property
    def kinetic_constant_eV_A2(self) -> float:
        """β ħ²/2m0 (eV Å²): H0 = this × |k+G|²."""
        return self.kinetic_factor * HBAR2_OVER_2M0_EV_A2

    @property
    def k_dependent(self) -> bool:
        """True when H(k) − H0(k) depends on k (spin–orbit or nonlocal terms): built per k."""
        return self.spin_orbit is not None or self.nonlocal_term is not None

    @property
    def size(self) -> int:
        """Basis size (plane waves)."""
        return self.basis.size

    @property
    def n_components(self) -> int:
        """1 for a spinless model, 2 for spinor plane waves."""
        return 1 if self.spin_orbit is None else 2

    @property
    def matrix_size(self) -> int:
        """Order of H(k): plane waves times components."""
        return self.n_components * self.size

    @property
    def is_real(self) -> bool:
        """True when H(k) is real symmetric at every k."""
        return not self.k_dependent and not np.iscomplexobj(self.potential_eV)

    def spin_orbit_coupling(self, k_cart_invA: np.ndarray) -> np.ndarray:
        """W(k) (3, n, n) of H_so = −i W·σ at one k (:mod:`~bandpert.planewave.spinorbit`)."""
        k = np.asarray(k_cart_invA, dtype=float).reshape(-1)
        return self.spin_orbit.coupling(k + self.basis.g_cart_invA, self.structure)

    def kinetic_eV(self, k_cart_invA: np.ndarray) -> np.ndarray:
        """H0: β ħ²|k+G|²/2m0 for each k (rows) and G (columns), shape (n_k, n) in eV."""
        k = np.atleast_2d(np.asarray(k_cart_invA, dtype=float))
        kg = k[:, None, :] + self.basis.g_cart_invA[None, :, :]
        return self.kinetic_constant_eV_A2 * np.einsum("kgi,kgi->kg", kg, kg)

    def unperturbed_eV(self, k_cart_invA: np.ndarray) -> np.ndarray:
        """Diagonal of H0 ⊗ 1 in the layout of :meth:`hamiltonian`, shape (n_k, matrix_size).

        The kinetic energies once per spin component (spin index slowest): every level of a
        spinor model's H0 is (at least) twofold.
        """
        kinetic = self.kinetic_eV(k_cart_invA)
        return kinetic if self.n_components == 1 else np.tile(kinetic, (1, self.n_components))

    def perturbation_eV(self, k_cart_invA: np.ndarray) -> np.ndarray:
        """V(k) = H(k) − H0(k) ⊗ 1 at one k, shape (matrix_size, matrix_size).

        1 ⊗ (V + V_NL(k)) + H_so(k) in the layout of :meth:`hamiltonian`; for a local spinless
        model the k-independent :attr:`potential_eV` itself.
        """
        if not self.k_dependent:
            return self.potential_eV
        k = np.asarray(k_cart_invA, dtype=float).reshape(-1)
        if self.nonlocal_term is not None and self.nonlocal_term.energy_dependent:
            # S^{-1/2} H_c S^{-1/2} is not H0 plus a sum of terms: V is the rest
            h = self.hamiltonian(k)
            idx = np.arange(self.matrix_size)
            h[idx, idx] -= self.unperturbed_eV(k)[0]
            return h
        v = self.potential_eV.astype(complex)
        if self.nonlocal_term is not None:
            v += self.nonlocal_term.matrix(k + self.basis.g_cart_invA, self.structure)
        if self.spin_orbit is None:
            return v
        return spinor_hamiltonian(v, self.spin_orbit_coupling(k))

    def wells_eV(self, k_cart_invA: np.ndarray) -> np.ndarray:
        """H(k) less the same model without its wells, (matrix_size, matrix_size), at one k.

        1_c ⊗ V_NL(k) (to rounding) for constant depths; with an energy-dependent well
        S^{−1/2} H_c S^{−1/2} − (H0 + V + H_so) (:mod:`~bandpert.planewave.nonlocal_term`), which
        is not spin-diagonal in general.
        """
        k = np.asarray(k_cart_invA, dtype=float).reshape(-1)
        return self.hamiltonian(k) - replace(self, nonlocal_term=None).hamiltonian(k)

    def hamiltonian(self, k_cart_invA: np.ndarray) -> np.ndarray:
        """Full H(k) = H0(k) + V (+ H_so(k)) for one k-point, shape (matrix_size, matrix_size).

        With an energy-dependent l = 0 well, S^{−1/2} H_c(k) S^{−1/2}
        (:mod:`~bandpert.planewave.nonlocal_term`): its eigenvalues are the energies.

        With spin–orbit the matrix is the spinor one, spin index slowest
        (:func:`~bandpert.planewave.spinorbit.spinor_hamiltonian`); its eigenvectors are the
        spinor states: component s·n + i is the amplitude of |k + G_i, s⟩, s = 0 (↑), 1 (↓).
        """
        h = self.potential_eV.copy()
        idx = np.arange(self.size)
        h[idx, idx] += self.kinetic_eV(k_cart_invA)[0]
        wells = self.nonlocal_term
        if wells is not None:
            k = np.asarray(k_cart_invA, dtype=float).reshape(-1)
            h = h + wells.matrix(k + self.basis.g_cart_invA, self.structure)
        if self.spin_orbit is not None:
            h = spinor_hamiltonian(h, self.spin_orbit_coupling(k_cart_invA))
        if wells is not None:
            h = wells.orthogonalised(h, k + self.basis.g_cart_invA)
        return h


def build_model(material: Material, cutoff_eV: float, spin_orbit: bool = False
                ) -> PlaneWaveModel:
    """Build the plane-wave model of a material at a given cutoff.

    The potential matrix V_{GG'} = V(G − G') is built once, vectorised over all pairs.

    Parameters
    ----------
    material : Material
    cutoff_eV : float
        Kinetic-energy cutoff.
    spin_orbit : bool
        The caller handles spinor models (2n × 2n, :attr:`PlaneWaveModel.n_components`).
        Without it a material with a ``spin_orbit`` table is refused, so that no computation
        returns spinless numbers for a material that asks for spin–orbit coupling.

    Returns
    -------
    PlaneWaveModel
    """
    _check_spinless(material, spin_orbit)
    b = reciprocal_vectors(material.vectors_A)
    basis = plane_wave_basis(b, cutoff_eV)
    if basis.size > MAX_BASIS:
        gib = basis.size**2 * 16 / 2**30
        raise InputError(f"a cutoff of {cutoff_eV:.4g} eV gives {basis.size} plane waves "
                         f"(matrices of {gib:.1f} GiB each; the limit is {MAX_BASIS}); expected a "
                         "smaller cutoff", material.file, "basis.cutoff_eV")
    check_shells_exist(material, basis)
    return _model(material, basis, b)


def _check_spinless(material: Material, spin_orbit: bool) -> None:
    """Refuse spin–orbit parameters unless the caller handles spinor models."""
    if not spin_orbit:
        require_spinless(material)


def _model(material: Material, basis: PlaneWaveBasis, b: np.ndarray) -> PlaneWaveModel:
    """The model on a given basis: V always, the spin–orbit term when the material has one."""
    v = _potential_matrix(material, basis.miller)
    term = spin_orbit_term(material)
    wells = nonlocal_term(material)
    beta = material.potential.kinetic_factor
    if term is None and wells is None:
        return PlaneWaveModel(basis=basis, reciprocal_invA=b, potential_eV=v,
                              kinetic_factor=beta)
    diff = basis.miller[:, None, :] - basis.miller[None, :, :]
    return PlaneWaveModel(basis=basis, reciprocal_invA=b, potential_eV=v, spin_orbit=term,
                          structure=structure_factors(material, diff)[1],
                          nonlocal_term=wells, kinetic_factor=beta)


def _potential_matrix(material: Material, miller: np.ndarray) -> np.ndarray:
    """V(G − G') on a basis given by Miller indices: Hermitian, real when every V(G) is."""
    v = fourier_coefficients(material.local_spinless(),
                             miller[:, None, :] - miller[None, :, :])
    if not np.allclose(v, v.conj().T, atol=1e-12):
        raise InputError("the potential matrix is not Hermitian; expected V(-G) = V(G)*",
                         material.file, "potential")
    if np.max(np.abs(v.imag), initial=0.0) <= 1e-12 * max(1.0, np.max(np.abs(v), initial=0.0)):
        v = np.ascontiguousarray(v.real)
    return v


def centred_model(material: Material, cutoff_eV: float, k0_cart_invA: np.ndarray,
                  spin_orbit: bool = False) -> PlaneWaveModel:
    """The fixed-basis model {G : ħ²|k0+G|²/2m0 ≤ cutoff}, centred on k0.

    For derivative stencils around k0: every point k0 + δ of the stencil is diagonalised in
    this one basis, so finite differences see the bands, not jumps of the basis. At k0 itself
    the basis keeps every symmetry of the little group of k0
    (:func:`~bandpert.planewave.basis.k_centred_basis`).

    Parameters
    ----------
    material : Material
    cutoff_eV : float
        Kinetic-energy cutoff on ħ²|k0+G|²/2m0 (eV).
    k0_cart_invA : numpy.ndarray
        (d,) Cartesian centre (Å⁻¹).
    spin_orbit : bool
        The caller handles spinor models (as in :func:`build_model`).

    Returns
    -------
    PlaneWaveModel
        Its ``kinetic_eV`` may be evaluated at any k; it is symmetric at k0.
    """
    _check_spinless(material, spin_orbit)
    b = reciprocal_vectors(material.vectors_A)
    basis = k_centred_basis(b, cutoff_eV, np.asarray(k0_cart_invA, dtype=float))
    if basis.size > MAX_BASIS:
        raise InputError(f"a cutoff of {cutoff_eV:.4g} eV gives {basis.size} plane waves (the "
                         f"limit is {MAX_BASIS}); expected a smaller cutoff", material.file,
                         "basis.cutoff_eV")
    return _model(material, basis, b)


@dataclass(frozen=True)
class KCentredModel:
    """A plane-wave model whose basis at each k is {G : ħ²|k+G|²/2m0 ≤ cutoff}.

    The basis at k is invariant under the little group of k, so the degeneracies its
    irreducible representations require hold to rounding at every labelled point
    (Bouckaert, Smoluchowski & Wigner, Phys. Rev. 50, 58 (1936)). The potential is kept as a
    table of V(G) over a box of Miller indices, so H(k) is gathered per k from
    V(G_i − G_j) without evaluating any form factor again (:meth:`hamiltonian_parts`).

    Attributes
    ----------
    material : Material
    cutoff_eV : float
    reciprocal_invA : numpy.ndarray
        Reciprocal primitive vectors (rows, Å⁻¹).
    gamma : PlaneWaveModel
        The Γ-centred model of the same cutoff (its size is the basis size reported).
    """

    material: Material
    cutoff_eV: float
    reciprocal_invA: np.ndarray
    gamma: PlaneWaveModel
    _tables: dict = field(default_factory=dict, compare=False, repr=False)

    @property
    def spin_orbit(self) -> SpinOrbitTerm | None:
        """The spin–orbit term (None for a spinless model)."""
        return self.gamma.spin_orbit

    @property
    def n_components(self) -> int:
        """1 for a spinless model, 2 for spinor plane waves."""
        return self.gamma.n_components

    @property
    def nonlocal_term(self) -> NonlocalTerm | None:
        """The nonlocal square wells (None for a local potential)."""
        return self.gamma.nonlocal_term

    @property
    def k_dependent(self) -> bool:
        """True when spin–orbit or nonlocal terms make H(k) − H0(k) depend on k."""
        return self.gamma.k_dependent

    @property
    def kinetic_factor(self) -> float:
        """β of H0 = β ħ²|k+G|²/2m0 (:class:`PlaneWaveModel`)."""
        return self.gamma.kinetic_factor

    @property
    def kinetic_constant_eV_A2(self) -> float:
        """β ħ²/2m0 (eV Å²) of H0 = β ħ²|k+G|²/2m0 (:class:`PlaneWaveModel`)."""
        return self.gamma.kinetic_constant_eV_A2

    @property
    def size(self) -> int:
        """Basis size at Γ (at other k the size differs by a few plane waves)."""
        return self.gamma.size

    @property
    def is_real(self) -> bool:
        """True when H(k) is real symmetric at every k."""
        return self.gamma.is_real

    def at(self, k0_cart_invA: np.ndarray, spin_orbit: bool = False) -> PlaneWaveModel:
        """The fixed basis centred on k0, for stencils around k0 (:func:`centred_model`).

        ``spin_orbit``: the caller handles spinor models (else a spin–orbit model is refused).
        """
        return centred_model(self.material, self.cutoff_eV, k0_cart_invA, spin_orbit)

    def candidates(self, reach_invA: float
                   ) -> tuple[PlaneWaveBasis, np.ndarray, np.ndarray, int]:
        """Every G of the bases of all k with |k| ≤ reach, and V over their differences.

        Returns
        -------
        basis : PlaneWaveBasis
            G with |G| ≤ G_max + reach.
        flat : numpy.ndarray
            (n_G,) integer code of each G, such that V(G_i − G_j) = table[origin + flat_i −
            flat_j].
        table : numpy.ndarray
            Flat V over the box of differences, with one extra 0 at the end (index −1, for
            padding rows and columns).
        origin : int
            Index of G = 0 in ``table``.
        """
        return self._cached(reach_invA)[:4]

    def structure_table(self, reach_invA: float) -> np.ndarray:
        """(n_species, len(table)) S_s over the box of :meth:`candidates`, same indexing.

        S_s(G_i − G_j) = row_s[origin + flat_i − flat_j]; the last entry is a padding 0.
        """
        return self._cached(reach_invA)[4]

    def _cached(self, reach_invA: float) -> tuple:
        key = float(np.ceil(reach_invA * 8.0) / 8.0)  # reuse a table for nearby reaches
        found = [r for r in self._tables if r >= key]
        if found:
            return self._tables[min(found)]
        g_max = np.sqrt(self.cutoff_eV / HBAR2_OVER_2M0_EV_A2)
        basis = plane_wave_basis(self.reciprocal_invA,
                                 HBAR2_OVER_2M0_EV_A2 * (g_max + key) ** 2)
        span = 2 * np.max(np.abs(basis.miller), axis=0) + 1
        width = 2 * span - 1  # differences run over −(span − 1) … span − 1
        strides = np.cumprod(np.r_[1, width[::-1][:-1]])[::-1]
        axes = [np.arange(-(s - 1), s) for s in span]
        box = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, len(span))
        table = fourier_coefficients(self.material.local_spinless(), box)
        if np.max(np.abs(table.imag), initial=0.0) <= 1e-12 * max(
                1.0, np.max(np.abs(table), initial=0.0)):
            table = np.ascontiguousarray(table.real)
        table = np.append(table, 0.0)
        structure = None
        if self.gamma.k_dependent:
            s = structure_factors(self.material, box)[1]
            structure = np.concatenate([s, np.zeros((len(s), 1))], axis=1)
        origin = int(np.sum((span - 1) * strides))
        flat = basis.miller @ strides
        self._tables.clear()
        self._tables[key] = (basis, flat, table, origin, structure)
        return self._tables[key]


def build_k_centred_model(material: Material, cutoff_eV: float) -> KCentredModel:
    """The model with a basis centred on each k (:class:`KCentredModel`).

    Parameters
    ----------
    material : Material
    cutoff_eV : float
        Kinetic-energy cutoff on ħ²|k+G|²/2m0 (eV).

    Returns
    -------
    KCentredModel
    """
    gamma = build_model(material, cutoff_eV, spin_orbit=True)
    return KCentredModel(material=material, cutoff_eV=float(cutoff_eV),
                         reciprocal_invA=gamma.reciprocal_invA, gamma=gamma)


def model_on_miller(material: Material, miller: np.ndarray, cutoff_eV: float = 0.0
                    ) -> PlaneWaveModel:
    """The model on a given set of plane waves (Miller indices), spin–orbit included.

    For quantities followed while parameters change (a fit): the same plane waves at every
    parameter value keep the energies smooth in the parameters, where a cutoff would add and
    drop plane waves as the lattice constant moves.

    Parameters
    ----------
    material : Material
    miller : numpy.ndarray
        (n, d) integer reciprocal coordinates of the plane waves.
    cutoff_eV : float
        Recorded on the basis only.

    Returns
    -------
    PlaneWaveModel
    """
    b = reciprocal_vectors(material.vectors_A)
    miller = np.asarray(miller)
    basis = PlaneWaveBasis(miller=miller, g_cart_invA=miller @ b, cutoff_eV=float(cutoff_eV))
    return _model(material, basis, b)
