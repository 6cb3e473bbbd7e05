r"""k·p models about Γ for zincblende (and diamond) crystals: two-, six- and eight-band.

Three Hamiltonians H(k), vectorised over k (arrays of shape (n_k, n, n), Hermitian):

* **two-band** (Kane): the Γ6 conduction band and one light-hole-like band, isotropic, spin a
  spectator (each level stands for a Kramers pair);
* **six-band** (Luttinger–Kohn): the valence bands with spin–orbit coupling, Γ8 (heavy and light
  holes) and Γ7 (split-off), parameterised by the Luttinger γ1, γ2, γ3;
* **eight-band** (Kane): Γ6 conduction (×2) + Γ8 (×4) + Γ7 (×2), the conduction–valence coupling
  P treated exactly, the remote bands by the modified Luttinger parameters γ' and Kane's F.

Parameters are the trade's (:class:`KPParameters`): Eg (Γ6 − Γ8 gap), Δso (Γ8 − Γ7 spin–orbit
splitting), Ep = 2 m0 P²/ħ² (Kane energy), F (remote-band term of the conduction band), and the
Luttinger γ1, γ2, γ3. Energies are in eV, k in Å⁻¹, masses in m0.

**Energy zero: the valence-band top at Γ** (the Γ8 level; for the two-band model the top of
its light-hole-like band). The conduction-band edge Γ6 is at +Eg, the split-off edge Γ7 at −Δso.

**Left out on purpose:** every term from the lack of an inversion centre in zincblende (Kane's B
parameter, the k-linear terms of Γ8, the Dresselhaus k³ terms of Γ6), strain, and fields. The
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
* valence, spinless (Dresselhaus, Kittel & Kip form, CONVENTIONS.md):
  H_{X_i X_i} = c [L k_i² + M (k² − k_i²)], H_{X_i X_j} = c N k_i k_j (i ≠ j), with
  L = −(γ1 + 4γ2), M = −(γ1 − 2γ2), N = −6γ3 — the Luttinger γ in the six-band model, the
  modified γ' in the eight-band model;
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
import re
from dataclasses import dataclass, fields

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..units import HBAR2_OVER_2M0_EV_A2

__all__ = [
    "DEFAULT_FD_STEP_INVA",
    "DEFAULT_NONPARABOLICITY_KMAX_INVA",
    "EIGHT_BAND_BASIS",
    "ENERGY_ZERO",
    "MODEL_NAMES",
    "REQUIRED_PARAMETERS",
    "SIX_BAND_BASIS",
    "TWO_BAND_REMOTE",
    "DirectionalBands",
    "GammaMasses",
    "KPModel",
    "KPParameters",
    "Nonparabolicity",
    "bands_along",
    "cartesian_basis_matrix",
    "conduction_inverse_mass",
    "eight_band_model",
    "kane_F",
    "kane_nonparabolicity",
    "luttinger_from_modified",
    "luttinger_inverse_masses",
    "make_model",
    "masses_at_gamma",
    "modified_luttinger",
    "nonparabolicity",
    "six_band_model",
    "spherical_gamma",
    "split_off_inverse_mass",
    "two_band_constants",
    "two_band_coupling_eV",
    "two_band_energies_eV",
    "two_band_model",
    "two_band_nonparabolicity",
    "unit_vector",
]

C = HBAR2_OVER_2M0_EV_A2  # ħ²/2m0 in eV Å²

#: Model names, in increasing size.
MODEL_NAMES: tuple[str, ...] = ("two-band", "six-band", "eight-band")

#: The remote-band choices of the two-band model (see :func:`two_band_model`).
TWO_BAND_REMOTE: tuple[str, ...] = ("fitted", "free-electron")

#: The parameters each model needs (the two-band model with ``remote="fitted"``).
REQUIRED_PARAMETERS: dict[str, tuple[str, ...]] = {
    "two-band": ("Eg_eV", "Delta_so_eV", "Ep_eV", "F", "gamma1", "gamma2", "gamma3"),
    "six-band": ("Delta_so_eV", "gamma1", "gamma2", "gamma3"),
    "eight-band": ("Eg_eV", "Delta_so_eV", "Ep_eV", "F", "gamma1", "gamma2", "gamma3"),
}

#: What energy zero the models use (stated in results).
ENERGY_ZERO = "valence-band top at Γ (Γ8; the light-hole-like band top in the two-band model)"

#: Labels of the eight-band basis states (the module docstring gives the states).
EIGHT_BAND_BASIS: tuple[str, ...] = (
    "Γ6 +1/2", "Γ6 -1/2", "Γ8 +3/2", "Γ8 +1/2", "Γ8 -1/2", "Γ8 -3/2", "Γ7 +1/2", "Γ7 -1/2")
#: Labels of the six-band basis states.
SIX_BAND_BASIS: tuple[str, ...] = EIGHT_BAND_BASIS[2:]
#: Labels of the two-band basis states.
TWO_BAND_BASIS: tuple[str, ...] = ("S (conduction)", "p along k (light-hole-like)")

#: Default finite-difference step for masses, in Å⁻¹ (see :func:`masses_at_gamma`).
DEFAULT_FD_STEP_INVA: float = 3e-4

#: Default largest k of the nonparabolicity fit, in Å⁻¹ (see :func:`nonparabolicity`).
DEFAULT_NONPARABOLICITY_KMAX_INVA: float = 0.01

#: Levels at Γ closer than this (eV) form one degenerate group.
_GROUP_TOL_EV = 1e-9

FloatArray = NDArray[np.float64]


# --------------------------------------------------------------------------------------------
# parameters and their conversions
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class KPParameters:
    """The k·p parameters of a zincblende crystal at Γ (None where not given).

    Attributes
    ----------
    Eg_eV : float
        Direct gap Γ6 − Γ8.
    Delta_so_eV : float
        Spin–orbit splitting Γ8 − Γ7.
    Ep_eV : float
        Kane energy Ep = 2 m0 P²/ħ².
    F : float
        Kane's remote-band parameter of the conduction band (dimensionless).
    gamma1, gamma2, gamma3 : float
        Luttinger parameters (not the modified ones).
    """

    Eg_eV: float | None = None
    Delta_so_eV: float | None = None
    Ep_eV: float | None = None
    F: float | None = None
    gamma1: float | None = None
    gamma2: float | None = None
    gamma3: float | None = None

    def missing(self, model: str) -> tuple[str, ...]:
        """The names of the parameters ``model`` needs that are not given."""
        if model not in REQUIRED_PARAMETERS:
            raise ValueError(f"unknown model {model!r}; expected one of {', '.join(MODEL_NAMES)}")
        return tuple(p for p in REQUIRED_PARAMETERS[model] if getattr(self, p) is None)

    def supports(self, model: str) -> bool:
        """True when every parameter ``model`` needs is given."""
        return not self.missing(model)

    def as_dict(self) -> dict[str, float | None]:
        """The parameters by name (for JSON)."""
        return {f.name: getattr(self, f.name) for f in fields(self)}

    def _require(self, model: str) -> None:
        gone = self.missing(model)
        if gone:
            raise ValueError(f"the {model} model needs {', '.join(gone)}")

    def modified_gammas(self) -> tuple[float, float, float]:
        """(γ1', γ2', γ3') of the eight-band model; see :func:`modified_luttinger`."""
        self._require("eight-band")
        return modified_luttinger(self.gamma1, self.gamma2, self.gamma3, self.Eg_eV, self.Ep_eV)


def modified_luttinger(gamma1: float, gamma2: float, gamma3: float, Eg_eV: float,
                       Ep_eV: float) -> tuple[float, float, float]:
    r"""Modified Luttinger parameters of the eight-band model.

    .. math:: \gamma_1' = \gamma_1 - \frac{E_P}{3E_g}, \quad
              \gamma_{2,3}' = \gamma_{2,3} - \frac{E_P}{6E_g}

    (Vurgaftman, Meyer & Ram-Mohan, J. Appl. Phys. 89, 5815 (2001), Sec. II; Winkler 2003,
    Sec. 3.3; from memory.) The subtracted parts are the second-order contributions of the Γ6
    band through P, which the eight-band model treats exactly.
    """
    if not Eg_eV > 0:
        raise ValueError(f"Eg_eV must be positive, got {Eg_eV}")
    d = Ep_eV / (6.0 * Eg_eV)
    return gamma1 - 2.0 * d, gamma2 - d, gamma3 - d


def luttinger_from_modified(gamma1p: float, gamma2p: float, gamma3p: float, Eg_eV: float,
                            Ep_eV: float) -> tuple[float, float, float]:
    """The inverse of :func:`modified_luttinger`: (γ1, γ2, γ3) from (γ1', γ2', γ3')."""
    if not Eg_eV > 0:
        raise ValueError(f"Eg_eV must be positive, got {Eg_eV}")
    d = Ep_eV / (6.0 * Eg_eV)
    return gamma1p + 2.0 * d, gamma2p + d, gamma3p + d


def conduction_inverse_mass(Eg_eV: float, Delta_so_eV: float, Ep_eV: float, F: float) -> float:
    r"""Band-edge m0/m_e of the Γ6 conduction band in the eight-band model.

    .. math:: \frac{m_0}{m_e} = (1 + 2F) + \frac{E_P}{3}\Big(\frac{2}{E_g}
              + \frac{1}{E_g + \Delta_{so}}\Big)

    (Vurgaftman, Meyer & Ram-Mohan 2001, Sec. II, equivalently
    E_P (E_g + 2Δ/3)/[E_g (E_g + Δ)]; from memory.)
    """
    return (1.0 + 2.0 * F) + Ep_eV / 3.0 * (2.0 / Eg_eV + 1.0 / (Eg_eV + Delta_so_eV))


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


def two_band_nonparabolicity(Eg_eV: float, Ep2_eV: float, s_c: float = 1.0,
                             s_v: float = 1.0) -> float:
    r"""Nonparabolicity α of the two-band conduction band, exactly (second order in k²).

    Writing :math:`E - E_g = a_1 x + a_2 x^2 + \dots` with :math:`x = c k^2` and
    :math:`p = E_P^{(2)}/E_g`, the secular equation gives :math:`a_1 = s_c + p` and
    :math:`a_2 = -p(p + s_c - s_v)/E_g`; matching :math:`E(1 + \alpha E) = \hbar^2k^2/2m^*`
    gives :math:`\alpha = -a_2/a_1^2 = p(p + s_c - s_v)/[E_g (s_c + p)^2]`. For bare electrons
    (s_c = s_v = 1) this is Kane's :math:`(1 - m^*/m_0)^2/E_g` (:func:`kane_nonparabolicity`).
    """
    p = Ep2_eV / Eg_eV
    return p * (p + s_c - s_v) / (Eg_eV * (s_c + p) ** 2)


def kane_nonparabolicity(m_e_m0: float, Eg_eV: float) -> float:
    """Kane's two-band nonparabolicity α = (1 − m*/m0)²/Eg, in 1/eV (Kane 1957, the
    two-band result for E(1 + αE) = ħ²k²/2m*; from memory)."""
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
# models
# --------------------------------------------------------------------------------------------


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
    """Q_ij on p ⊗ spin (3, 3, 6, 6) from the DKK form with L, M, N of the γ's."""
    big_l, big_m, big_n = -(gamma1 + 4 * gamma2), -(gamma1 - 2 * gamma2), -6.0 * gamma3
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
    :func:`two_band_nonparabolicity`.
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


# --------------------------------------------------------------------------------------------
# bands along a direction
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class DirectionalBands:
    """Bands of a k·p model along a straight line through Γ.

    Attributes
    ----------
    model : str
    direction : ndarray, shape (3,)
        Unit vector.
    k_invA : ndarray, shape (n_k,)
        Signed distance from Γ along ``direction``, Å⁻¹.
    k_cart_invA : ndarray, shape (n_k, 3)
    k_frac : ndarray or None, shape (n_k,)
        k in units of 2π/a (None without a lattice constant).
    energies_eV : ndarray, shape (n_k, n)
        Sorted bands, eV from the valence-band top (:data:`ENERGY_ZERO`).
    band_names : tuple of str
        Names of the sorted bands near Γ.
    """

    model: str
    direction: FloatArray
    k_invA: FloatArray
    k_cart_invA: FloatArray
    k_frac: FloatArray | None
    energies_eV: FloatArray
    band_names: tuple[str, ...]
    energy_zero: str = ENERGY_ZERO


def _two_pi_over_a(model: KPModel) -> float:
    if model.lattice_constant_A is None:
        raise ValueError("k as a fraction of 2π/a needs the model's lattice_constant_A")
    return 2.0 * math.pi / model.lattice_constant_A


def bands_along(model: KPModel, direction: ArrayLike | str, *, k_max_invA: float | None = None,
                k_max_frac: float | None = None, n_k: int = 101,
                both_sides: bool = False) -> DirectionalBands:
    """Bands from Γ along ``direction`` (or through Γ with ``both_sides``).

    Parameters
    ----------
    model : KPModel
    direction : array_like or str
        See :func:`unit_vector`.
    k_max_invA, k_max_frac : float
        Extent of the line, in Å⁻¹ or in units of 2π/a (give exactly one; the fraction needs
        the model's lattice constant).
    n_k : int
        Number of k-points (≥ 2).
    both_sides : bool
        Sample −k_max … k_max instead of 0 … k_max.

    Returns
    -------
    DirectionalBands
    """
    u = unit_vector(direction)
    if (k_max_invA is None) == (k_max_frac is None):
        raise ValueError("give exactly one of k_max_invA and k_max_frac")
    k_max = k_max_invA if k_max_invA is not None else k_max_frac * _two_pi_over_a(model)
    if not (math.isfinite(k_max) and k_max > 0):
        raise ValueError(f"the extent of the line must be positive, got {k_max}")
    if n_k < 2:
        raise ValueError(f"n_k must be at least 2, got {n_k}")
    t = np.linspace(-k_max if both_sides else 0.0, k_max, n_k)
    k_cart = t[:, None] * u
    frac = None if model.lattice_constant_A is None else t / _two_pi_over_a(model)
    return DirectionalBands(model.name, u, t, k_cart, frac, model.energies_eV(k_cart),
                            model.band_names)


# --------------------------------------------------------------------------------------------
# masses at Γ
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class GammaMasses:
    """Band-edge masses at Γ along one direction, one entry per sorted band.

    Attributes
    ----------
    model : str
    direction : ndarray, shape (3,)
    band_names : tuple of str
    energies_eV : ndarray, shape (n,)
        Band energies at Γ.
    inverse_mass_m0 : ndarray, shape (n,)
        (m0/ħ²) d²E/dk² along the direction: positive for an electron-like (upward) band,
        negative for a hole band (CONVENTIONS.md: the curvature's sign is kept here).
    method : str
        "analytic" (second-order Löwdin at Γ) or "finite-difference".
    step_invA : float or None
        The finite-difference step.
    """

    model: str
    direction: FloatArray
    band_names: tuple[str, ...]
    energies_eV: FloatArray
    inverse_mass_m0: FloatArray
    method: str
    step_invA: float | None = None

    @property
    def mass_m0(self) -> FloatArray:
        """|m*| in m0 per band (hole masses positive; the sign is in ``inverse_mass_m0``)."""
        with np.errstate(divide="ignore"):
            return 1.0 / np.abs(self.inverse_mass_m0)

    def of(self, band_name: str) -> float:
        """The mass (m0, positive) of the named band, averaged over its Kramers pair."""
        picks = [i for i, name in enumerate(self.band_names) if name == band_name]
        if not picks:
            raise ValueError(f"no band named {band_name!r}; the bands are "
                             f"{', '.join(dict.fromkeys(self.band_names))}")
        return float(1.0 / np.mean(np.abs(self.inverse_mass_m0[picks])))

    def as_dict(self) -> dict[str, float]:
        """Mass (m0) by band name."""
        return {name: self.of(name) for name in dict.fromkeys(self.band_names)}


def _curvatures(model: KPModel, direction: ArrayLike | str) -> tuple[FloatArray, FloatArray]:
    """Sorted Γ energies and d²E/dt²/2 (eV Å²) of the bands leaving them along û.

    For each degenerate group D at Γ, the t² coefficients are the eigenvalues of
    W = H2_DD + H1_DR (E_D − H0_R)⁻¹ H1_RD (second-order quasi-degenerate perturbation theory;
    Löwdin, J. Chem. Phys. 19, 1396 (1951)), valid because H1_DD = 0 (no k-linear terms).
    """
    h0, h1, h2 = model.directional_terms(direction)
    e = np.real(np.diag(h0))
    order = np.argsort(e, kind="stable")
    energies, curv = [], []
    start = 0
    while start < len(order):
        stop = start + 1
        while stop < len(order) and e[order[stop]] - e[order[start]] <= _GROUP_TOL_EV:
            stop += 1
        grp, rest = order[start:stop], np.concatenate([order[:start], order[stop:]])
        if np.abs(h1[np.ix_(grp, grp)]).max() > 1e-12:
            raise ValueError("k-linear terms inside a degenerate level: no band-edge mass")
        w = h2[np.ix_(grp, grp)]
        if rest.size:
            denom = e[grp].mean() - e[rest]
            w = w + (h1[np.ix_(grp, rest)] / denom) @ h1[np.ix_(rest, grp)]
        curv.extend(np.linalg.eigvalsh(0.5 * (w + w.conj().T)))
        energies.extend(e[grp])
        start = stop
    return np.array(energies), np.array(curv)


def masses_at_gamma(model: KPModel, direction: ArrayLike | str, method: str = "analytic",
                    step_invA: float | None = None) -> GammaMasses:
    r"""Band-edge masses at Γ along ``direction``, (m0/m*) = (m0/ħ²) d²E/dk².

    ``method="analytic"``: exact for the model, from second-order (Löwdin) perturbation theory
    in k at Γ (see :func:`_curvatures`). ``method="finite-difference"``: central differences
    of the sorted eigenvalues, D(h) = [E(h) + E(−h) − 2E(0)]/h², Richardson-extrapolated,
    (4D(h) − D(2h))/3, so the truncation error is O(h⁴). The default step 3·10⁻⁴ Å⁻¹ (about
    3·10⁻⁴ of 2π/a) balances it against rounding: it is far inside the scale of
    nonparabolicity (≈ 0.1 Å⁻¹ for the GaAs conduction band, ≈ 0.03 Å⁻¹ for the InP
    light-hole/split-off mixing), so (h/0.03 Å⁻¹)⁴ ≈ 10⁻⁸, while rounding in D is about
    10⁻¹⁵ eV/h² ≈ 10⁻⁸ eV Å² against curvatures of 1–60 eV Å². Measured on the bundled GaAs
    and InP models in every model and along [001], [110], [111], [123]: within 2·10⁻⁹ of the
    analytic masses (10⁻⁸ at h = 10⁻³ Å⁻¹, 10⁻⁵ at 3·10⁻³ Å⁻¹).

    Returns
    -------
    GammaMasses
    """
    u = unit_vector(direction)
    if method == "analytic":
        energies, curv = _curvatures(model, u)
        inv = curv / C
        step = None
    elif method == "finite-difference":
        step = DEFAULT_FD_STEP_INVA if step_invA is None else float(step_invA)
        if not (math.isfinite(step) and step > 0):
            raise ValueError(f"step_invA must be positive, got {step_invA}")
        t = np.array([0.0, step, -step, 2 * step, -2 * step])
        e = model.energies_eV(t[:, None] * u)
        d1 = (e[1] + e[2] - 2 * e[0]) / step**2
        d2 = (e[3] + e[4] - 2 * e[0]) / (2 * step) ** 2
        inv = (4.0 * d1 - d2) / 3.0 / (2.0 * C)
        energies = e[0]
    else:
        raise ValueError(f"method must be 'analytic' or 'finite-difference', got {method!r}")
    return GammaMasses(model.name, u, model.band_names, np.asarray(energies, dtype=float),
                       np.asarray(inv, dtype=float), method, step)


# --------------------------------------------------------------------------------------------
# nonparabolicity
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class Nonparabolicity:
    """Nonparabolicity of one band along one direction.

    Attributes
    ----------
    band_name : str
    direction : ndarray, shape (3,)
    edge_mass_m0 : float
        Band-edge mass (positive), from the analytic curvature.
    alpha_per_eV : float
        α in ε(1 + αε) = ħ²k²/2m*, ε the carrier energy from the band edge (E − E0 for an
        electron band, E0 − E for a hole band).
    k_invA : ndarray, shape (n_k,)
        Sampled |k|, from 0.
    carrier_energy_eV : ndarray, shape (n_k,)
        ε(k).
    energy_mass_m0 : ndarray, shape (n_k,)
        The energy-dependent mass m*(ε) = ħ²k²/(2ε), in m0 (the edge mass at k = 0).
    """

    band_name: str
    direction: FloatArray
    edge_mass_m0: float
    alpha_per_eV: float
    k_invA: FloatArray
    carrier_energy_eV: FloatArray
    energy_mass_m0: FloatArray


def nonparabolicity(model: KPModel, direction: ArrayLike | str = (0.0, 0.0, 1.0),
                    band: str = "conduction", *,
                    k_max_invA: float = DEFAULT_NONPARABOLICITY_KMAX_INVA,
                    n_k: int = 41) -> Nonparabolicity:
    r"""Nonparabolicity coefficient α and energy-dependent mass of a band near Γ.

    The carrier energy is fitted as ε = a1 x + a2 x² + a3 x³ + a4 x⁴ + a5 x⁵ (x = k², least
    squares over ``n_k`` points up to ``k_max_invA``); then ε(1 + αε) = ħ²k²/2m* to order x²
    gives α = −a2/a1². The series in x converges out to the nearest branch point of the band,
    |k| ≈ 0.075 Å⁻¹ for the GaAs conduction band (where the two-band square root vanishes);
    the default k_max = 0.01 Å⁻¹ (5.7 meV above the GaAs edge) leaves the first neglected term
    at (0.01/0.075)¹⁰ ≈ 10⁻⁹ of the first; measured against the closed form of the two-band
    model, α comes out within 10⁻⁸ (10⁻⁶ at 0.02 Å⁻¹, 10⁻⁵ at 0.03 Å⁻¹).
    For the two-band model the exact α is :func:`two_band_nonparabolicity`; Kane's
    α ≈ (1 − m*/m0)²/Eg (:func:`kane_nonparabolicity`) is its bare-electron case.

    Parameters
    ----------
    model : KPModel
    direction : array_like or str
    band : str
        A name from ``model.band_names`` (the lower band of a Kramers pair is used).
    k_max_invA : float
    n_k : int
        At least 8.

    Returns
    -------
    Nonparabolicity
    """
    u = unit_vector(direction)
    if band not in model.band_names:
        raise ValueError(f"no band named {band!r}; the bands are "
                         f"{', '.join(dict.fromkeys(model.band_names))}")
    if not (math.isfinite(k_max_invA) and k_max_invA > 0) or n_k < 8:
        raise ValueError("k_max_invA must be positive and n_k at least 8")
    index = model.band_names.index(band)
    masses = masses_at_gamma(model, u)
    inv = masses.inverse_mass_m0[index]
    sign = 1.0 if inv > 0 else -1.0
    k = np.linspace(0.0, k_max_invA, n_k)
    e = model.energies_eV(k[:, None] * u)[:, index]
    eps = sign * (e - e[0])
    x = k[1:] ** 2
    scale = x[-1]
    design = np.stack([(x / scale) ** p for p in range(1, 6)], axis=1)
    coeffs = np.linalg.lstsq(design, eps[1:], rcond=None)[0] / scale ** np.arange(1, 6)
    alpha = -coeffs[1] / coeffs[0] ** 2
    energy_mass = np.empty(n_k)
    energy_mass[0] = 1.0 / abs(inv)
    energy_mass[1:] = C * x / eps[1:]
    return Nonparabolicity(band, u, float(1.0 / abs(inv)), float(alpha), k, eps, energy_mass)
