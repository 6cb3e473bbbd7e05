"""The optional ``[spin_orbit]`` table of a plane-wave material file.

Schema (energies in eV, wave numbers in Å⁻¹)::

    [spin_orbit.species.Ga]
    strength_eV = 0.012            # λ_s ≥ 0
    core_shell = 3                 # optional: n of the core p shell (2, 3, 4 or 5)
    slater_exponent_invA = 12.44   # with core_shell: ζ of the Slater orbital r^(n−1) e^(−ζr)

Every species of the atoms must be listed (a strength of 0 switches a species off). Without
``core_shell`` the radial factor is 1 (the K × K′ form alone); with it, the core-orbital factor
of :func:`bandpert.planewave.spinorbit.radial_factor`. The term itself is documented in
:mod:`bandpert.planewave.spinorbit`.
"""

from __future__ import annotations

from dataclasses import dataclass

from .key_ranges import MAX_STRENGTH_EV, SLATER_EXPONENT_INVA, SPIN_ORBIT_STRENGTH_EV
from .reader import TableReader, species_tables

#: Principal quantum numbers of the core p shells the radial factor has closed forms for.
CORE_SHELLS = (2, 3, 4, 5)

#: Accepted range of the Slater exponent ζ, Å⁻¹ (core p orbitals of the elements up to Xe lie
#: between about 3 and 40 Å⁻¹ by Slater's rules). Every key's range lives in :mod:`.key_ranges`
#: (the strength's too: :data:`MAX_STRENGTH_EV` is re-exported from there).
SLATER_EXPONENT_RANGE_INVA = SLATER_EXPONENT_INVA.closed

__all__ = ["CORE_SHELLS", "MAX_STRENGTH_EV", "SLATER_EXPONENT_RANGE_INVA", "SpeciesSpinOrbit",
           "SpinOrbit", "read_spin_orbit"]


@dataclass(frozen=True)
class SpeciesSpinOrbit:
    """Spin–orbit parameters of one species.

    Attributes
    ----------
    strength_eV : float
        λ_s, eV (the term multiplies it by (K × K′)/(2π/a)², dimensionless).
    core_shell : int or None
        Principal quantum number of the core p shell; None for the radial factor 1.
    slater_exponent_invA : float or None
        ζ of the Slater orbital r^(n−1) e^(−ζr), Å⁻¹ (with ``core_shell``).
    """

    strength_eV: float
    core_shell: int | None = None
    slater_exponent_invA: float | None = None


@dataclass(frozen=True)
class SpinOrbit:
    """The ``[spin_orbit]`` table: per-species parameters, species in sorted order."""

    species: dict[str, SpeciesSpinOrbit]


def read_spin_orbit(r: TableReader, species_names: set[str], dimension: int = 3) -> SpinOrbit:
    """Validate a ``[spin_orbit]`` table (module docstring).

    Parameters
    ----------
    r : TableReader
        Reader of the ``spin_orbit`` table.
    species_names : set of str
        The species the atoms use.
    dimension : int
        Of the lattice: the term (K × K′)·σ needs three dimensions.

    Returns
    -------
    SpinOrbit

    Raises
    ------
    InputError
        Unknown or missing species, a strength outside [0, 10] eV, a core shell other than
        2–5, a Slater exponent outside its range or given without a core shell.
    """
    sp = species_tables(r, species_names, dimension, "spin_orbit",
                        "spin-orbit coupling needs a 3D lattice (the term is (K × K′)·σ)")
    params: dict[str, SpeciesSpinOrbit] = {}
    for name in sorted(species_names):
        if not sp.has(name):
            raise sp.fail(name, f"missing spin-orbit parameters for species '{name}' (atoms list "
                                "it); expected a table with strength_eV (0 switches it off)")
        s = sp.sub(name)
        strength = s.number("strength_eV", bounds=SPIN_ORBIT_STRENGTH_EV.closed,
                            meaning="λ in eV: 0 switches the species off, and fitted strengths "
                                    "are of order 0.01-0.1 eV")
        shell = s.integer("core_shell", required=False, minimum=min(CORE_SHELLS),
                          maximum=max(CORE_SHELLS),
                          meaning="the principal quantum number of a core p shell")
        zeta = s.number("slater_exponent_invA", required=shell is not None,
                        bounds=SLATER_EXPONENT_RANGE_INVA,
                        meaning="ζ of a core p orbital in Å⁻¹")
        if shell is None and zeta is not None:
            raise s.fail("slater_exponent_invA", "is given without core_shell; expected both "
                                                 "(the core-orbital radial factor) or neither "
                                                 "(radial factor 1)")
        s.finish()
        params[name] = SpeciesSpinOrbit(strength_eV=float(strength), core_shell=shell,
                                        slater_exponent_invA=zeta)
    sp.finish()
    r.finish()
    return SpinOrbit(species=params)
