r"""Multiband envelope functions along z: four-, six- and eight-band k·p on the grid.

The bulk Hamiltonian of each layer, H(k) = H0 + Σ k_i L_i + Σ k_i k_j Q_ij in the J basis of
:mod:`bandpert.kp.hamiltonians` (plus the Bir–Pikus matrix of its strain and its valence-band
offset on the diagonal), is written in the structure's frame (z along the growth direction
[001], [110] or [111]: :func:`rotate_terms`) and becomes an operator along z with
k_z → −i d/dz:

* k_z Q_zz k_z → −d/dz Q_zz(z) d/dz, with Q_zz between two nodes the matrix harmonic mean
  [½(Q_a⁻¹ + Q_b⁻¹)]⁻¹ (the second-order flux condition of :func:`.grid.half_node_inverse`,
  for matrices; the arithmetic mean there would make the error fall only as h);
* first-derivative terms M(z) k_z + k_z M(z)† by central differences, with Burt–Foreman
  ordering (M. G. Burt, J. Phys.: Condens. Matter 4, 6651 (1992); B. A. Foreman, Phys. Rev.
  B 48, 4964 (1993); from memory) for the conduction–valence coupling: the Kane term stands
  to the right of P in the conduction row, M = the conduction rows of L_z. The in-plane
  mixing terms k_x k_z, k_y k_z are symmetrised (M = ½ B, the N⁺ = N⁻ split), which is
  Burt–Foreman only for a Hamiltonian without Γ15 remote terms: stated here, not hidden;
* everything else is local (node values).

Interfaces lie on half-nodes (:mod:`.grid`); ψ = 0 one node beyond each end (bounded
structures; the solver is meant for states confined well inside). Periodic structures take
the Bloch phase e^{iθ} on the wrapping blocks.

Spurious solutions (eight-band). With tabulated parameters the eight-band model's own
conduction k² term s_c = 1 + 2F is negative for most III–Vs (GaAs: −2.88) and the light hole's
γ1′ + 2γ2′ too (GaAs: 0.66 − 2.20 = −1.54), so far from Γ bands turn the wrong way and the
discretised operator grows states inside the gap. The control follows Foreman (B. A. Foreman,
Phys. Rev. B 56, R12748 (1997); from memory): rescale Ep so that the electron's remote term is
non-negative while the band-edge electron mass stays the tabulated one. Here the electron term
is set to s_c = 1 (F = 0, the bare free-electron term; Foreman's s_c = 0 is the other common
choice, but a zero k_z² coefficient leaves central differences with an undamped odd–even grid
mode), Ep′ = 3(m0/m_e − 1)/(2/Eg + 1/(Eg + Δ)), and the modified Luttinger parameters follow
from Ep′ (GaAs: Ep′ = 22.6 eV, γ1′ = 2.02, γ2′ = −0.42, γ1′ + 2γ2′ = 1.18 > 0).
:func:`rescaled_parameters` refuses parameters for which the valence terms keep the wrong
sign even after the rescaling.

Solver: the block-tridiagonal matrix (n·N unknowns, memory linear in N) by shift-invert
Lanczos (:func:`scipy.sparse.linalg.eigsh`) about the band edges, for the requested levels only.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import scipy.sparse
import scipy.sparse.linalg
from numpy.typing import NDArray
from threadpoolctl import ThreadpoolController

from ..errors import InputError
from ..input.kp_parameters import KPParameters, conduction_inverse_mass, modified_luttinger
from ..input.structure_file import Structure
from ..kp import bir_pikus_cartesian, cartesian_basis_matrix, make_model, pseudomorphic_strain
from .grid import Grid, growth_frame

__all__ = ["MULTIBAND_MODELS", "LayerMatrices", "layer_matrices", "multiband_levels",
           "rescaled_parameters", "rotate_terms"]

#: The multiband models and their basis states (indices into the eight-band J basis).
MULTIBAND_MODELS: dict[str, tuple[int, ...]] = {
    "four-band": (2, 3, 4, 5), "six-band": (2, 3, 4, 5, 6, 7),
    "eight-band": (0, 1, 2, 3, 4, 5, 6, 7)}

FloatArray = NDArray[np.float64]

_THREADS: list[ThreadpoolController] = []  # made on first use (inspecting libraries costs)


def rescaled_parameters(params: KPParameters, label: str = "", source: str = "") -> KPParameters:
    """Eight-band parameters with F = 0 and Ep rescaled to keep m_e (module docstring).

    Raises
    ------
    InputError
        When the rescaled modified Luttinger parameters still give a valence k_z² term of
        the wrong sign (γ1′ ± 2γ2′ ≤ 0).
    """
    inv_me = conduction_inverse_mass(params.Eg_eV, params.Delta_so_eV, params.Ep_eV, params.F)
    ep = 3.0 * (inv_me - 1.0) / (2.0 / params.Eg_eV + 1.0 / (params.Eg_eV + params.Delta_so_eV))
    g1, g2, _ = modified_luttinger(params.gamma1, params.gamma2, params.gamma3, params.Eg_eV, ep)
    if not (g1 + 2.0 * g2 > 0 and g1 - 2.0 * g2 > 0 and ep > 0):
        raise InputError(f"{label}: after rescaling Ep to {ep:.3g} eV (F = 0) the modified "
                         f"Luttinger parameters γ1′ = {g1:.3g}, γ2′ = {g2:.3g} still give a "
                         "valence term of the wrong sign; expected parameters the eight-band "
                         "envelope model can use without spurious states", source, "layers")
    return dataclasses.replace(params, Ep_eV=float(ep), F=0.0)


@dataclasses.dataclass(frozen=True, eq=False)
class LayerMatrices:
    """H0 (n, n), L (3, n, n), Q (3, 3, n, n) of every layer, common energy scale."""

    h0: NDArray
    lin: NDArray
    quad: NDArray


def layer_matrices(structure: Structure, model: str) -> list[LayerMatrices]:
    """The bulk matrices of each layer in the model's basis (module docstring)."""
    keep = np.array(MULTIBAND_MODELS[model])
    u = cartesian_basis_matrix("eight-band")
    frame = growth_frame(structure.growth)
    out = []
    for i, layer in enumerate(structure.layers):
        kpm = layer.material
        if not kpm.parameters.supports("eight-band"):
            raise InputError(f"{layer.label} lacks the eight-band parameters", structure.file,
                             f"layers[{i}]")
        params = kpm.parameters
        if model == "eight-band":
            params = rescaled_parameters(params, layer.label, structure.file)
        else:  # valence-only: the Luttinger parameters themselves
            params = dataclasses.replace(params, Ep_eV=0.0, F=0.0)
        m = make_model("eight-band", params)
        h0 = m.h0_eV.copy()
        if structure.substrate_a_A is not None:
            eps = pseudomorphic_strain(kpm.a_A, structure.substrate_a_A, kpm.elastic,
                                       structure.growth)
            h0 = h0 + u.conj().T @ bir_pikus_cartesian(eps, kpm.deformation, True) @ u
        h0 = h0 + layer.valence_band_eV * np.eye(8)
        sub = np.ix_(keep, keep)
        lin, quad = rotate_terms(m.linear_eV_A, m.quadratic_eV_A2, frame)
        out.append(LayerMatrices(h0[sub], lin[(slice(None), *sub)],
                                 quad[(slice(None), slice(None), *sub)]))
    return out


def rotate_terms(lin: NDArray, quad: NDArray, frame: FloatArray) -> tuple[NDArray, NDArray]:
    r"""The k-linear and k-quadratic matrices in the structure's frame.

    With k_cubic = Rᵀ k′ (R = :func:`~.grid.growth_frame`, rows x′, y′, z′ in cubic axes),
    H = H0 + Σ_i k_i L_i + Σ_ij k_i k_j Q_ij becomes H0 + Σ_a k′_a L′_a + Σ_ab k′_a k′_b Q′_ab
    with L′_a = Σ_i R_ai L_i and Q′_ab = Σ_ij R_ai R_bj Q_ij (the band basis is unchanged: only
    the wave vector is written in other axes). k′_z then becomes −i d/dz on the grid, with the
    operator ordering of :func:`_operator`. Identity for [001].
    """
    return (np.einsum("ai,inm->anm", frame, lin),
            np.einsum("ai,bj,ijnm->abnm", frame, frame, quad))


def _harmonic(a: NDArray, b: NDArray) -> NDArray:
    """[½(a⁻¹ + b⁻¹)]⁻¹ for each pair of Hermitian matrices (the mean where either is
    singular)."""
    out = 0.5 * (a + b)
    same = np.all(np.isclose(a, b, rtol=0, atol=1e-14), axis=(1, 2))
    for j in np.nonzero(~same)[0]:
        try:
            h = np.linalg.inv(0.5 * (np.linalg.inv(a[j]) + np.linalg.inv(b[j])))
            out[j] = 0.5 * (h + h.conj().T)
        except np.linalg.LinAlgError:
            pass
    return out


def _operator(grid: Grid, layers: list[LayerMatrices], k_par: FloatArray,
              model: str, phase: float | None) -> scipy.sparse.csc_matrix:
    n = layers[0].h0.shape[0]
    idx = grid.layer_index
    kx, ky = float(k_par[0]), float(k_par[1])
    h = grid.spacing_A
    local = np.array([lm.h0 + kx * lm.lin[0] + ky * lm.lin[1]
                      + kx * kx * lm.quad[0, 0] + ky * ky * lm.quad[1, 1]
                      + kx * ky * (lm.quad[0, 1] + lm.quad[1, 0]) for lm in layers])[idx]
    qzz = np.array([lm.quad[2, 2] for lm in layers])[idx]
    mixed = np.array([kx * (lm.quad[0, 2] + lm.quad[2, 0]) + ky * (lm.quad[1, 2] + lm.quad[2, 1])
                      for lm in layers])
    lz = np.array([lm.lin[2] for lm in layers])
    upper = np.zeros_like(lz)
    if model == "eight-band":  # k_z P in the conduction rows, P k_z in the valence rows
        upper[:, 2:, :2] = lz[:, 2:, :2]
        upper[:, 2:, 2:] = 0.5 * lz[:, 2:, 2:]
    else:
        upper = 0.5 * lz
    m_op = (upper + 0.5 * mixed)[idx]  # M(z): H ∋ M k_z + k_z M†
    periodic = phase is not None
    nxt = np.roll(np.arange(grid.size), -1) if periodic else np.arange(1, grid.size)
    cur = np.arange(grid.size) if periodic else np.arange(grid.size - 1)
    q_half = _harmonic(qzz[cur], qzz[nxt])
    diag = local.astype(complex)
    np.add.at(diag, cur, q_half / h**2)
    np.add.at(diag, nxt, q_half / h**2)
    if not periodic:  # ψ = 0 one node beyond each end
        diag[0] += qzz[0] / h**2
        diag[-1] += qzz[-1] / h**2
    # block (i, i+1): −Q_{i+½}/h² − i (M_i + M_{i+1}†)/(2h)
    off = -q_half / h**2 - 1j * (m_op[cur] + np.conj(np.swapaxes(m_op[nxt], 1, 2))) / (2 * h)
    if periodic:
        off[-1] = off[-1] * np.exp(1j * phase)
    rows_d = (np.arange(grid.size)[:, None, None] * n + np.arange(n)[None, :, None]) + 0 * \
        np.arange(n)[None, None, :]
    cols_d = (np.arange(grid.size)[:, None, None] * n + np.arange(n)[None, None, :]) + 0 * \
        np.arange(n)[None, :, None]
    r_off = cur[:, None, None] * n + np.arange(n)[None, :, None] + 0 * np.arange(n)[None, None, :]
    c_off = nxt[:, None, None] * n + np.arange(n)[None, None, :] + 0 * np.arange(n)[None, :, None]
    rows = np.concatenate([rows_d.ravel(), r_off.ravel(), c_off.ravel()])
    cols = np.concatenate([cols_d.ravel(), c_off.ravel(), r_off.ravel()])
    vals = np.concatenate([diag.ravel(), off.ravel(), np.conj(off).ravel()])
    size = grid.size * n
    return scipy.sparse.csc_matrix((vals, (rows, cols)), shape=(size, size))


def multiband_levels(grid: Grid, layers: list[LayerMatrices], model: str, n_pairs: int,
                     sigma_eV: float, side: str, k_par_invA=(0.0, 0.0),
                     phase: float | None = None, extra_pairs: int = 4
                     ) -> tuple[FloatArray, NDArray]:
    """Levels nearest a shift on one side of it, as Kramers pairs.

    Parameters
    ----------
    grid, layers, model
    n_pairs : int
        Kramers pairs wanted.
    sigma_eV : float
        The shift: just below the lowest conduction edge (side "up") or just above the highest
        valence edge (side "down").
    side : str
        "up" (levels ≥ sigma, increasing) or "down" (≤ sigma, decreasing).
    k_par_invA : (kx, ky)
    phase : float, optional
        Bloch phase of a periodic structure.
    extra_pairs : int
        Lanczos pairs asked for beyond ``n_pairs`` (more converge the wanted ones in fewer
        steps when levels crowd near the shift; fewer make each step cheaper).

    Returns
    -------
    energies_eV : ndarray (n_pairs,)
        One energy per Kramers pair (the mean of the pair).
    states : ndarray (N, n, n_pairs, 2)
        Both states of each pair on the nodes, normalised to Σ|ψ|² h = 1.
    """
    a = _operator(grid, layers, np.asarray(k_par_invA, dtype=float), model, phase)
    n = layers[0].h0.shape[0]
    want = 2 * n_pairs
    vals, vecs = _shift_invert(a, want, sigma_eV, 2 * extra_pairs)
    pick = vals >= sigma_eV if side == "up" else vals <= sigma_eV
    vals, vecs = vals[pick], vecs[:, pick]
    order = np.argsort(vals if side == "up" else -vals)[:want]
    if order.size < want:
        raise InputError(f"found {order.size // 2} levels on the {side} side of "
                         f"{sigma_eV:.4f} eV; expected {n_pairs} (ask for fewer levels)",
                         key="n_levels")
    vals, vecs = vals[order], vecs[:, order]
    vecs = vecs / math.sqrt(grid.spacing_A)
    return 0.5 * (vals[0::2] + vals[1::2]), vecs.reshape(grid.size, n, n_pairs, 2)


def _shift_invert(a: scipy.sparse.csc_matrix, want: int, sigma: float, extra: int = 8
                  ) -> tuple[FloatArray, NDArray]:
    """Eigenpairs of a sparse Hermitian matrix nearest ``sigma`` (shift-invert Lanczos, a
    sparse LU of the block-tridiagonal matrix: memory and work linear in the grid).

    BLAS runs on one thread: the factors are narrow, and on a busy two-core machine a second
    thread only waits (measured: 0.4 s instead of 13 s for the 20 nm well at k∥ ≠ 0).
    """
    k = min(a.shape[0] - 2, want + extra)
    real = a.nnz == 0 or abs(a.imag).max() < 1e-14 * max(1.0, abs(a).max())
    if not _THREADS:
        _THREADS.append(ThreadpoolController())
    with _THREADS[0].limit(limits=1, user_api="blas"):
        if real:
            a = a.real.tocsc()
        # the natural order keeps the LU inside the band (no fill beyond it)
        lu = scipy.sparse.linalg.splu(
            (a - sigma * scipy.sparse.identity(a.shape[0], format="csc")).tocsc(),
            permc_spec="NATURAL")
        op = scipy.sparse.linalg.LinearOperator(a.shape, matvec=lu.solve, dtype=a.dtype)
        return scipy.sparse.linalg.eigsh(a, k=k, sigma=sigma, which="LM", OPinv=op,
                                         tol=1e-12)
