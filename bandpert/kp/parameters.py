r"""k·p parameters of a cubic crystal at Γ and the relations between them.

The trade's parameters (:class:`KPParameters`): Eg (Γ6 − Γ8 gap), Δso (Γ8 − Γ7 spin–orbit
splitting), Ep = 2 m0 P²/ħ² (Kane energy), F (remote-band term of the conduction band), and the
Luttinger γ1, γ2, γ3. Energies are in eV, masses in m0. The Hamiltonians that use them are in
:mod:`bandpert.kp.hamiltonians`.

Dresselhaus–Kip–Kittel parameters
---------------------------------
For the spinless p-like triplet (X, Y, Z) the k² Hamiltonian is, with c = ħ²/2m0
(``units.HBAR2_OVER_2M0_EV_A2``),

    H_{X_i X_i} = c [k² + L k_i² + M (k² − k_i²)],   H_{X_i X_j} = c N k_i k_j  (i ≠ j),

L, M, N as usually defined, without the free-electron term c k² (Dresselhaus, Kip & Kittel,
Phys. Rev. 98, 368 (1955)); the Luttinger parameters follow as (CONVENTIONS.md)

    γ1 = −1 − (L + 2M)/3,   γ2 = −(L − M)/6,   γ3 = −N/6

(:func:`luttinger_from_dkk`, :func:`dkk_from_luttinger`). The alternative convention that
includes the free-electron term in the diagonal, L' = L + 1, M' = M + 1, N' = N, is
:func:`dkk_with_free_electron`.

Parameter conversions
---------------------
The eight-band model takes the coupling to Γ6 out of the Luttinger parameters (modified
parameters; Vurgaftman, Meyer & Ram-Mohan, J. Appl. Phys. 89, 5815 (2001), Sec. II; Winkler,
*Spin-Orbit Coupling Effects in Two-Dimensional Electron and Hole Systems*, Springer 2003,
Sec. 3.3 — section numbers from memory):

    γ1' = γ1 − Ep/(3 Eg),   γ2' = γ2 − Ep/(6 Eg),   γ3' = γ3 − Ep/(6 Eg),

and the conduction-band mass is (same references; Vurgaftman 2001, the m_e expression of Sec.
II, from memory)

    m0/m_e = (1 + 2F) + (Ep/3) [2/Eg + 1/(Eg + Δso)].

Second-order (Löwdin) elimination of Γ6 from the eight-band model gives back the six-band model
with the unmodified γ exactly at order k², so both models have the same heavy- and light-hole
masses in every direction (the tests check it). They differ for the split-off band:
m0/m_so = γ1 in the six-band model and γ1 − Ep Δso / [3 Eg (Eg + Δso)] in the eight-band model.
"""

from __future__ import annotations

import math
import re

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..input.kp_parameters import (  # the file's data and the two relations its checks need
    MODEL_NAMES,
    REQUIRED_PARAMETERS,
    KPParameters,
    conduction_inverse_mass,
    modified_luttinger,
)

__all__ = [
    "KANE_NONPARABOLICITY_SOURCE",
    "MODEL_NAMES",
    "REQUIRED_PARAMETERS",
    "KPParameters",
    "conduction_inverse_mass",
    "dkk_from_luttinger",
    "dkk_with_free_electron",
    "kane_F",
    "kane_nonparabolicity",
    "luttinger_from_dkk",
    "luttinger_from_modified",
    "luttinger_inverse_masses",
    "modified_luttinger",
    "spherical_gamma",
    "split_off_inverse_mass",
    "two_band_coupling_eV",
    "unit_vector",
]

FloatArray = NDArray[np.float64]

def luttinger_from_modified(gamma1p: float, gamma2p: float, gamma3p: float, Eg_eV: float,
                            Ep_eV: float) -> tuple[float, float, float]:
    """The inverse of :func:`modified_luttinger`: (γ1, γ2, γ3) from (γ1', γ2', γ3')."""
    if not Eg_eV > 0:
        raise ValueError(f"Eg_eV must be positive, got {Eg_eV}")
    d = Ep_eV / (6.0 * Eg_eV)
    return gamma1p + 2.0 * d, gamma2p + d, gamma3p + d


def kane_F(m_e_m0: float, Eg_eV: float, Delta_so_eV: float, Ep_eV: float) -> float:
    """Kane's F that gives the conduction mass ``m_e_m0``: :func:`conduction_inverse_mass`
    solved for F."""
    rest = conduction_inverse_mass(Eg_eV, Delta_so_eV, Ep_eV, 0.0) - 1.0
    return (1.0 / m_e_m0 - 1.0 - rest) / 2.0


def split_off_inverse_mass(params: KPParameters, model: str = "eight-band") -> float:
    r"""Band-edge m0/m_so of the split-off band (isotropic in these models).

    Six-band: γ1 (the Γ8–Γ7 coupling is of order k², so it enters only at k⁴). Eight-band:
    γ1' + E_P/[3(E_g + Δ)] = γ1 − E_P Δ/[3 E_g (E_g + Δ)] (second order in P through Γ6;
    the same expression as in Vurgaftman, Meyer & Ram-Mohan 2001, Sec. II, from memory).
    """
    if model == "six-band":
        params._require("six-band")
        return float(params.gamma1)
    if model != "eight-band":
        raise ValueError(f"the split-off band exists in the six- and eight-band models, not "
                         f"{model!r}")
    g1p = params.modified_gammas()[0]
    return g1p + params.Ep_eV / (3.0 * (params.Eg_eV + params.Delta_so_eV))


def _cubic_invariant(direction: ArrayLike) -> float:
    u = unit_vector(direction)
    return float(u[0] ** 2 * u[1] ** 2 + u[1] ** 2 * u[2] ** 2 + u[2] ** 2 * u[0] ** 2)


def luttinger_inverse_masses(gamma1: float, gamma2: float, gamma3: float,
                             direction: ArrayLike) -> tuple[float, float]:
    r"""Heavy- and light-hole m0/m along a direction (positive for holes).

    From the eigenvalues of Luttinger's 4×4 Γ8 Hamiltonian (Luttinger, Phys. Rev. 102, 1030
    (1956)): :math:`E = -\frac{\hbar^2}{2m_0}\big[\gamma_1 k^2 \mp 2\sqrt{\gamma_2^2 k^4
    + 3(\gamma_3^2 - \gamma_2^2)(k_x^2k_y^2 + k_y^2k_z^2 + k_z^2k_x^2)}\big]`, so

    .. math:: \frac{m_0}{m_{hh,lh}} = \gamma_1 \mp 2\sqrt{\gamma_2^2
              + 3(\gamma_3^2 - \gamma_2^2)(n_x^2n_y^2 + n_y^2n_z^2 + n_z^2n_x^2)},

    which is γ1 ∓ 2γ2 along [001], γ1 ∓ √(γ2² + 3γ3²) along [110] and γ1 ∓ 2γ3 along [111].

    Returns
    -------
    (float, float)
        (m0/m_hh, m0/m_lh).
    """
    root = math.sqrt(gamma2**2 + 3.0 * (gamma3**2 - gamma2**2) * _cubic_invariant(direction))
    return gamma1 - 2.0 * root, gamma1 + 2.0 * root


def spherical_gamma(gamma2: float, gamma3: float) -> float:
    """Spherical average γ̄ = (2γ2 + 3γ3)/5 (Lipari & Baldereschi, Phys. Rev. Lett. 25, 373
    (1970); from memory)."""
    return (2.0 * gamma2 + 3.0 * gamma3) / 5.0


def two_band_coupling_eV(Eg_eV: float, Delta_so_eV: float, Ep_eV: float) -> float:
    r"""Effective Kane energy of the two-band model, :math:`E_P^{(2)} = E_P[2/3 + E_g/(3(E_g +
    \Delta))]`.

    Chosen so that :math:`E_P^{(2)}/E_g` equals the P contribution to m0/m_e of the eight-band
    model, :math:`(E_P/3)(2/E_g + 1/(E_g + \Delta))`; it is Ep for Δ → 0 and 2Ep/3 for Δ → ∞
    (the light-hole share of the p state along k).
    """
    return Ep_eV * (2.0 / 3.0 + Eg_eV / (3.0 * (Eg_eV + Delta_so_eV)))



#: Where Kane's nonparabolicity (1 − m*/m0)²/Eg comes from (:func:`kane_nonparabolicity`).
KANE_NONPARABOLICITY_SOURCE = "E. O. Kane, J. Phys. Chem. Solids 1, 249 (1957)"


def kane_nonparabolicity(m_e_m0: float, Eg_eV: float) -> float:
    """Kane's two-band nonparabolicity α = (1 − m*/m0)²/Eg, in 1/eV.

    The two-band result for ε(1 + αε) = ħ²k²/2m* with bare free-electron k² terms on both
    bands (Kane, J. Phys. Chem. Solids 1, 249 (1957); from memory). A model with remote-band
    terms has its own α (:func:`bandpert.kp.analysis.nonparabolicity`), which differs.
    """
    return (1.0 - m_e_m0) ** 2 / Eg_eV



# --------------------------------------------------------------------------------------------
# directions
# --------------------------------------------------------------------------------------------

_MILLER = re.compile(r"^\[?\s*(-?\d)\s*,?\s*(-?\d)\s*,?\s*(-?\d)\s*\]?$")


def unit_vector(direction: ArrayLike | str) -> FloatArray:
    """A direction as a unit vector of shape (3,).

    Parameters
    ----------
    direction : array_like of 3 numbers, or str
        Cartesian components (any length), or crystallographic indices as a string:
        ``"001"``, ``"[110]"``, ``"1-10"``, ``"[1,1,1]"``.

    Raises
    ------
    ValueError
        For a zero, non-finite or malformed direction.
    """
    if isinstance(direction, str):
        m = _MILLER.match(direction.strip())
        if not m:
            raise ValueError(f"direction {direction!r} is not three indices like '001', '[110]' "
                             "or '1-10'")
        vec = np.array([int(g) for g in m.groups()], dtype=float)
    else:
        vec = np.asarray(direction, dtype=float)
    if vec.shape != (3,) or not np.all(np.isfinite(vec)):
        raise ValueError(f"direction must be 3 finite numbers, got {direction!r}")
    norm = float(np.linalg.norm(vec))
    if norm == 0.0:
        raise ValueError("direction must not be the zero vector")
    return vec / norm



# --------------------------------------------------------------------------------------------
# Dresselhaus–Kip–Kittel L, M, N
# --------------------------------------------------------------------------------------------


def luttinger_from_dkk(L: float, M: float, N: float) -> tuple[float, float, float]:
    """(γ1, γ2, γ3) from the usual DKK L, M, N (units ħ²/2m0, free-electron term excluded).

    γ1 = −1 − (L + 2M)/3, γ2 = −(L − M)/6, γ3 = −N/6 (Dresselhaus, Kip & Kittel, Phys. Rev. 98,
    368 (1955); Luttinger, Phys. Rev. 102, 1030 (1956); module docstring).
    """
    return -1.0 - (L + 2.0 * M) / 3.0, -(L - M) / 6.0, -N / 6.0


def dkk_from_luttinger(gamma1: float, gamma2: float, gamma3: float) -> tuple[float, float, float]:
    """The usual DKK (L, M, N) of (γ1, γ2, γ3): the inverse of :func:`luttinger_from_dkk`,
    L = −1 − γ1 − 4γ2, M = −1 − γ1 + 2γ2, N = −6γ3."""
    return -1.0 - gamma1 - 4.0 * gamma2, -1.0 - gamma1 + 2.0 * gamma2, -6.0 * gamma3


def dkk_with_free_electron(L: float, M: float, N: float) -> tuple[float, float, float]:
    """The alternative convention with the free-electron term in the diagonal:
    (L + 1, M + 1, N), i.e. the k² coefficients of the whole triplet Hamiltonian in ħ²/2m0."""
    return L + 1.0, M + 1.0, N
