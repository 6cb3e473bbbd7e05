"""Double-group (spinor) labels of the levels of a model with spin–orbit coupling.

A spinor plane wave |k+G, s⟩ goes under g = {R|t} to e^{−iR(k+G)·t} Σ_s′ U(R)_{s′s} |R(k+G), s′⟩,
with U(R) the SU(2) matrix of the proper part of R (inversion leaves the spin alone). The lift
U(R) and the small projective irreps of the little group are spgrep's
(``get_spacegroup_spinor_irreps_from_primitive_symmetry``, ``get_spinor_unitary_rotation``),
so the characters traced on the eigenvectors reduce on them directly. Names at Γ follow Koster,
Dimmock, Wheeler & Statz, *Properties of the Thirty-Two Point Groups* (1963) (from memory): the
two-dimensional irreps are Γ6 (the spin-½ representation itself: χ(C4 or S4)/χ_{½} = +1) and Γ7
(−1), the four-dimensional one Γ8; with inversion a ± parity is appended (Γ8+, Γ7+ at the
valence top of silicon and germanium). Elsewhere the neutral ``<point>#<n>(<dim>)``.
Time reversal (θ² = −1 for spin ½) is judged by Herring's test on the double group:
W = (1/|G_k/T|) Σ_{g: g k ≡ −k} χ(g²), with g² taken in the double group (the SU(2) lift of g
squared, which is ± the lift of the representative of g²), is −1 where time reversal adds no
degeneracy, 0 where the irrep sticks to its complex conjugate, +1 where it appears twice — the
signs of the spinless test reversed (Herring, Phys. Rev. 52, 361 (1937); Bradley & Cracknell,
*The Mathematical Theory of Symmetry in Solids*, 1972, §7.5 — from memory). The indicator
reported is −W, so +1, 0, −1 mean what they mean for spinless irreps. A level of two irreps
with indicator 0 (complex-conjugate characters where −k ≡ k), or of one irrep twice with
indicator −1, is stuck by time reversal, not accidental.
"""

from __future__ import annotations

import numpy as np
import scipy.linalg
from spgrep import get_spacegroup_spinor_irreps_from_primitive_symmetry
from spgrep.spinor import get_spinor_unitary_rotation

from ..input.material import Material
from ..planewave.model import centred_model
from ..planewave.solver import single_blas_thread
from .groups import ATOL, SpaceGroupFrame

__all__ = ["spinor_levels"]


def _names(frame: SpaceGroupFrame, k: np.ndarray, indices: np.ndarray, chars: np.ndarray,
           unitary: np.ndarray, dims: np.ndarray, point: str) -> list[str]:
    """Koster's Γ6/Γ7/Γ8 (± with inversion) at Γ, neutral names elsewhere."""
    out = []
    gamma = bool(np.allclose(k, np.rint(k), atol=ATOL))
    rots = frame.rotations_cart[indices]
    dets = np.linalg.det(rots)
    proper = rots * dets[:, None, None]
    fourfold = np.isclose(np.trace(proper, axis1=1, axis2=2), 1.0)  # C4 or S4 (±R a C4)
    inversion = np.flatnonzero(np.isclose(np.trace(rots, axis1=1, axis2=2), -3.0))
    spin_half = np.trace(unitary, axis1=1, axis2=2)
    for i, chi in enumerate(chars):
        name = None
        if gamma and fourfold.any():
            j = int(np.flatnonzero(fourfold)[0])
            if dims[i] == 4:
                name = "Γ8"
            elif dims[i] == 2 and abs(spin_half[j]) > 1e-6:
                ratio = (chi[j] / spin_half[j]).real
                name = "Γ6" if ratio > 0.5 else "Γ7" if ratio < -0.5 else None
            if name is not None and inversion.size:
                name += "+" if chi[inversion[0]].real > 0 else "−"
        out.append(name or f"{point}#{i + 1}({int(dims[i])})")
    return out


def spinor_levels(material: Material, cutoff_eV: float, frame: SpaceGroupFrame,
                  k_frac: np.ndarray, point: str, n_bands: int, level_tol_eV: float,
                  states: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None
                  ) -> tuple[list[tuple[float, int, int, tuple[int, ...], str, bool]], list[str],
                             np.ndarray, int, np.ndarray]:
    """Levels of the spinor H(k) with their double-group irreps.

    ``states``: ``(miller, energies_eV, vectors)`` of the spinor basis centred on k (every
    eigenpair, vectors of 2·len(miller) rows, spin index slowest) instead of diagonalising here.

    Returns
    -------
    levels : list of (energy_eV, first_band, degeneracy, irreps, label, time_reversal)
        ``time_reversal``: irreps that time reversal sticks together (:func:`spinor_herring`).
    names : list of str
        Name of each small irrep.
    dims : numpy.ndarray
    order : int
        Order of the little co-group.
    herring : numpy.ndarray
        Herring's indicator per irrep (:func:`spinor_herring`).
    """
    k = np.asarray(k_frac, dtype=float)
    if states is None:
        model = centred_model(material, cutoff_eV,
                              k @ np.linalg.inv(frame.lattice_t) * 2 * np.pi, spin_orbit=True)
        h = model.hamiltonian(k @ model.reciprocal_invA)
        size, top = h.shape[0], min(h.shape[0], n_bands + 16)
        with single_blas_thread():
            w, v = scipy.linalg.eigh(h, subset_by_index=(0, top - 1), driver="evr")
        miller = model.basis.miller
    else:  # every eigenpair of the basis centred on k (e.g. the van Hove classification's)
        miller, w, v = states
        size = top = w.size
    irreps, _, unitary, mapping = get_spacegroup_spinor_irreps_from_primitive_symmetry(
        frame.lattice_t.T, frame.rotations, frame.translations, kpoint=k)
    mapping = np.asarray(mapping, dtype=int)
    chars = np.array([[np.trace(m) for m in ir] for ir in irreps], dtype=complex)
    dims = np.array([ir.shape[1] for ir in irreps], dtype=int)
    names = _names(frame, k, mapping, chars, np.asarray(unitary), dims, point)
    herring = spinor_herring(frame, k, mapping, chars, np.asarray(unitary))
    miller = np.asarray(miller).astype(np.int64)
    n = miller.shape[0]
    index = {tuple(m): i for i, m in enumerate(miller.tolist())}
    perms, phases = [], []
    for op in mapping:
        q = (k + miller) @ np.linalg.inv(frame.rotations[op])
        m2 = np.rint(q - k).astype(np.int64)
        perms.append(np.array([index[tuple(m)] for m in m2.tolist()]))
        phases.append(np.exp(-2j * np.pi * (q @ frame.translations_user[op])))
    starts = np.concatenate([[0], np.flatnonzero(np.diff(w) > level_tol_eV) + 1])
    ends = np.concatenate([starts[1:], [w.size]])
    levels = []
    for a, b in zip(starts, ends, strict=True):
        if a >= n_bands or (b == w.size and top < size):
            break
        vec = v[:, a:b].reshape(2, n, b - a)  # component s·n + i
        chi = np.empty(mapping.size, dtype=complex)
        for j in range(mapping.size):
            # (g ψ)(s′, G′) = Σ_s U_{s′s} e^{…} ψ(s, G): trace against ψ(s′, G′)
            moved = np.einsum("ts,sgb->tgb", unitary[j], vec * phases[j][None, :, None])
            target = np.empty_like(moved)
            target[:, perms[j], :] = moved
            chi[j] = np.sum(np.conj(vec) * target)
        mult = chars.conj() @ chi / mapping.size
        counts = np.rint(mult.real).astype(int)
        if np.max(np.abs(mult - counts)) > 1e-3 or counts @ dims != b - a:
            raise RuntimeError(f"spinor characters at {point} do not reduce: {np.round(mult, 3)}")
        contained = tuple(int(i) for i in np.repeat(np.arange(counts.size), counts))
        levels.append((float(w[a:b].mean()), int(a), int(b - a), contained,
                       "+".join(names[i] for i in contained),
                       _kramers_pair(contained, chars, k, herring)))
    return levels, names, dims, int(mapping.size), herring


def _kramers_pair(contained: tuple[int, ...], chars: np.ndarray, k: np.ndarray,
                  herring: np.ndarray) -> bool:
    """Irreps stuck by time reversal (θ² = −1): one irrep twice with Herring indicator −1, or
    two with indicator 0 whose characters are complex conjugates where −k ≡ k (where −k ≢ k
    the partner, conjugated by an operation taking k to −k, is not checked)."""
    if len(contained) != 2:
        return False
    i, j = contained
    if i == j:
        return bool(herring[i] == -1)
    if herring[i] != 0 or herring[j] != 0:
        return False
    if not np.allclose(2 * k, np.rint(2 * k), atol=ATOL):
        return True
    return bool(np.allclose(chars[j], np.conj(chars[i]), atol=1e-6))


def spinor_herring(frame: SpaceGroupFrame, k: np.ndarray, mapping: np.ndarray,
                   chars: np.ndarray, unitary: np.ndarray) -> np.ndarray:
    """Herring's indicator of each double-group small irrep (module docstring), as −W.

    For every operation g = {W|w} with W k ≡ −k, g² = {W²|W w + w} = {E|T}{W_j|w_j} with
    {W_j|w_j} a little-group representative, and the SU(2) lift U(g)² = s U_j (s = ±1), so
    χ(g²) = s exp(−2πi k·T) χ_j.

    Parameters
    ----------
    frame : SpaceGroupFrame
    k : numpy.ndarray
        (3,) reciprocal fractions.
    mapping : numpy.ndarray
        Operations of the little group (indices into ``frame``), spgrep's order.
    chars : numpy.ndarray
        (n_irreps, len(mapping)) characters of spgrep's spinor small irreps.
    unitary : numpy.ndarray
        (len(mapping), 2, 2) spgrep's SU(2) lifts of the little-group operations.

    Returns
    -------
    numpy.ndarray
        +1 (no extra degeneracy), 0 (sticks to its conjugate) or −1 (appears twice) per irrep.
    """
    W, w = frame.rotations, frame.translations
    lattice = frame.lattice_t.T
    total = np.zeros(chars.shape[0], dtype=complex)
    little_W = W[mapping].reshape(mapping.size, 9)
    kr = np.einsum("j,nji->ni", k, np.linalg.inv(W))
    d = kr + k
    for n in np.flatnonzero(np.all(np.abs(d - np.rint(d)) < ATOL, axis=1)):
        w2 = W[n] @ w[n] + w[n]
        j = int(np.flatnonzero(np.all(little_W == (W[n] @ W[n]).ravel(), axis=1))[0])
        u = get_spinor_unitary_rotation(lattice, W[n])
        u2 = u @ u
        sign = 1.0 if np.allclose(u2, unitary[j], atol=1e-6) else -1.0
        if sign < 0 and not np.allclose(u2, -unitary[j], atol=1e-6):
            raise RuntimeError("the SU(2) lift of g² is not ± that of its representative")
        t = w2 - w[mapping[j]]
        total += sign * np.exp(-2j * np.pi * (k @ t)) * chars[:, j]
    return np.rint(-total.real / mapping.size).astype(int)
