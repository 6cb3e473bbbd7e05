"""The crystal potential V(G) of every form a material file can give.

Tabulated forms (symmetric–antisymmetric, per species) on |G|² shells, explicit Fourier
coefficients by Miller index, the empty lattice, and continuous form factors v(q) evaluated at
any G (the fit of v(q) to tabulated form factors lives in :mod:`bandpert.planewave.formfactor`).

Continuous form factors use the form

    v(q) = a1 (q² − a2) / (a3 exp(a4 q²) − 1)

of Friedel, Hybertsen & Schlüter, Phys. Rev. B 39, 7974 (1989) (the functional form is quoted from
memory), with q in Å⁻¹; in a crystal of N atoms at r_j in a cell of measure Ω, Ω_atom = Ω/N,

    V(G) = (Ω0/Ω_atom) w(|G|) (1/N) Σ_j v_j(|G|) exp(−i G·r_j),      V(G = 0) = 0,

with Ω0 the atomic volume at which the parameters hold and w an optional smooth taper. A species
may add slope corrections at its shells, v + c (:mod:`bandpert.planewave.slope_form`;
:func:`species_form_factor`).
"""

from __future__ import annotations

import numpy as np

from ..crystal.lattice import reciprocal_vectors
from ..errors import InputError
from ..input.material import Material
from .basis import PlaneWaveBasis
from .slope_form import slope_correction
from .spinorbit import require_spinless

#: Relative tolerance for matching |G|² to a form-factor shell.
SHELL_TOLERANCE = 1e-6


def continuous_form_factor(q_invA: np.ndarray | float, a1: float, a2_invA2: float, a3: float,
                           a4_A2: float) -> np.ndarray:
    """The form factor v(q) = a1 (q² − a2) / (a3 exp(a4 q²) − 1).

    Functional form of Friedel, Hybertsen & Schlüter, Phys. Rev. B 39, 7974 (1989) (from
    memory). It is evaluated as a1 (q² − a2) e^{−a4 q²} / (a3 − e^{−a4 q²}), which is the same
    function and cannot overflow; with a3 > 1 and a4 > 0 the denominator lies in [a3 − 1, a3).

    Parameters
    ----------
    q_invA : array_like
        |q| in Å⁻¹ (any shape).
    a1 : float
        Energy scale (the unit of the result).
    a2_invA2 : float
        q² of the sign change, Å⁻².
    a3 : float
        Dimensionless, > 1 for a finite v.
    a4_A2 : float
        Gaussian decay, Å², > 0 for a decaying v.

    Returns
    -------
    numpy.ndarray
        v(q) in the unit of ``a1``, shape of ``q_invA``. v(0) = −a1 a2 / (a3 − 1).
    """
    q2 = np.square(np.asarray(q_invA, dtype=float))
    decay = np.exp(-a4_A2 * q2)
    return a1 * (q2 - a2_invA2) * decay / (a3 - decay)


def species_form_factor(material: Material, species: str, q_invA: np.ndarray | float
                        ) -> np.ndarray:
    """v(q) of one species of a "continuous" potential, with its slope corrections (eV).

    v = :func:`continuous_form_factor` + :func:`bandpert.planewave.slope_form.slope_correction`
    (zero where the file gives no slope corrections).
    """
    pot = material.potential
    v = continuous_form_factor(q_invA, *pot.continuous[species])
    bumps = pot.slope_corrections.get(species)
    if bumps:
        v = v + slope_correction(q_invA, *zip(*bumps, strict=True))
    return v


def taper_weight(q_invA: np.ndarray | float, q1_invA: float, q2_invA: float) -> np.ndarray:
    """Smooth switch w(q): 1 for q ≤ q1, 0 for q ≥ q2, C² in between.

    w = 1 − s(t), t = (q − q1)/(q2 − q1), with the quintic s(t) = t³ (10 − 15 t + 6 t²), whose
    first and second derivatives vanish at t = 0 and t = 1 (common practice, no source).

    Parameters
    ----------
    q_invA : array_like
        |q| in Å⁻¹.
    q1_invA, q2_invA : float
        Start and end of the switch, 0 ≤ q1 < q2.

    Returns
    -------
    numpy.ndarray
        Weights in [0, 1], shape of ``q_invA``.
    """
    t = np.clip((np.asarray(q_invA, dtype=float) - q1_invA) / (q2_invA - q1_invA), 0.0, 1.0)
    return 1.0 - t**3 * (10.0 + t * (-15.0 + 6.0 * t))


def continuous_scale(material: Material) -> float:
    """(Ω0/Ω_atom)/N of the continuous form: the 1/Ω scaling and the cell average (eV per eV)."""
    n_atoms = len(material.atoms)
    return material.potential.reference_volume_A / (material.volume_A / n_atoms) / n_atoms


def continuous_fourier_coefficients(material: Material, g_cart_invA: np.ndarray,
                                    is_zero: np.ndarray | None = None) -> np.ndarray:
    """V(G) of the "continuous" form at Cartesian G (eV).

    V(G) = (Ω0/Ω_atom) w(|G|) (1/N) Σ_j v_j(|G|) exp(−i G·r_j), with V(0) = 0 (module docstring;
    Ω_atom = cell measure / N).

    Parameters
    ----------
    material : Material
        With ``potential.form == "continuous"``.
    g_cart_invA : numpy.ndarray
        (..., d) Cartesian G in Å⁻¹.
    is_zero : numpy.ndarray of bool, optional
        Where G = 0 (by default, where |G| = 0 exactly).

    Returns
    -------
    numpy.ndarray
        Complex V(G), leading shape of ``g_cart_invA``.
    """
    pot = material.potential
    g = np.asarray(g_cart_invA, dtype=float)
    q = np.sqrt(np.einsum("...i,...i->...", g, g))
    positions = material.positions_cart_A
    value = np.zeros(q.shape, dtype=complex)
    cache: dict[str, np.ndarray] = {}
    for atom, r in zip(material.atoms, positions, strict=True):
        if atom.species not in cache:
            cache[atom.species] = species_form_factor(material, atom.species, q)
        value += cache[atom.species] * np.exp(-1j * (g @ r))
    value *= continuous_scale(material)
    if pot.taper_invA is not None:
        value *= taper_weight(q, *pot.taper_invA)
    zero = (q == 0.0) if is_zero is None else is_zero
    return np.where(zero, 0.0, value)


def fourier_coefficients(material: Material, miller: np.ndarray) -> np.ndarray:
    """V(G) in eV for integer reciprocal coordinates ``miller`` (any leading shape, last axis d).

    Implements the conventions of CONVENTIONS.md:

    - per species: V(G) = (1/N_atoms) Σ_j v_j(|G|²) exp(−i G·τ_j);
    - symmetric-antisymmetric (two atoms): V(G) = e^{−iG·c} [V_S cos(G·τ) + i V_A sin(G·τ)], with
      c the bond centre and τ = r_1 − c (for the diamond and zincblende structures with the origin
      at the bond centre, c = 0 and τ = a(1,1,1)/8; Cohen & Bergstresser, Phys. Rev. 141, 789
      (1966), eq. 2);
    - explicit Fourier coefficients by Miller index; 0 elsewhere;
    - continuous: V(G) = (Ω0/Ω_atom) w(|G|) (1/N) Σ_j v_j(|G|) exp(−iG·r_j), V(0) = 0, with
      v_j(q) = a1 (q² − a2) / (a3 exp(a4 q²) − 1) (Friedel, Hybertsen & Schlüter, Phys. Rev. B
      39, 7974 (1989); :func:`continuous_fourier_coefficients`), on any
      lattice.

    Tabulated form factors are defined on the listed |G|² shells (units (2π/a)²) and are zero
    off them.

    Parameters
    ----------
    material : Material
    miller : numpy.ndarray
        Integer array (..., d).

    Returns
    -------
    numpy.ndarray
        Complex V(G) with the leading shape of ``miller``.
    """
    require_spinless(material)  # V(G) alone would silently drop the spin–orbit term
    pot = material.potential
    miller = np.asarray(miller)
    shape = miller.shape[:-1]
    if pot.form == "empty":
        return np.zeros(shape, dtype=complex)
    if pot.form == "fourier":
        return _lookup_fourier(np.array(pot.miller), np.array(pot.fourier_eV), miller)
    b = reciprocal_vectors(material.vectors_A)
    g = miller @ b
    if pot.form == "continuous":
        return continuous_fourier_coefficients(material, g, np.all(miller == 0, axis=-1))
    g2 = np.einsum("...i,...i->...", g, g) / (2.0 * np.pi / material.a_A) ** 2
    shells = np.array(pot.shells_g2)
    match = np.abs(g2[..., None] - shells) <= SHELL_TOLERANCE * np.maximum(shells, 1.0)
    on_shell = match.any(axis=-1)
    shell_index = match.argmax(axis=-1)
    positions = material.positions_cart_A
    if pot.form == "symmetric-antisymmetric":
        centre = positions.mean(axis=0)
        tau = positions[0] - centre
        gt = g @ tau
        vs = np.array(pot.symmetric_eV)[shell_index]
        va = np.array(pot.antisymmetric_eV)[shell_index]
        value = np.exp(-1j * (g @ centre)) * (vs * np.cos(gt) + 1j * va * np.sin(gt))
    else:
        value = np.zeros(shape, dtype=complex)
        for atom, r in zip(material.atoms, positions, strict=False):
            v_j = np.array(pot.species_eV[atom.species])[shell_index]
            value = value + v_j * np.exp(-1j * (g @ r))
        value = value / len(material.atoms)
    return np.where(on_shell, value, 0.0)


def _lookup_fourier(keys: np.ndarray, values: np.ndarray, miller: np.ndarray) -> np.ndarray:
    """Vectorised dictionary lookup of V by integer Miller index (0 where absent)."""
    span = int(max(np.abs(keys).max(), np.abs(miller).max())) * 2 + 1
    def code(m: np.ndarray) -> np.ndarray:
        c = np.zeros(m.shape[:-1], dtype=np.int64)
        for i in range(m.shape[-1]):
            c = c * span + (m[..., i] + span // 2)
        return c
    key_codes = code(keys)
    order = np.argsort(key_codes)
    sorted_codes = key_codes[order]
    q = code(miller)
    pos = np.clip(np.searchsorted(sorted_codes, q), 0, len(sorted_codes) - 1)
    found = sorted_codes[pos] == q
    return np.where(found, values[order][pos], 0.0)


def check_shells_exist(material: Material, basis: PlaneWaveBasis) -> None:
    """Refuse form-factor shells that no reciprocal-lattice vector of the basis reaches.

    Only the tabulated forms have shells; the other forms (empty, fourier, continuous) pass.

    Raises
    ------
    InputError
        Naming ``potential.shells`` and the |G|² values the lattice does have nearby.
    """
    pot = material.potential
    if pot.form not in ("symmetric-antisymmetric", "per-species"):
        return
    g2 = np.einsum("ij,ij->i", basis.g_cart_invA, basis.g_cart_invA)
    g2 = np.unique(np.round(g2 / (2 * np.pi / material.a_A) ** 2, 6))
    for s in pot.shells_g2:
        if g2.max() < s:
            continue  # beyond the basis: harmless, the shell is simply not reached
        if np.min(np.abs(g2 - s)) > SHELL_TOLERANCE * max(s, 1.0):
            near = ", ".join(f"{x:g}" for x in g2[np.argsort(np.abs(g2 - s))[:3]])
            raise InputError(f"|G|² = {s:g} (2π/a)² is not a shell of this lattice (nearest: "
                             f"{near}); expected |G|² values of the reciprocal lattice",
                             material.file, "potential.shells")
