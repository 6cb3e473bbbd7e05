"""Why a Fourier coefficient V(G − G′) of a free-electron degenerate group vanishes.

The structure factor, the potential's range, a missing form factor or Fourier coefficient, or no
potential at all (:func:`coupling_reasons`); used by :mod:`bandpert.physics.nfe_gaps`.
"""

from __future__ import annotations

import numpy as np

from ..crystal.lattice import reciprocal_vectors
from ..input.material import Material
from ..planewave.potential import SHELL_TOLERANCE, species_form_factor

__all__ = [
    "REASON_CANCEL",
    "REASON_COUPLED",
    "REASON_EMPTY",
    "REASON_FORM_FACTOR_ZERO",
    "REASON_NO_COEFFICIENT",
    "REASON_NO_FORM_FACTOR",
    "REASON_RANGE",
    "REASON_STRUCTURE",
    "REASON_TAGS",
    "ZERO_COUPLING_EV",
    "coupling_reasons",
]

#: |V(G − G')| below this (eV) counts as zero (cos(π/2) leaves ~1e-17 of a form factor).
ZERO_COUPLING_EV: float = 1e-10

REASON_COUPLED = "coupled"
REASON_STRUCTURE = "structure factor zero"
REASON_RANGE = "beyond the potential's range"
REASON_NO_FORM_FACTOR = "no form factor on that shell"
REASON_NO_COEFFICIENT = "no Fourier coefficient for that G"
REASON_EMPTY = "no potential (empty lattice)"
REASON_CANCEL = "contributions cancel"
REASON_FORM_FACTOR_ZERO = "form factor zero at that |G|"

#: Short tags of the reasons, for tables.
REASON_TAGS: dict[str, str] = {
    REASON_STRUCTURE: "SF",
    REASON_RANGE: "range",
    REASON_NO_FORM_FACTOR: "no FF",
    REASON_NO_COEFFICIENT: "no V(G)",
    REASON_EMPTY: "empty",
    REASON_CANCEL: "cancel",
    REASON_FORM_FACTOR_ZERO: "v(q)=0",
}


def coupling_reasons(material: Material, miller: np.ndarray, values_eV: np.ndarray,
                     zero_eV: float = ZERO_COUPLING_EV) -> tuple[str, ...]:
    """Say, for each G, whether V(G) couples and, if it is zero, why.

    The potential forms are those of CONVENTIONS.md. With atoms at τ_j and form factors on
    shells of |G|² (Cohen & Bergstresser, Phys. Rev. 141, 789 (1966), eq. 2),

    * symmetric–antisymmetric: V(G) = V_S(|G|²) S_S(G) + i V_A(|G|²) S_A(G) with
      S_S = cos(G·τ), S_A = sin(G·τ) (up to the phase of the bond centre);
    * per species: V(G) = Σ_s v_s(|G|²) S_s(G), S_s(G) = (1/N) Σ_{j of species s} e^{−iG·τ_j};

    the first rule that applies to a zero V(G) names the reason:

    1. ``"no potential (empty lattice)"``: the form is empty or every value is zero;
    2. ``"structure factor zero"``: every structure factor multiplying a non-zero form factor
       of the potential vanishes at G, so no form factor on that shell could couple
       (e.g. cos(G·τ) = 0 for G = (200)2π/a in the diamond structure, where V_A ≡ 0);
    3. ``"beyond the potential's range"``: |G|² exceeds every shell (or Fourier coefficient)
       at which the potential is non-zero;
    4. ``"no form factor on that shell"`` (``"no Fourier coefficient for that G"``): within
       the range but nothing listed (or zero) there;
    5. ``"contributions cancel"``: anything else.

    Parameters
    ----------
    material : Material
    miller : numpy.ndarray
        (p, d) integer coordinates of the G in the reciprocal primitive basis.
    values_eV : numpy.ndarray
        (p,) V(G) from the model.
    zero_eV : float
        |V| at or below this is zero.

    Returns
    -------
    tuple of str
        One reason per G (``"coupled"`` where |V(G)| > ``zero_eV``).
    """
    pot = material.potential
    miller = np.atleast_2d(np.asarray(miller))
    b = reciprocal_vectors(material.vectors_A)
    g = miller @ b
    unit2 = (2.0 * np.pi / material.a_A) ** 2
    g2 = np.einsum("ij,ij->i", g, g) / unit2
    coupled = np.abs(np.asarray(values_eV)) > zero_eV
    p = g2.size
    if pot.form == "empty":
        return tuple(REASON_COUPLED if c else REASON_EMPTY for c in coupled)
    if pot.form == "fourier":
        keys = np.array(pot.miller, dtype=int).reshape(-1, material.dimension)
        vals = np.array(pot.fourier_eV, dtype=complex)
        live = np.abs(vals) > zero_eV
        if not live.any():
            return tuple(REASON_COUPLED if c else REASON_EMPTY for c in coupled)
        gk = keys[live] @ b
        reach = np.max(np.einsum("ij,ij->i", gk, gk)) / unit2
        beyond = g2 > reach * (1 + SHELL_TOLERANCE)
        return tuple(REASON_COUPLED if c else REASON_RANGE if x else REASON_NO_COEFFICIENT
                     for c, x in zip(coupled, beyond, strict=True))
    positions = material.positions_cart_A
    if pot.form == "continuous":
        return _continuous_reasons(material, g, positions, coupled, zero_eV)
    shells = np.array(pot.shells_g2, dtype=float)
    if pot.form == "symmetric-antisymmetric":
        centre = positions.mean(axis=0)
        tau = positions[0] - centre
        tables = [np.array(pot.symmetric_eV, dtype=float),
                  np.array(pot.antisymmetric_eV, dtype=float)]
        factors = [np.cos(g @ tau), np.sin(g @ tau)]
    else:
        species = list(dict.fromkeys(a.species for a in material.atoms))
        tables = [np.array(pot.species_eV[s], dtype=float) for s in species]
        factors = []
        for s in species:
            mine = np.array([a.species == s for a in material.atoms])
            factors.append(np.exp(-1j * (g @ positions[mine].T)).sum(axis=1) / len(positions))
    live_tables = [t for t in tables if np.any(np.abs(t) > zero_eV)]
    if not live_tables:
        return tuple(REASON_COUPLED if c else REASON_EMPTY for c in coupled)
    sf_zero = np.ones(p, dtype=bool)
    for t, f in zip(tables, factors, strict=True):
        if np.any(np.abs(t) > zero_eV):
            sf_zero &= np.abs(f) < 1e-9
    live_shell = np.zeros(shells.size, dtype=bool)
    for t in live_tables:
        live_shell |= np.abs(t) > zero_eV
    reach = shells[live_shell].max()
    beyond = g2 > reach * (1 + SHELL_TOLERANCE)
    on_live = (np.abs(g2[:, None] - shells[live_shell][None, :])
               <= SHELL_TOLERANCE * np.maximum(shells[live_shell], 1.0)).any(axis=1)
    return _first_reason(coupled, ((sf_zero, REASON_STRUCTURE), (beyond, REASON_RANGE),
                                   (~on_live, REASON_NO_FORM_FACTOR)))


def _continuous_reasons(material: Material, g: np.ndarray, positions: np.ndarray,
                        coupled: np.ndarray, zero_eV: float) -> tuple[str, ...]:
    """:func:`coupling_reasons` for the continuous form v_s(|G|) (:mod:`bandpert.formfactor`).

    Rule 3 ("beyond the potential's range") applies from the upper end of the taper on; rule 4
    becomes "form factor zero at that |G|" (every v_s vanishes there, e.g. at q² = a2).
    """

    pot = material.potential
    q = np.linalg.norm(g, axis=1)
    species = list(dict.fromkeys(a.species for a in material.atoms))
    sf_zero = np.ones(len(q), dtype=bool)
    v_zero = np.ones(len(q), dtype=bool)
    for s in species:
        mine = np.array([a.species == s for a in material.atoms])
        f = np.exp(-1j * (g @ positions[mine].T)).sum(axis=1) / len(positions)
        v = species_form_factor(material, s, q)
        live = np.abs(v) > zero_eV
        sf_zero &= ~live | (np.abs(f) < 1e-9)
        v_zero &= ~live
    beyond = (q >= pot.taper_invA[1]) if pot.taper_invA else np.zeros(len(q), dtype=bool)
    return _first_reason(coupled, ((beyond, REASON_RANGE), (v_zero, REASON_FORM_FACTOR_ZERO),
                                   (sf_zero, REASON_STRUCTURE)))


def _first_reason(coupled: np.ndarray, rules: tuple[tuple[np.ndarray, str], ...]
                  ) -> tuple[str, ...]:
    """Per G: "coupled", else the first rule whose mask holds, else "contributions cancel"."""
    out = []
    for i, c in enumerate(coupled):
        out.append(REASON_COUPLED if c else next(
            (reason for mask, reason in rules if mask[i]), REASON_CANCEL))
    return tuple(out)

