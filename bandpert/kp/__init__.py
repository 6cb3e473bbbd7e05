"""k·p models from parameter files: parameters, Hamiltonians, bands and band-edge analysis.

- :mod:`.parameters`: the parameters of a cubic crystal at Γ and their relations (modified
  Luttinger parameters, Kane's F, DKK L, M, N, directions);
- :mod:`.hamiltonians`: the two-, six- and eight-band Hamiltonians H(k);
- :mod:`.bands`: bands along lines through Γ;
- :mod:`.analysis`: masses at Γ and nonparabolicity.
"""

from .analysis import (
    CUBIC_DIRECTIONS,
    DEFAULT_FD_STEP_INVA,
    DEFAULT_NONPARABOLICITY_KMAX_INVA,
    GammaMasses,
    KPAnalysis,
    ModelAnalysis,
    Nonparabolicity,
    analyse_kp_material,
    masses_at_gamma,
    nonparabolicity,
    two_band_nonparabolicity,
)
from .bands import (
    DirectionalBands,
    bands_along,
)
from .hamiltonians import (
    EIGHT_BAND_BASIS,
    ENERGY_ZERO,
    SIX_BAND_BASIS,
    TWO_BAND_BASIS,
    TWO_BAND_REMOTE,
    KPModel,
    cartesian_basis_matrix,
    eight_band_model,
    make_model,
    six_band_model,
    two_band_constants,
    two_band_energies_eV,
    two_band_model,
)
from .parameters import (
    MODEL_NAMES,
    REQUIRED_PARAMETERS,
    KPParameters,
    conduction_inverse_mass,
    dkk_from_luttinger,
    dkk_with_free_electron,
    kane_F,
    kane_nonparabolicity,
    luttinger_from_dkk,
    luttinger_from_modified,
    luttinger_inverse_masses,
    modified_luttinger,
    spherical_gamma,
    split_off_inverse_mass,
    two_band_coupling_eV,
    unit_vector,
)

__all__ = [
    "CUBIC_DIRECTIONS",
    "DEFAULT_FD_STEP_INVA",
    "DEFAULT_NONPARABOLICITY_KMAX_INVA",
    "EIGHT_BAND_BASIS",
    "ENERGY_ZERO",
    "MODEL_NAMES",
    "REQUIRED_PARAMETERS",
    "SIX_BAND_BASIS",
    "TWO_BAND_BASIS",
    "TWO_BAND_REMOTE",
    "DirectionalBands",
    "GammaMasses",
    "KPAnalysis",
    "KPModel",
    "KPParameters",
    "ModelAnalysis",
    "Nonparabolicity",
    "analyse_kp_material",
    "bands_along",
    "cartesian_basis_matrix",
    "conduction_inverse_mass",
    "dkk_from_luttinger",
    "dkk_with_free_electron",
    "eight_band_model",
    "kane_F",
    "kane_nonparabolicity",
    "luttinger_from_dkk",
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
