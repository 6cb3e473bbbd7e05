"""The optional ``[nonlocal]`` table of a plane-wave material file.

Schema (energies in eV, radii in Å), per species and for l = 0 and l = 2, each pair optional::

    [nonlocal.species.Ga]
    A0_eV = 0.0        # square-well depth of the l = 0 channel
    R0_A = 1.2         # its radius
    A2_eV = 1.6
    R2_A = 1.6
    A0_energy_slope = -0.1   # optional: the l = 0 depth follows the state's energy E,
                             #   A_0(E) = A0_eV + A0_energy_slope · E (needs A0_eV and R0_A)

Species without a table, and channels without their pair of keys, add nothing. The term and the
energy scale of E are documented in :mod:`bandpert.planewave.nonlocal_term`.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from .key_ranges import NONLOCAL_DEPTH_EV, NONLOCAL_ENERGY_SLOPE, NONLOCAL_RADIUS_A
from .reader import TableReader, species_tables

#: Angular momenta of the channels.
CHANNELS = (0, 2)

@dataclass(frozen=True)
class Nonlocal:
    """The ``[nonlocal]`` table.

    Attributes
    ----------
    species : dict
        species → ((l, A_l in eV, R_l in Å), …).
    energy_slopes : dict
        species → s of A_0(E) = A_0 + s E, for the species whose file gives
        ``A0_energy_slope`` (absent: a constant depth).
    """

    species: dict[str, tuple[tuple[int, float, float], ...]]
    energy_slopes: dict[str, float] = field(default_factory=dict)


def read_nonlocal(r: TableReader, species_names: set[str], dimension: int = 3) -> Nonlocal:
    """Validate a ``[nonlocal]`` table (module docstring).

    Raises
    ------
    InputError
        Unknown species, a depth without its radius (or the reverse), a radius that is not
        positive or above 5 Å, a depth above 100 eV, an energy slope outside [−1, 0.5] or
        without its l = 0 well, a lattice that is not 3D.
    """
    sp = species_tables(r, species_names, dimension, "nonlocal",
                        "nonlocal terms need a 3D lattice (spherical harmonics)")
    out: dict[str, tuple[tuple[int, float, float], ...]] = {}
    slopes: dict[str, float] = {}
    for name in sorted(sp.table):
        s = sp.sub(name)
        channels = []
        for l in CHANNELS:  # noqa: E741 - the angular momentum
            depth = s.number(f"A{l}_eV", required=False, bounds=NONLOCAL_DEPTH_EV.closed,
                             meaning="a square-well depth in eV")
            radius = s.number(f"R{l}_A", required=False, bounds=NONLOCAL_RADIUS_A.closed,
                              meaning="a core radius in Å")
            if (depth is None) != (radius is None):
                given, missing = (f"A{l}_eV", f"R{l}_A") if radius is None else (f"R{l}_A",
                                                                                 f"A{l}_eV")
                raise s.fail(missing, f"missing while {given} is given; expected both the depth "
                                      f"and the radius of the l = {l} channel, or neither")
            if radius is not None and not NONLOCAL_RADIUS_A.contains(radius):  # the open end
                raise s.fail(f"R{l}_A", f"must be positive, got {radius:g}; expected a radius "
                                        "in Å")
            if depth is not None:
                channels.append((l, float(depth), float(radius)))
        slope = s.number("A0_energy_slope", required=False, bounds=NONLOCAL_ENERGY_SLOPE.closed,
                         meaning="the energy slope of the l = 0 depth (eV per eV)")
        if slope is not None:
            if not any(ell == 0 for ell, _, _ in channels):
                raise s.fail("A0_energy_slope", "given without the l = 0 well; expected A0_eV "
                                                "and R0_A beside it")
            if slope != 0.0:
                slopes[name] = float(slope)
        s.finish()
        out[name] = tuple(channels)
    sp.finish()
    r.finish()
    return Nonlocal(species=out, energy_slopes=slopes)
