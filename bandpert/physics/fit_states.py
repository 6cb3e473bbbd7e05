"""Eigenpairs at the points a fit's targets need, each computed once per parameter vector.

A fit evaluates its targets (:mod:`bandpert.physics.fit_targets`) at a parameter vector p and
then, at the same p, their Jacobian. Both need the same eigenpairs: the labelled points, the
conduction minimum found on its line (:mod:`bandpert.physics.fit_valley`) and the three points
of every mass stencil (:mod:`bandpert.physics.fit_masses`); and several targets share points
(the heavy- and light-hole masses one stencil, a labelled point the centre of a stencil there,
the minimum the centre of its two mass stencils). :class:`PointStates` diagonalises each
(plane-wave set, k) once for one material and keeps the result, so the Jacobian at p reuses
what the residuals at p computed.

Slopes by first-order perturbation theory (Hellmann–Feynman, ∂E_n/∂x = ⟨n|∂H/∂x|n⟩; H. Hellmann
1937, R. P. Feynman, Phys. Rev. 56, 340 (1939)), with ∂H/∂x a central difference of the matrix
H (not of eigenvalues), on the same plane waves:

* along k (:meth:`PointStates.k_slope`): ∂H/∂k·d by the four-point central difference
  [8(H(k + εd) − H(k − εd)) − (H(k + 2εd) − H(k − 2εd))]/(12ε), exact for the kinetic term
  (quadratic in k + G) and O(ε⁴) for the radial factors of the spin–orbit term and the
  nonlocal wells; ε = 1e-3, not smaller: the wells' radial overlap once lost digits where
  |K| ≈ |K′| (pairs of plane waves equal at a symmetric point such as L), which a two-point
  difference at ε = 1e-5 turned into 1e-6 eV of noise in the slope (the overlap now keeps them,
  :func:`~bandpert.planewave.nonlocal_term.radial_overlap`; the four-point step stays, and
  its O(ε⁴) error is below the rounding of a smaller step);
* along a parameter (:class:`ParameterSlopes`): ∂H/∂p = [H(p + δ; k(p + δ)) − H(p − δ;
  k(p − δ))]/(2δ), k at fixed fractional coordinates (exact for the parameters H is linear
  in: form factors, spin–orbit strengths, well depths).

Degenerate levels (a group of d levels within :data:`DEGENERACY_EV`, with projector P): the
derivative of each member is not ⟨n|∂H/∂p|n⟩ of whatever basis the eigensolver returned, but
(degenerate first-order perturbation theory; L. D. Landau & E. M. Lifshitz, Quantum Mechanics,
3rd ed. 1977, §39; from memory) an eigenvalue μ_1 ≤ … ≤ μ_d of the d × d matrix
M = ⟨i|∂H/∂p|j⟩ (i, j in the group): E_i(p) = E_0 + μ_i (p − p0) + O((p − p0)²) for p above
p0, so the k-th lowest member of the group moves with μ_k. Below p0 the order reverses (the
lowest member moves with μ_d): the derivative of a sorted band is one-sided where a parameter
splits a group at first order, as the spin–orbit strength does from 0 (the spinless triplet Γ25′
doubled into a sextet that splits linearly into Γ8 and Γ7). :class:`ParameterSlopes` gives the
one-sided derivative in the direction each column says (``directions``: +1, p increasing, the
default, and what the fit uses inside a range and at a lower bound, where least squares can only
increase p; −1 at an upper bound). Each parameter is diagonalised within the group on its own
(two parameters may split a group along different eigenbases). Where M is a multiple of the
identity (the parameter keeps the group degenerate: every parameter that keeps the double
group's level, e.g. a form factor at a spin–orbit Γ8) its eigenvalues are the group mean
Tr(P ∂H/∂p P)/d, which is returned as such (:data:`SPLIT_RTOL`). :class:`PointStates` keeps
every level of the highest group it keeps, so no group is cut at the top. The slopes along k
(:meth:`PointStates.k_slope`) take the same form, towards +d: the X1 level of the diamond
structure (a quartet with spin) splits linearly along Δ.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import fields, replace

import numpy as np
import scipy.linalg

from ..input.material import Material
from ..planewave.model import PlaneWaveModel, model_on_miller
from ..planewave.nonlocal_term import NonlocalTerm, nonlocal_term
from ..planewave.potential import fourier_coefficients
from ..planewave.spinorbit import SpinOrbitTerm, spin_orbit_term, spinor_hamiltonian

#: Step ε of the four-point difference of H along k, in units of the direction vector given.
K_STEP = 1e-3

#: Levels closer than this (consecutive, eV) are one degenerate group.
DEGENERACY_EV = 1e-6

#: A group's block of ∂H/∂p counts as a multiple of the identity (the group mean is every
#: member's derivative) when it differs from its mean diagonal by at most this fraction of its
#: own size (Frobenius norms).
SPLIT_RTOL = 1e-9

#: Levels added when the highest kept group may continue above the kept ones.
GROUP_EXTRA = 8

#: k (Å⁻¹) of a point for a material's lattice (fixed fractional coordinates).
KOf = Callable[[Material], np.ndarray]


def level_groups(w: np.ndarray) -> list[slice]:
    """The degenerate groups of sorted levels ``w``: runs whose consecutive gaps are below
    :data:`DEGENERACY_EV`."""
    breaks = np.flatnonzero(np.diff(w) >= DEGENERACY_EV) + 1
    edges = [0, *breaks.tolist(), len(w)]
    return [slice(a, b) for a, b in zip(edges[:-1], edges[1:], strict=True)]


def sorted_level_slopes(vectors: np.ndarray, dh_vectors: np.ndarray, groups: list[slice],
                        direction: float = 1.0) -> np.ndarray:
    """One-sided derivatives of sorted levels from ∂H/∂p (module docstring).

    M = C† ∂H/∂p C is formed once; a group whose block is a multiple of the identity to
    :data:`SPLIT_RTOL` (Frobenius norm of the block less its mean diagonal against the block's)
    gets the block's mean diagonal, a single level its ⟨n|∂H/∂p|n⟩, and only a group that
    splits is diagonalised.

    Parameters
    ----------
    vectors : numpy.ndarray
        (N, n) eigenvectors C (columns, by ascending level).
    dh_vectors : numpy.ndarray
        (N, n) ∂H/∂p C.
    groups : list of slice
        The degenerate groups (:func:`level_groups`), contiguous and covering the n levels.
    direction : float
        +1: the derivative for p increasing (the k-th member of a group moves with the k-th
        lowest eigenvalue of its block); −1: for p decreasing (the order reversed).

    Returns
    -------
    numpy.ndarray
        (n,) dE_n/dp.
    """
    m = vectors.conj().T @ dh_vectors
    starts = np.array([g.start for g in groups])
    sizes = np.array([g.stop - g.start for g in groups])
    label = np.repeat(np.arange(len(groups)), sizes)
    block = label[:, None] == label[None, :]
    mean = np.add.reduceat(m.diagonal().real, starts) / sizes
    out = mean[label]
    m2 = np.where(block, np.abs(m) ** 2, 0.0)
    dev2 = m2.copy()
    dev2[np.diag_indices_from(dev2)] = (m.diagonal().real - out) ** 2 + m.diagonal().imag ** 2
    spread = np.sqrt(np.add.reduceat(dev2.sum(axis=1), starts))
    scale = np.sqrt(np.add.reduceat(m2.sum(axis=1), starts))
    for i in np.flatnonzero(spread > SPLIT_RTOL * scale):
        g = groups[i]
        mu = np.linalg.eigvalsh(0.5 * (m[g, g] + m[g, g].conj().T))
        out[g] = mu if direction > 0 else mu[::-1]
    return out


class PointStates:
    """Models and eigenpairs of one material on the fit's fixed plane-wave sets.

    Parameters
    ----------
    material : Material
    n_bands : int
        Lowest eigenpairs kept at every point.
    share : bool
        Keep every point's eigenpairs (and slopes) for later requests; without it each
        request diagonalises anew (the reference path of the tests and the benchmark).

    Attributes
    ----------
    diagonalisations : int
        Count of eigenproblems solved.
    """

    def __init__(self, material: Material, n_bands: int, share: bool = True):
        self.material = material
        self.n_bands = int(n_bands)
        self.share = share
        self.diagonalisations = 0
        self._models: dict[int, tuple[np.ndarray, PlaneWaveModel]] = {}
        self._pairs: dict[tuple[int, bytes], tuple[np.ndarray, np.ndarray]] = {}
        self._k_slopes: dict[tuple[int, bytes, bytes], np.ndarray] = {}

    def model(self, miller: np.ndarray) -> PlaneWaveModel:
        """The material's model on the plane waves ``miller`` (built once)."""
        key = id(miller)
        if key not in self._models:  # the array is kept with its model: the id stays its own
            self._models[key] = (miller, model_on_miller(self.material, miller))
        return self._models[key][1]

    def eigenpairs(self, miller: np.ndarray, k_cart: np.ndarray
                   ) -> tuple[np.ndarray, np.ndarray]:
        """The lowest ``n_bands`` eigenvalues (eV) and eigenvectors (columns) of H(k), and
        the rest of the highest one's degenerate group (:func:`level_groups`: one level more
        is solved for to see whether it continues; a group cut at the top would give its
        members wrong derivatives)."""
        k = np.ascontiguousarray(k_cart, dtype=float)
        key = (id(miller), k.tobytes())
        if key in self._pairs:
            return self._pairs[key]
        h = self.model(miller).hamiltonian(k)
        size = h.shape[0]
        keep = min(self.n_bands, size)
        solve = keep + 1
        while True:
            solve = min(solve, size)
            w, c = scipy.linalg.eigh(h, subset_by_index=(0, solve - 1), driver="evr",
                                     check_finite=False)
            self.diagonalisations += 1
            while keep < solve and w[keep] - w[keep - 1] < DEGENERACY_EV:
                keep += 1
            if keep < solve or solve == size:
                break
            solve = keep + GROUP_EXTRA
        pair = (w[:keep], c[:, :keep])
        if self.share:
            self._pairs[key] = pair
        return pair

    def k_slope(self, miller: np.ndarray, k_cart: np.ndarray, direction: np.ndarray
                ) -> np.ndarray:
        """⟨n|∂H/∂k·d|n⟩ (eV per unit of d) for every kept state n at k (module docstring);
        within a degenerate group the sorted eigenvalues of ∂H/∂k·d in the group (the slopes
        of the sorted bands towards +d, :func:`sorted_level_slopes`)."""
        k = np.ascontiguousarray(k_cart, dtype=float)
        d = np.ascontiguousarray(direction, dtype=float)
        key = (id(miller), k.tobytes(), d.tobytes())
        if key in self._k_slopes:
            return self._k_slopes[key]
        w, c = self.eigenpairs(miller, k)
        model = self.model(miller)
        h = {s: model.hamiltonian(k + s * K_STEP * d) for s in (-2, -1, 1, 2)}
        dh = (8.0 * (h[1] - h[-1]) - (h[2] - h[-2])) / (12.0 * K_STEP)
        out = sorted_level_slopes(c, dh @ c, level_groups(w))
        if self.share:
            self._k_slopes[key] = out
        return out


def _same_lattice(a: Material, b: Material) -> bool:
    """Same lattice vectors, atoms and positions: the same plane waves, kinetic energies and
    structure factors."""
    return (np.array_equal(a.vectors_A, b.vectors_A)
            and np.array_equal(a.positions_cart_A, b.positions_cart_A)
            and [x.species for x in a.atoms] == [x.species for x in b.atoms])


def _same_spin_orbit(a: SpinOrbitTerm | None, b: SpinOrbitTerm | None) -> bool:
    if a is None or b is None:
        return a is b
    return (a.species == b.species and np.array_equal(a.strengths_eV, b.strengths_eV)
            and a.core_shells == b.core_shells and a.zetas_invA == b.zetas_invA
            and a.unit_invA == b.unit_invA)


#: A term's slope ∂T/∂p as a function of (K = k + G of the basis, structure factors).
TermSlope = Callable[[np.ndarray, np.ndarray], np.ndarray]

#: Marks a term whose slope needs the whole matrices (a term that appears or disappears).
WHOLE = "whole"


def _spin_orbit_slope(a: SpinOrbitTerm | None, b: SpinOrbitTerm | None, delta: float
                      ) -> TermSlope | str | None:
    """∂W/∂p from the terms at p ± δ: W is linear in the strengths, so a change of strengths
    alone is one coupling with the strengths' slope; anything else the difference of two."""
    if _same_spin_orbit(a, b):
        return None
    if a is None or b is None:
        return WHOLE
    if (a.species, a.core_shells, a.zetas_invA, a.unit_invA) == (
            b.species, b.core_shells, b.zetas_invA, b.unit_invA):
        return replace(a, strengths_eV=(a.strengths_eV - b.strengths_eV) / (2.0 * delta)
                       ).coupling
    return lambda kg, s: (a.coupling(kg, s) - b.coupling(kg, s)) / (2.0 * delta)


#: The depth-only shortcut of :func:`_wells_slope` knows a :class:`NonlocalTerm` of exactly these
#: fields with channels (l, A_l, R_l); a term with more (another kind of well) takes the exact
#: difference of the two terms. An energy-dependent term never reaches it: S^{-1/2} multiplies
#: every term, so its parameters take whole matrices (:func:`_energy_dependent`).
_DEPTH_LINEAR_FIELDS = {f.name for f in fields(NonlocalTerm)} == {
    "species", "channels", "atom_volume_A3", "energy_slopes", "atom_species", "positions_A"}


def _energy_dependent(material: Material) -> bool:
    """True when a l = 0 depth follows the energy (planewave.nonlocal_term)."""
    wells = nonlocal_term(material)
    return wells is not None and wells.energy_dependent


def _wells_slope(a: NonlocalTerm | None, b: NonlocalTerm | None, delta: float
                 ) -> TermSlope | str | None:
    """∂V_NL/∂p from the terms at p ± δ: V_NL is linear in the depths A_l, so a change of depths
    alone is one term of the changed channels with the depths' slope; anything else (a radius,
    or a term of another form than (l, A_l, R_l) channels) the difference of two."""
    if a == b:
        return None
    if a is None or b is None:
        return WHOLE

    def shape(term: NonlocalTerm) -> list:
        return [[(ell, r) for ell, _, r in channels] for channels in term.channels]

    if (_DEPTH_LINEAR_FIELDS and all(len(c) == 3 for t in (a, b) for s in t.channels for c in s)
            and (a.species, a.atom_volume_A3, shape(a)) == (b.species, b.atom_volume_A3, shape(b))):
        channels = tuple(tuple((ell, (x - y) / (2.0 * delta), r)
                               for (ell, x, r), (_, y, _) in zip(ca, cb, strict=True) if x != y)
                         for ca, cb in zip(a.channels, b.channels, strict=True))
        return replace(a, channels=channels).matrix
    return lambda kg, s: (a.matrix(kg, s) - b.matrix(kg, s)) / (2.0 * delta)


class ParameterSlopes:
    """dE_n/dp at points of a :class:`PointStates`, for every parameter (module docstring).

    A parameter that keeps the lattice and the atoms (form factors, spin–orbit strengths, well
    depths and radii) changes only some terms of H = 1₂ ⊗ (H0 + V + V_NL(k)) + H_so(k): the
    difference is built from those terms alone (V(p ± δ) once per plane-wave set, V_NL and
    H_so per point only when they change, as one term with the slope of the strengths or depths
    they are linear in); H0 and every unchanged term cancel exactly. A parameter that moves the
    lattice or changes H0 itself (the kinetic factor β), or changes a ``spin_orbit`` or
    ``nonlocal`` table in a way its term does not carry, takes the difference of the whole
    matrices. Levels of a degenerate group get the eigenvalues of ∂H/∂p within the group,
    sorted for the direction of the column (:func:`sorted_level_slopes`).

    Parameters
    ----------
    states : PointStates
        At the current parameters (their eigenvectors are used).
    perturbed : list of (Material, Material, float)
        Per parameter: the material at p + δ, at p − δ, and δ.
    differences : dict, optional
        A cache, kept by the caller across Jacobians, of the distinct G − G′ of each
        plane-wave set (V is evaluated on those only).
    directions : sequence of float, optional
        Per column, +1 (default) for the derivative with p increasing, −1 with p decreasing:
        they differ where the parameter splits a degenerate group (module docstring).
    """

    def __init__(self, states: PointStates,
                 perturbed: list[tuple[Material, Material, float]],
                 differences: dict | None = None,
                 directions: Sequence[float] | None = None):
        self.states = states
        self.perturbed = perturbed
        self.directions = (np.ones(len(perturbed)) if directions is None
                           else np.asarray(directions, dtype=float))
        if self.directions.shape != (len(perturbed),):
            raise ValueError("one direction per column of perturbed materials expected")
        self._differences = {} if differences is None else differences
        self._models: dict[tuple[int, int, int], tuple[np.ndarray, PlaneWaveModel]] = {}
        self._potential: dict[tuple[int, int], np.ndarray | None] = {}
        self._done: dict[tuple[int, bytes], np.ndarray] = {}
        base = states.material
        self._terms: list[tuple[TermSlope | None, TermSlope | None] | None] = []
        for plus, minus, delta in perturbed:
            terms = None
            if (_same_lattice(plus, base) and _same_lattice(minus, base)
                    and plus.potential.kinetic_factor == base.potential.kinetic_factor
                    == minus.potential.kinetic_factor
                    and not any(_energy_dependent(m) for m in (plus, minus, base))):
                # else H0 itself changes, or S^{-1/2} multiplies every term: whole matrices
                so = spin_orbit_term(plus), spin_orbit_term(minus)
                wells = nonlocal_term(plus), nonlocal_term(minus)
                # a change of the input tables that their terms do not show (a key the model
                # reads elsewhere) is left to the whole matrices, which see everything
                if not ((plus.spin_orbit != minus.spin_orbit and _same_spin_orbit(*so))
                        or (plus.nonlocal_terms != minus.nonlocal_terms
                            and wells[0] == wells[1])):
                    terms = (_spin_orbit_slope(*so, delta), _wells_slope(*wells, delta))
            self._terms.append(None if terms is None or WHOLE in terms else terms)

    @property
    def n_parameters(self) -> int:
        return len(self.perturbed)

    def _model(self, j: int, side: int, miller: np.ndarray) -> PlaneWaveModel:
        key = (j, side, id(miller))
        if key not in self._models:
            self._models[key] = (miller, model_on_miller(self.perturbed[j][side], miller))
        return self._models[key][1]

    def _potential_slope(self, j: int, miller: np.ndarray) -> np.ndarray | None:
        """[V(p + δ) − V(p − δ)]/(2δ) on the plane waves (None when V does not change)."""
        key = (j, id(miller))
        if key not in self._potential:
            if id(miller) not in self._differences:
                diff = (miller[:, None, :] - miller[None, :, :]).reshape(-1, miller.shape[1])
                unique, inverse = np.unique(diff, axis=0, return_inverse=True)
                self._differences[id(miller)] = (miller, unique, inverse.reshape(-1))
            _, unique, inverse = self._differences[id(miller)]
            plus, minus, delta = self.perturbed[j]
            dv = (fourier_coefficients(plus.local_spinless(), unique)
                  - fourier_coefficients(minus.local_spinless(), unique)) / (2.0 * delta)
            n = len(miller)
            self._potential[key] = (dv[inverse].reshape(n, n) if np.any(dv != 0) else None)
        return self._potential[key]

    def _applied(self, j: int, miller: np.ndarray, k_of: KOf, vectors: np.ndarray
                 ) -> np.ndarray | None:
        """∂H/∂p_j applied to the columns of ``vectors`` (None: ∂H/∂p_j = 0 here)."""
        plus, minus, delta = self.perturbed[j]
        if self._terms[j] is None:  # the lattice moves: whole matrices
            dh = (self._model(j, 0, miller).hamiltonian(k_of(plus))
                  - self._model(j, 1, miller).hamiltonian(k_of(minus))) / (2.0 * delta)
            return dh @ vectors
        so, wells = self._terms[j]
        model = self.states.model(miller)
        kg = k_of(self.states.material) + model.basis.g_cart_invA
        n = model.size
        ds = self._potential_slope(j, miller)
        if wells is not None:
            dw = wells(kg, model.structure)
            ds = dw if ds is None else ds + dw
        if so is not None:
            return spinor_hamiltonian(np.zeros((n, n)) if ds is None else ds,
                                      so(kg, model.structure)) @ vectors
        if ds is None:
            return None
        if model.n_components == 1:
            return ds @ vectors
        return np.concatenate([ds @ vectors[:n], ds @ vectors[n:]])

    def at(self, miller: np.ndarray, k_of: KOf) -> np.ndarray:
        """(n_states, n_parameters) dE_n/dp at the point k_of(material) for every kept state
        (sorted bands; one-sided as :attr:`directions` says where a group splits).

        ``k_of`` gives the point's k for a material's lattice (so a lattice constant moves it).
        """
        k = np.ascontiguousarray(k_of(self.states.material), dtype=float)
        key = (id(miller), k.tobytes())
        if key in self._done:
            return self._done[key]
        w, c = self.states.eigenpairs(miller, k)
        groups = level_groups(w)
        out = np.zeros((c.shape[1], self.n_parameters))
        for j in range(self.n_parameters):
            applied = self._applied(j, miller, k_of, c)
            if applied is not None:
                out[:, j] = sorted_level_slopes(c, applied, groups, self.directions[j])
        if self.states.share:
            self._done[key] = out
        return out
