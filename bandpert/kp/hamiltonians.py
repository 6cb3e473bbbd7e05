r"""k·p models about Γ for zincblende (and diamond) crystals: two-, six- and eight-band.

Three Hamiltonians H(k), vectorised over k (arrays of shape (n_k, n, n), Hermitian):

* **two-band** (Kane): the Γ6 conduction band and one light-hole-like band, isotropic, spin a
  spectator (each level stands for a Kramers pair);
* **six-band** (Luttinger–Kohn): the valence bands with spin–orbit coupling, Γ8 (heavy and light
  holes) and Γ7 (split-off), parameterised by the Luttinger γ1, γ2, γ3;
* **eight-band** (Kane): Γ6 conduction (×2) + Γ8 (×4) + Γ7 (×2), the conduction–valence coupling
  P treated exactly, the remote bands by the modified Luttinger parameters γ' and Kane's F.

Parameters are the trade's (:class:`~bandpert.kp.parameters.KPParameters`, with their
conversions: modified Luttinger parameters, Kane's F, DKK L, M, N). Energies are in eV, k in
Å⁻¹, masses in m0.

**Energy zero: the valence-band top at Γ** (the Γ8 level; for the two-band model the top of
its light-hole-like band). The conduction-band edge Γ6 is at +Eg, the split-off edge Γ7 at −Δso.

**Left out on purpose:** every term from the lack of an inversion centre in zincblende (Kane's B
parameter, the k-linear terms of Γ8, the Dresselhaus k³ terms of Γ6), and fields. Strain is
added by :mod:`bandpert.kp.strain`. The
models then have the symmetry of the full cubic group O_h and, with time reversal, every level
is a Kramers pair (doubly degenerate) at every k; the tests check it.

Basis and phase convention
--------------------------
The orbital parts are the real Bloch functions at Γ |S⟩ (Γ1, s-like) and |X⟩, |Y⟩, |Z⟩ (Γ15,
like x, y, z); with real orbitals time reversal is complex conjugation times −iσ_y on the spin.
Spin ↑, ↓ is quantised along z ([001]) and the Pauli matrices are the standard ones. The Kane
matrix element is

    P = −i (ħ/m0) ⟨S|p_x|X⟩   (real, P > 0),   so   ⟨S|H|X_j⟩ = i P k_j,   P² = Ep ħ²/2m0.

The total-angular-momentum states |J, m⟩ couple l = 1 with spin ½ by Condon–Shortley
Clebsch–Gordan coefficients with |1, ±1⟩ = ∓(X ± iY)/√2 and |1, 0⟩ = Z. The eight-band basis,
in this order (the six-band basis is states 2–7 renumbered 0–5):

=====  =================  ====================================================
index  label              state
=====  =================  ====================================================
0      Γ6 +½ (c ↑)        |S↑⟩
1      Γ6 −½ (c ↓)        |S↓⟩
2      Γ8 +3/2 (hh)       |3/2, +3/2⟩ = −(1/√2) |(X + iY)↑⟩
3      Γ8 +½ (lh)         |3/2, +1/2⟩ = (1/√6) [2 |Z↑⟩ − |(X + iY)↓⟩]
4      Γ8 −½ (lh)         |3/2, −1/2⟩ = (1/√6) [|(X − iY)↑⟩ + 2 |Z↓⟩]
5      Γ8 −3/2 (hh)       |3/2, −3/2⟩ = (1/√2) |(X − iY)↓⟩
6      Γ7 +½ (so)         |1/2, +1/2⟩ = −(1/√3) [|Z↑⟩ + |(X + iY)↓⟩]
7      Γ7 −½ (so)         |1/2, −1/2⟩ = (1/√3) [|Z↓⟩ − |(X − iY)↑⟩]
=====  =================  ====================================================

The "hh"/"lh" labels name the states by m (heavy holes are m = ±3/2 only for k along [001]).

Hamiltonian, as built (Cartesian form; the J-basis matrices are U† H U with U the table above,
formed once per model). With c = ħ²/2m0 (``units.HBAR2_OVER_2M0_EV_A2``):

* conduction (eight-band): H_SS = Eg + c (1 + 2F) k²;
* coupling (eight-band): H_{S,X_j} = i P k_j, H_{X_j,S} = −i P k_j;
* valence, spinless (Dresselhaus, Kip & Kittel form, :mod:`bandpert.kp.parameters`):
  H_{X_i X_i} = c [k² + L k_i² + M (k² − k_i²)], H_{X_i X_j} = c N k_i k_j (i ≠ j), with the
  usual L = −1 − γ1 − 4γ2, M = −1 − γ1 + 2γ2, N = −6γ3 — the Luttinger γ in the six-band
  model, the modified γ' in the eight-band model;
* spin–orbit on the p states: (Δso/3)(**L**·**σ** − 1), with (L_k)_{ab} = −i ε_{kab} on
  (X, Y, Z): 0 on Γ8 (J = 3/2) and −Δso on Γ7 (J = 1/2).

In the J basis this is Luttinger–Kohn's form (Luttinger & Kohn, Phys. Rev. 97, 869 (1955);
Luttinger, Phys. Rev. 102, 1030 (1956)); with k_± = k_x ± i k_y and the γ of the model,

    P_k = c γ1 k²,   Q_k = c γ2 (k_x² + k_y² − 2k_z²),
    R_k = √3 c [γ2 (k_x² − k_y²) − 2i γ3 k_x k_y],   S_k = 2√3 c γ3 k_z k_− ,

the Γ8 block (rows/columns 2–5) is

    [[−P−Q,  S,     R,     0   ],
     [ S*,  −P+Q,   0,     R   ],
     [ R*,   0,    −P+Q,  −S   ],
     [ 0,    R*,   −S*,   −P−Q ]],

the Γ7 block (6–7) is −(P_k + Δso) 𝟙, and the Γ8–Γ7 coupling (rows 2–5, columns 6–7) is

    [[−S/√2,      −√2 R      ],
     [−√2 Q,       √(3/2) S  ],
     [ √(3/2) S*,  √2 Q      ],
     [ √2 R*,     −S*/√2     ]];

the conduction row (row 0, columns 2–7) is i P [−k_+/√2, √(2/3) k_z, k_−/√6, 0, −k_z/√3,
−k_−/√3] and row 1 is i P [0, −k_+/√6, √(2/3) k_z, k_−/√2, −k_+/√3, k_z/√3]. (These printed
forms were derived symbolically from the construction above and are checked by a test.)

Validity
--------
These are expansions about Γ. With the usual parameters of III–V compounds the eight-band
model's own k² terms have the wrong sign: 1 + 2F < 0 (the conduction band's) and
γ1' + 2γ2' < 0 (the light hole's along [001]; GaAs −1.54, InP −1.41 with the bundled values),
so far from Γ a light-hole-like band turns upward and the conduction band's character moves to
other bands. Read results near Γ only (for these values no level enters the gap (0, Eg) at any
k; the tests check it out to 2π/a). Band names (:attr:`KPModel.band_names`) describe the bands
in sorted order close to Γ; further out bands mix (for InP, Δso = 0.108 eV, the light-hole and
split-off bands come within 0.10 eV near 0.035 Å⁻¹ along [001] and mix strongly beyond).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..units import HBAR2_OVER_2M0_EV_A2 as C  # ħ²/2m0 in eV Å²
from .parameters import (
    MODEL_NAMES,
    KPParameters,
    dkk_from_luttinger,
    dkk_with_free_electron,
    spherical_gamma,
    two_band_coupling_eV,
    unit_vector,
)

__all__ = [
    "EIGHT_BAND_BASIS",
    "ENERGY_ZERO",
    "SIX_BAND_BASIS",
    "TWO_BAND_BASIS",
    "TWO_BAND_REMOTE",
    "KPModel",
    "cartesian_basis_matrix",
    "eight_band_model",
    "make_model",
    "six_band_model",
    "two_band_constants",
    "two_band_energies_eV",
    "two_band_model",
]

#: The remote-band choices of the two-band model (see :func:`two_band_model`).
TWO_BAND_REMOTE: tuple[str, ...] = ("fitted", "free-electron")

#: What energy zero the models use (stated in results).
ENERGY_ZERO = "valence-band top at Γ (Γ8; the light-hole-like band top in the two-band model)"

#: Labels of the eight-band basis states (the module docstring gives the states).
EIGHT_BAND_BASIS: tuple[str, ...] = (
    "Γ6 +1/2", "Γ6 -1/2", "Γ8 +3/2", "Γ8 +1/2", "Γ8 -1/2", "Γ8 -3/2", "Γ7 +1/2", "Γ7 -1/2")
#: Labels of the six-band basis states.
SIX_BAND_BASIS: tuple[str, ...] = EIGHT_BAND_BASIS[2:]
#: Labels of the two-band basis states.
TWO_BAND_BASIS: tuple[str, ...] = ("S (conduction)", "p along k (light-hole-like)")

FloatArray = NDArray[np.float64]


def two_band_energies_eV(k_invA: ArrayLike, Eg_eV: float, Ep2_eV: float, s_c: float = 1.0,
                         s_v: float = 1.0) -> FloatArray:
    r"""Closed-form bands of the two-band Kane model.

    With :math:`d_c = E_g + c\,s_c k^2`, :math:`d_v = c\,s_v k^2` (c = ħ²/2m0) and
    :math:`P^2 = c\,E_P^{(2)}`:

    .. math:: E_\pm = \tfrac12(d_c + d_v) \pm \sqrt{\tfrac14(d_c - d_v)^2 + P^2k^2}

    (Kane, J. Phys. Chem. Solids 1, 249 (1957), the two-band limit; from memory.)

    Parameters
    ----------
    k_invA : array_like
        |k| values (any shape), Å⁻¹.
    Eg_eV, Ep2_eV : float
        Gap and two-band Kane energy (:func:`two_band_coupling_eV`).
    s_c, s_v : float
        Diagonal k² coefficients of the conduction and light-hole-like states in units of
        ħ²/2m0 (1, 1: bare electrons; see :func:`two_band_model`).

    Returns
    -------
    ndarray, shape (..., 2)
        (E−, E+): light-hole-like band, conduction band.
    """
    k2 = np.asarray(k_invA, dtype=float) ** 2
    dc = Eg_eV + C * s_c * k2
    dv = C * s_v * k2
    root = np.sqrt(0.25 * (dc - dv) ** 2 + C * Ep2_eV * k2)
    mid = 0.5 * (dc + dv)
    return np.stack([mid - root, mid + root], axis=-1)


@dataclass(frozen=True, eq=False)
class KPModel:
    r"""A k·p Hamiltonian about Γ, H(k) = H0 + Σ_i k_i L_i + Σ_ij k_i k_j Q_ij (eV, k in Å⁻¹).

    For an isotropic model (the two-band one) H(k) = H0 + |k| L + |k|² Q instead, with
    ``linear_eV_A`` of shape (n, n) and ``quadratic_eV_A2`` of shape (n, n).

    Attributes
    ----------
    name : str
        One of :data:`MODEL_NAMES`.
    basis_labels : tuple of str
        The basis states (module docstring).
    band_names : tuple of str
        Names of the bands in sorted order near Γ ("split-off", "light hole", "heavy hole",
        "conduction").
    h0_eV : ndarray, shape (n, n)
        H at Γ (diagonal: energies from the valence-band top).
    linear_eV_A : ndarray, shape (3, n, n)
        L_i (Hermitian).
    quadratic_eV_A2 : ndarray, shape (3, 3, n, n)
        Q_ij, symmetric in (i, j), each Hermitian.
    parameters : KPParameters
    lattice_constant_A : float or None
        Cubic lattice constant a, used to express k in units of 2π/a.
    isotropic : bool
        True for a model that depends on |k| only.
    remote : str
        The two-band model's remote-band choice (:data:`TWO_BAND_REMOTE`); "" otherwise.
    strain : ndarray, shape (3, 3), or None
        The homogeneous strain included (:func:`bandpert.kp.strain.strained_model`).
    """

    name: str
    basis_labels: tuple[str, ...]
    band_names: tuple[str, ...]
    h0_eV: NDArray
    linear_eV_A: NDArray
    quadratic_eV_A2: NDArray
    parameters: KPParameters
    lattice_constant_A: float | None = None
    isotropic: bool = False
    remote: str = ""
    strain: NDArray | None = None

    @property
    def size(self) -> int:
        """Number of basis states n."""
        return self.h0_eV.shape[0]

    @property
    def gamma_energies_eV(self) -> FloatArray:
        """Sorted energies at Γ (eV from the valence-band top)."""
        return np.sort(np.real(np.diag(self.h0_eV)))

    def hamiltonian_eV(self, k_cart_invA: ArrayLike) -> NDArray:
        """H(k) for many k.

        Parameters
        ----------
        k_cart_invA : array_like, shape (3,) or (n_k, 3)
            Cartesian wave vectors from Γ, Å⁻¹.

        Returns
        -------
        ndarray, shape (n_k, n, n)
            Hermitian matrices (complex for the six- and eight-band models), eV.
        """
        k = _as_k(k_cart_invA)
        n = self.size
        if self.isotropic:
            kk = np.linalg.norm(k, axis=1)[:, None, None]
            return self.h0_eV + kk * self.linear_eV_A + kk**2 * self.quadratic_eV_A2
        lin = (k @ self.linear_eV_A.reshape(3, n * n)).reshape(-1, n, n)
        pairs = (k[:, :, None] * k[:, None, :]).reshape(-1, 9)
        quad = (pairs @ self.quadratic_eV_A2.reshape(9, n * n)).reshape(-1, n, n)
        return self.h0_eV + lin + quad

    def energies_eV(self, k_cart_invA: ArrayLike) -> FloatArray:
        """Sorted eigenvalues of H(k), shape (n_k, n), eV from the valence-band top."""
        return np.linalg.eigvalsh(self.hamiltonian_eV(k_cart_invA))

    def directional_terms(self, direction: ArrayLike | str) -> tuple[NDArray, NDArray, NDArray]:
        """(H0, H1, H2) with H(t û) = H0 + t H1 + t² H2 along the unit vector û.

        For the isotropic model this holds for t ≥ 0 and, for t < 0, up to the sign of the
        second basis state (which changes no energy).
        """
        if self.isotropic:
            unit_vector(direction)
            return self.h0_eV, self.linear_eV_A, self.quadratic_eV_A2
        u = unit_vector(direction)
        h1 = np.tensordot(u, self.linear_eV_A, axes=(0, 0))
        h2 = np.tensordot(np.outer(u, u), self.quadratic_eV_A2, axes=([0, 1], [0, 1]))
        return self.h0_eV, h1, h2


def _as_k(k_cart_invA: ArrayLike) -> FloatArray:
    k = np.asarray(k_cart_invA, dtype=float)
    if k.ndim == 1:
        k = k[None, :]
    if k.ndim != 2 or k.shape[1] != 3:
        raise ValueError(f"k must have shape (3,) or (n_k, 3), got {np.shape(k_cart_invA)}")
    if not np.all(np.isfinite(k)):
        raise ValueError("k contains non-finite values")
    return k


# the p ⊗ spin part of the basis: index 2·orbital + spin, orbitals X, Y, Z, spin ↑ = 0, ↓ = 1
_R2, _R3, _R6 = math.sqrt(2.0), math.sqrt(3.0), math.sqrt(6.0)
_X_UP, _X_DN, _Y_UP, _Y_DN, _Z_UP, _Z_DN = range(6)
_J_STATES: tuple[dict[int, complex], ...] = (
    {_X_UP: -1 / _R2, _Y_UP: -1j / _R2},                              # |3/2, +3/2>
    {_Z_UP: 2 / _R6, _X_DN: -1 / _R6, _Y_DN: -1j / _R6},              # |3/2, +1/2>
    {_X_UP: 1 / _R6, _Y_UP: -1j / _R6, _Z_DN: 2 / _R6},               # |3/2, -1/2>
    {_X_DN: 1 / _R2, _Y_DN: -1j / _R2},                               # |3/2, -3/2>
    {_Z_UP: -1 / _R3, _X_DN: -1 / _R3, _Y_DN: -1j / _R3},             # |1/2, +1/2>
    {_Z_DN: 1 / _R3, _X_UP: -1 / _R3, _Y_UP: 1j / _R3},               # |1/2, -1/2>
)


def _p_to_j() -> NDArray:
    """U (6 × 6): columns are the J states of the docstring in the p ⊗ spin basis."""
    u = np.zeros((6, 6), dtype=complex)
    for col, state in enumerate(_J_STATES):
        for row, coeff in state.items():
            u[row, col] = coeff
    return u


def cartesian_basis_matrix(name: str) -> NDArray:
    """The basis of the six- or eight-band model in the Cartesian orbital ⊗ spin basis.

    Returns U whose column j is basis state j of the model (module docstring table) expanded
    on (S↑, S↓, X↑, X↓, Y↑, Y↓, Z↑, Z↓) for the eight-band model, on (X↑, X↓, Y↑, Y↓, Z↑, Z↓)
    for the six-band model; H_model = U† H_Cartesian U. U is unitary.
    """
    if name == "six-band":
        return _p_to_j()
    if name == "eight-band":
        u = np.zeros((8, 8), dtype=complex)
        u[0, 0] = u[1, 1] = 1.0
        u[2:, 2:] = _p_to_j()
        return u
    raise ValueError(f"the basis matrix exists for the six- and eight-band models, not {name!r}")


def _levi_civita() -> FloatArray:
    eps = np.zeros((3, 3, 3))
    for i, j, k in ((0, 1, 2), (1, 2, 0), (2, 0, 1)):
        eps[i, j, k], eps[i, k, j] = 1.0, -1.0
    return eps


_PAULI = np.array([[[0, 1], [1, 0]], [[0, -1j], [1j, 0]], [[1, 0], [0, -1]]], dtype=complex)


def _spin_orbit_p(delta_eV: float) -> NDArray:
    """(Δ/3)(L·σ − 1) on p ⊗ spin, (L_k)_{ab} = −i ε_{kab}: 0 on J = 3/2, −Δ on J = 1/2."""
    orbital = -1j * _levi_civita()
    l_dot_s = sum(np.kron(orbital[k], _PAULI[k]) for k in range(3))
    return delta_eV / 3.0 * (l_dot_s - np.eye(6))


def _valence_quadratic_p(gamma1: float, gamma2: float, gamma3: float) -> NDArray:
    """Q_ij on p ⊗ spin (3, 3, 6, 6) from the DKK form, free-electron term included.

    The k² coefficients of the whole triplet are (L + 1, M + 1, N) in ħ²/2m0, L, M, N the usual
    DKK parameters of the γ's (:func:`~bandpert.kp.parameters.dkk_with_free_electron`).
    """
    big_l, big_m, big_n = dkk_with_free_electron(*dkk_from_luttinger(gamma1, gamma2, gamma3))
    q = np.zeros((3, 3, 3, 3))
    for a in range(3):
        for i in range(3):
            q[i, i, a, a] = big_l if i == a else big_m
        for b in range(3):
            if a != b:
                q[a, b, a, b] = q[b, a, a, b] = big_n / 2.0
    spin = np.eye(2)
    return C * np.einsum("ijab,st->ijasbt", q, spin).reshape(3, 3, 6, 6)


def _rotate(h0: NDArray, lin: NDArray, quad: NDArray, u: NDArray) -> tuple[NDArray, ...]:
    uh = u.conj().T
    return uh @ h0 @ u, uh @ lin @ u, uh @ quad @ u


def _check_hermitian(h0: NDArray, lin: NDArray, quad: NDArray) -> None:
    for m in (h0, *lin, *quad.reshape(-1, *h0.shape)):
        if not np.allclose(m, m.conj().T, rtol=0.0, atol=1e-12 * max(1.0, np.abs(m).max())):
            raise AssertionError("k·p matrices must be Hermitian")  # a bug, not user input


def six_band_model(params: KPParameters, lattice_constant_A: float | None = None) -> KPModel:
    """Luttinger–Kohn six-band valence model (Γ8 + Γ7) with spin–orbit coupling.

    Uses γ1, γ2, γ3 and Δso (Luttinger & Kohn, Phys. Rev. 97, 869 (1955); Luttinger, Phys. Rev.
    102, 1030 (1956)); basis and matrices in the module docstring. Γ8 at 0, Γ7 at −Δso.
    Heavy and light holes along [001]: m0/m = γ1 ∓ 2γ2 exactly at k → 0.
    """
    params._require("six-band")
    h0 = _spin_orbit_p(params.Delta_so_eV)
    lin = np.zeros((3, 6, 6), dtype=complex)
    quad = _valence_quadratic_p(params.gamma1, params.gamma2, params.gamma3).astype(complex)
    h0, lin, quad = _rotate(h0, lin, quad, cartesian_basis_matrix("six-band"))
    h0 = np.diag(np.real(np.diag(h0))).astype(complex)  # exactly diagonal at Γ
    _check_hermitian(h0, lin, quad)
    names = ("split-off",) * 2 + ("light hole",) * 2 + ("heavy hole",) * 2
    return KPModel("six-band", SIX_BAND_BASIS, names, h0, lin, quad, params, lattice_constant_A)


def eight_band_model(params: KPParameters, lattice_constant_A: float | None = None) -> KPModel:
    """Kane eight-band model (Γ6 + Γ8 + Γ7) with modified Luttinger parameters and F.

    Uses Eg, Δso, Ep, F and γ1, γ2, γ3 (converted to γ' by :func:`modified_luttinger`); the
    Γ6 diagonal is Eg + (1 + 2F) ħ²k²/2m0 (Kane, J. Phys. Chem. Solids 1, 249 (1957);
    Vurgaftman, Meyer & Ram-Mohan 2001; Bahder, Phys. Rev. B 41, 11992 (1990) — from memory).
    The inversion-asymmetry parameter B is left out (module docstring).
    """
    params._require("eight-band")
    g1p, g2p, g3p = params.modified_gammas()
    p_eva = math.sqrt(max(params.Ep_eV, 0.0) * C)  # P in eV Å
    h0 = np.zeros((8, 8), dtype=complex)
    h0[0, 0] = h0[1, 1] = params.Eg_eV
    h0[2:, 2:] = _spin_orbit_p(params.Delta_so_eV)
    lin = np.zeros((3, 8, 8), dtype=complex)
    for j in range(3):
        for spin in range(2):
            p_state = 2 + 2 * j + spin
            lin[j, spin, p_state] = 1j * p_eva
            lin[j, p_state, spin] = -1j * p_eva
    quad = np.zeros((3, 3, 8, 8), dtype=complex)
    quad[:, :, 2:, 2:] = _valence_quadratic_p(g1p, g2p, g3p)
    for i in range(3):
        quad[i, i, 0, 0] = quad[i, i, 1, 1] = C * (1.0 + 2.0 * params.F)
    h0, lin, quad = _rotate(h0, lin, quad, cartesian_basis_matrix("eight-band"))
    h0 = np.diag(np.real(np.diag(h0))).astype(complex)
    _check_hermitian(h0, lin, quad)
    names = (("split-off",) * 2 + ("light hole",) * 2 + ("heavy hole",) * 2
             + ("conduction",) * 2)
    return KPModel("eight-band", EIGHT_BAND_BASIS, names, h0, lin, quad, params,
                   lattice_constant_A)


def two_band_model(params: KPParameters, remote: str = "fitted",
                   lattice_constant_A: float | None = None) -> KPModel:
    r"""Two-band Kane model: Γ6 conduction band and a light-hole-like band, isotropic.

    .. math:: H(k) = \begin{pmatrix} E_g + c\,s_c k^2 & P_2 |k| \\ P_2 |k| & c\,s_v k^2
              \end{pmatrix}, \qquad P_2^2 = c\,E_P^{(2)}

    on the basis (|S⟩, |p_k⟩), |p_k⟩ the p orbital along k (its phase chosen to make P_2 real);
    spin is a spectator, so each level is a Kramers pair. E_P^(2) is
    :func:`two_band_coupling_eV`, which makes the band-edge conduction mass that of the
    eight-band model. The diagonal k² terms:

    * ``remote="fitted"`` (default): s_c = 1 + 2F (as in the eight-band model, so m_e is
      Vurgaftman's) and s_v = E_P^(2)/E_g − (γ1 + 2γ̄) with γ̄ = (2γ2 + 3γ3)/5, so the light
      hole has the spherically averaged Luttinger mass 1/(γ1 + 2γ̄);
    * ``remote="free-electron"``: s_c = s_v = 1 (the bare two-band model, only Eg, Ep, Δso
      used), whose conduction band obeys Kane's α = (1 − m*/m0)²/Eg exactly.

    Closed-form bands: :func:`two_band_energies_eV`; nonparabolicity:
    :func:`~bandpert.kp.analysis.two_band_nonparabolicity`.
    """
    if remote not in TWO_BAND_REMOTE:
        raise ValueError(f"remote must be one of {', '.join(TWO_BAND_REMOTE)}, got {remote!r}")
    if remote == "fitted":
        params._require("two-band")
    else:
        gone = [p for p in ("Eg_eV", "Delta_so_eV", "Ep_eV") if getattr(params, p) is None]
        if gone:
            raise ValueError(f"the free-electron two-band model needs {', '.join(gone)}")
    ep2 = two_band_coupling_eV(params.Eg_eV, params.Delta_so_eV, params.Ep_eV)
    s_c, s_v = _two_band_diagonals(params, remote)
    h0 = np.diag([params.Eg_eV, 0.0])
    p2 = math.sqrt(max(ep2, 0.0) * C)
    lin = np.array([[0.0, p2], [p2, 0.0]])
    quad = np.diag([C * s_c, C * s_v])
    return KPModel("two-band", TWO_BAND_BASIS, ("light hole", "conduction"), h0, lin, quad,
                   params, lattice_constant_A, isotropic=True, remote=remote)


def _two_band_diagonals(params: KPParameters, remote: str) -> tuple[float, float]:
    """(s_c, s_v) of :func:`two_band_model`."""
    if remote == "free-electron":
        return 1.0, 1.0
    ep2 = two_band_coupling_eV(params.Eg_eV, params.Delta_so_eV, params.Ep_eV)
    lh = params.gamma1 + 2.0 * spherical_gamma(params.gamma2, params.gamma3)
    return 1.0 + 2.0 * params.F, ep2 / params.Eg_eV - lh


def two_band_constants(model: KPModel) -> tuple[float, float, float, float]:
    """(Eg_eV, Ep2_eV, s_c, s_v) of a two-band model, for the closed forms."""
    if model.name != "two-band":
        raise ValueError(f"expected a two-band model, got {model.name}")
    p = model.parameters
    s_c, s_v = _two_band_diagonals(p, model.remote)
    return p.Eg_eV, two_band_coupling_eV(p.Eg_eV, p.Delta_so_eV, p.Ep_eV), s_c, s_v


def make_model(name: str, params: KPParameters, lattice_constant_A: float | None = None,
               **options) -> KPModel:
    """The model called ``name`` (:data:`MODEL_NAMES`); ``options`` go to its builder."""
    builders = {"two-band": two_band_model, "six-band": six_band_model,
                "eight-band": eight_band_model}
    if name not in builders:
        raise ValueError(f"unknown model {name!r}; expected one of {', '.join(MODEL_NAMES)}")
    return builders[name](params, lattice_constant_A=lattice_constant_A, **options)

