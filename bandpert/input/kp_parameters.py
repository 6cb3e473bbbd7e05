r"""The k·p parameters a file holds, as data: the band parameters at Γ, the deformation
potentials, the elastic constants and the valence-band offset.

They live in the input layer so that the file reader (:mod:`bandpert.input.kp_file`) can
validate them without knowing the models; the models and the other relations between the
parameters are in :mod:`bandpert.kp` (which re-exports what is defined here). Two relations
sit here because the reader's checks need them: the modified Luttinger parameters and the
conduction-band mass of the eight-band model.

Deformation potentials: one sign convention
-------------------------------------------
:class:`DeformationPotentials` holds a_c, a_v, b, d in the convention of Vurgaftman, Meyer &
Ram-Mohan, J. Appl. Phys. 89, 5815 (2001) and Chuang, *Physics of Optoelectronic Devices*
(Wiley 1995), ch. 4 (from memory): the gap's hydrostatic deformation potential is
a = a_c − a_v (GaAs: −7.17 − 1.16 = −8.33 eV, so the gap opens under compression), and the
strain Hamiltonian (Bir & Pikus, *Symmetry and Strain-Induced Effects in Semiconductors*, Wiley
1974) has

    ΔE_c = a_c tr ε,   P_ε = −a_v tr ε,   Q_ε = −(b/2)(ε_xx + ε_yy − 2ε_zz),
    R_ε = (√3/2) b (ε_xx − ε_yy) − i d ε_xy,   S_ε = −d (ε_xz − i ε_yz),

entering the valence block as P_k, Q_k, R_k, S_k do (:mod:`bandpert.kp.hamiltonians`). A file
in the opposite a_v convention says so (``deformation.a_v_convention``) and the reader flips
the sign once.
"""

from __future__ import annotations

from dataclasses import dataclass, fields

__all__ = [
    "MODEL_NAMES",
    "REQUIRED_PARAMETERS",
    "DeformationPotentials",
    "ElasticConstants",
    "KPParameters",
    "conduction_inverse_mass",
    "modified_luttinger",
]

#: Model names, in increasing size.
MODEL_NAMES: tuple[str, ...] = ("two-band", "six-band", "eight-band")

#: The parameters each model needs (the two-band model with ``remote="fitted"``).
REQUIRED_PARAMETERS: dict[str, tuple[str, ...]] = {
    "two-band": ("Eg_eV", "Delta_so_eV", "Ep_eV", "F", "gamma1", "gamma2", "gamma3"),
    "six-band": ("Delta_so_eV", "gamma1", "gamma2", "gamma3"),
    "eight-band": ("Eg_eV", "Delta_so_eV", "Ep_eV", "F", "gamma1", "gamma2", "gamma3"),
}

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



def conduction_inverse_mass(Eg_eV: float, Delta_so_eV: float, Ep_eV: float, F: float) -> float:
    r"""Band-edge m0/m_e of the Γ6 conduction band in the eight-band model.

    .. math:: \frac{m_0}{m_e} = (1 + 2F) + \frac{E_P}{3}\Big(\frac{2}{E_g}
              + \frac{1}{E_g + \Delta_{so}}\Big)

    (Vurgaftman, Meyer & Ram-Mohan 2001, Sec. II, equivalently
    E_P (E_g + 2Δ/3)/[E_g (E_g + Δ)]; from memory.)
    """
    return (1.0 + 2.0 * F) + Ep_eV / 3.0 * (2.0 / Eg_eV + 1.0 / (Eg_eV + Delta_so_eV))




@dataclass(frozen=True)
class DeformationPotentials:
    """Bir–Pikus deformation potentials of a cubic crystal at Γ, eV (module docstring: the
    convention, a = a_c − a_v).

    Attributes
    ----------
    a_c_eV : float
        Conduction band (Γ6): ΔE_c = a_c tr ε.
    a_v_eV : float
        Valence band (Γ8, Γ7): P_ε = −a_v tr ε.
    b_eV, d_eV : float
        Shear deformation potentials of Γ8 (tetragonal and rhombohedral).
    """

    a_c_eV: float
    a_v_eV: float
    b_eV: float
    d_eV: float

    @property
    def gap_eV(self) -> float:
        """The gap's hydrostatic deformation potential a = a_c − a_v."""
        return self.a_c_eV - self.a_v_eV


@dataclass(frozen=True)
class ElasticConstants:
    """Elastic stiffness constants of a cubic crystal, GPa (Voigt notation)."""

    c11_GPa: float
    c12_GPa: float
    c44_GPa: float
