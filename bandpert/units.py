"""Physical constants and unit conversions used at every boundary of bandpert.

All values derive from :mod:`scipy.constants` (CODATA); none is typed by hand.
Internal units: energies in eV, lengths in Å, wave vectors in Å⁻¹, masses in m0.
"""

from __future__ import annotations

import scipy.constants as _c

#: ħ²/(2 m0) in eV·Å², so that E = HBAR2_OVER_2M0_EV_A2 * |k|² with k in Å⁻¹.
HBAR2_OVER_2M0_EV_A2: float = _c.hbar**2 / (2.0 * _c.m_e) / _c.e * 1.0e20

#: e²/(4πε0) in eV·Å (the Coulomb constant times e², for the optical spectrum).
COULOMB_EV_A: float = _c.e / (4.0 * _c.pi * _c.epsilon_0) * 1.0e10

#: One rydberg (R∞ h c) in eV.
RYDBERG_EV: float = _c.physical_constants["Rydberg constant times hc in eV"][0]

#: Boltzmann constant in eV/K.
BOLTZMANN_EV_PER_K: float = _c.k / _c.e

#: Energy units accepted in material files, as factors to eV.
ENERGY_UNITS_TO_EV: dict[str, float] = {"eV": 1.0, "Ry": RYDBERG_EV}


def to_ev(value: float, unit: str) -> float:
    """Convert an energy from ``unit`` ("eV" or "Ry") to eV.

    Parameters
    ----------
    value : float
        Energy in ``unit``.
    unit : str
        One of the keys of :data:`ENERGY_UNITS_TO_EV`.

    Returns
    -------
    float
        The energy in eV.
    """
    return value * ENERGY_UNITS_TO_EV[unit]
