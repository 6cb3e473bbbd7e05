"""k·p parameters implied by a plane-wave model, and the k·p parameter file that carries them.

From the eigenstates at Γ (:mod:`bandpert.physics.mass_tensor`):

- Eg = E(s-like conduction state) − E(valence top), the s-like state being the lowest
  non-degenerate conduction state at Γ that couples to the valence triplet through p;
- Ep = 2|⟨S|p_x|X⟩|²/m0 = 4C Σ_j |π^x_{c v_j}|² (the sum over the triplet makes it
  independent of the basis the degenerate eigenvectors come in), C = ħ²/2m0;
- γ1, γ2, γ3 from the Dresselhaus–Kip–Kittel parameters of the triplet
  (γ1 = −(L + 2M)/3, γ2 = −(L − M)/6, γ3 = −N/6; CONVENTIONS.md);
- F from the conduction mass by the sum over states, m0/m_e = (1 + 2F) + (Ep/3)(2/Eg +
  1/(Eg + Δso)) (Vurgaftman, Meyer & Ram-Mohan, J. Appl. Phys. 89, 5815 (2001));
- Δso = 0 for a spinless model. With spin–orbit coupling (a ``spin_orbit`` table) Δso =
  E(Γ8) − E(Γ7) of the spinor model, Eg = E(Γ6) − E(Γ8), γ1, γ2, γ3 by the sum over states of
  the Γ8 level with the velocity ∂H/∂k (:mod:`bandpert.physics.spinor_sos`; the second
  differences of :func:`spin_orbit_valence_top` agree to O(h²)), the conduction mass by
  second differences and F from it by the formula above.

Ep of a spin–orbit model comes from its spinless states with the nonlocal wells kept, as the
velocity matrix element Σ_j |⟨c|∂H/∂k_a|v_j⟩|²/C (:mod:`bandpert.physics.kane_coupling`; for a
local model the 4C Σ_j |π^a_{c v_j}|² above); the spin–orbit term's own velocity is left out.
The conduction state (the s-like level, and the lowest conduction level at Γ when it is
another, silicon's Γ15) is found and labelled on that spinless model with its wells, which move
the levels.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from ..errors import InputError
from ..input.material import Material
from ..kp.analysis import CUBIC_DIRECTIONS
from ..kp.parameters import KPParameters, unit_vector
from ..physics.bands import compute_band_structure
from ..physics.degenerate_edge import degenerate_edge
from ..physics.mass_tensor import degenerate_set, eigenstates, inverse_mass_tensor
from ..planewave.model import PlaneWaveModel, centred_model
from ..planewave.solver import exact_energies
from ..symmetry.labels import label_point
from ..units import HBAR2_OVER_2M0_EV_A2 as C  # ħ²/2m0 in eV Å²
from .kane_coupling import kane_coupling, s_like_conduction
from .spinor_sos import gamma8_luttinger_sum_over_states


@dataclass(frozen=True)
class ExtractedParameters:
    """k·p parameters of a plane-wave model at Γ and where they come from.

    Attributes
    ----------
    parameters : KPParameters
    conduction_band : int
        0-based index of the s-like conduction state used.
    valence_bands : numpy.ndarray
        The valence triplet.
    conduction_mass_m0 : float
        Its mass by the sum over states.
    isotropy : float
        Largest relative spread of Ep between x, y and z (0 for a cubic crystal).
    conduction_state : ConductionAtGamma or None
        The conduction state used, by its irreducible representation at Γ (spinless labels),
        and, when it is not the lowest conduction level at Γ (silicon: Γ2′ above Γ15), the
        lowest one, which the Kane models do not contain (:func:`conduction_at_gamma`).
    """

    parameters: KPParameters
    conduction_band: int
    valence_bands: np.ndarray
    conduction_mass_m0: float
    isotropy: float
    conduction_state: ConductionAtGamma | None = None


def extract_kp_parameters(material: Material, model: PlaneWaveModel) -> ExtractedParameters:
    """Kane and Luttinger parameters implied by a plane-wave model (module docstring).

    Raises
    ------
    InputError
        If the material has no electron count, is not 3D, or its valence top at Γ is not a
        threefold level.
    """
    if material.dimension != 3 or material.valence_electrons is None:
        raise InputError("k·p parameters need a 3D crystal with electrons.valence",
                         material.file, "electrons.valence")
    if model.n_components == 2:
        return _extract_with_spin_orbit(material, model.basis.cutoff_eV)
    states = eigenstates(model, np.zeros(3))
    top = material.valence_electrons // 2 - 1
    triplet = degenerate_set(states, top)
    if triplet.size != 3:
        raise InputError(f"the valence top at Γ is {triplet.size}-fold, expected the threefold "
                         "p-like level of a cubic semiconductor", material.file, "electrons")
    # ⟨v|∂H/∂k_a|m⟩ = 2C π^a_vm (π carries the kinetic factor β)
    conduction, per_axis = s_like_conduction(
        material, states.energies_eV, triplet, 2.0 * C * states.momentum_invA[:, triplet, :])
    ep = float(per_axis.mean())
    eg = float(states.energies_eV[conduction] - states.energies_eV[top])
    m_inv = inverse_mass_tensor(states, conduction)
    inv_me = float(np.trace(m_inv) / 3.0)
    f = 0.5 * (inv_me - ep / eg - 1.0)
    g1, g2, g3 = degenerate_edge(states, top).luttinger
    params = KPParameters(Eg_eV=eg, Delta_so_eV=0.0, Ep_eV=ep, F=float(f), gamma1=g1,
                          gamma2=g2, gamma3=g3)
    return ExtractedParameters(parameters=params, conduction_band=conduction,
                               valence_bands=triplet, conduction_mass_m0=1.0 / inv_me,
                               isotropy=float(np.ptp(per_axis) / ep),
                               conduction_state=conduction_at_gamma(
                                   material, model.basis.cutoff_eV, top, conduction))


@dataclass(frozen=True)
class ConductionAtGamma:
    """The extracted conduction level at Γ by its irrep, and the lowest one when it differs.

    Attributes
    ----------
    state : str
        Irrep of the s-like level the Kane models use (``"Γ2′"``, ``"Γ1"``).
    energy_eV : float
        Its energy above the valence top (with spin–orbit: of its Kramers pair above Γ8, Eg).
    lowest_state : str or None
        The lowest conduction level at Γ when it is another (silicon: ``"Γ15"``).
    lowest_eV : float or None
        Its energy above the valence top (with spin–orbit: of the lowest spinor level it
        gives, above Γ8).
    lowest_degeneracy : int
    """

    state: str
    energy_eV: float
    lowest_state: str | None = None
    lowest_eV: float | None = None
    lowest_degeneracy: int = 0

    @property
    def sentence(self) -> str:
        """One sentence for the written file's note."""
        text = (f"The conduction band of these models is {self.state} at Γ, "
                f"{self.energy_eV:.4f} eV above the valence top")
        if self.lowest_state is None:
            return text + ", the lowest conduction level at Γ."
        return (text + f"; it is not the lowest conduction level at Γ: {self.lowest_state} "
                f"({self.lowest_degeneracy}-fold) lies {self.lowest_eV:.4f} eV above the "
                "valence top and is not in these models.")


def conduction_at_gamma(material: Material, cutoff_eV: float, top: int,
                        conduction: int) -> ConductionAtGamma | None:
    """Name the conduction state of the extracted Kane models by its irrep at Γ.

    The Kane models' conduction band is an s-like level (Γ1 of Oh, Γ2′ of diamond with the
    origin at the bond centre, Γ1 of Td: :mod:`bandpert.symmetry.names`). In silicon it is not
    the lowest conduction level at Γ: the p-like Γ15 triplet lies below Γ2′ (Cohen &
    Bergstresser, Phys. Rev. 141, 789 (1966), Fig. 2), and a k·p file that calls its Eg
    "the gap at Γ" would mislead a device model: the written file names both levels
    (``[conduction]``), and reading it back warns.

    Parameters
    ----------
    material : Material
        The spinless material.
    cutoff_eV : float
        Basis cutoff (the labels come from the basis centred on Γ at this cutoff).
    top, conduction : int
        0-based band indices of the valence top and of the s-like conduction state.

    Returns
    -------
    ConductionAtGamma or None
        None when the levels cannot be labelled.
    """
    point = label_point(material, cutoff_eV, np.zeros(3), "Γ", conduction + 1)
    by_band = {lv.first_band + j: lv for lv in point.levels for j in range(lv.degeneracy)}
    chosen, lowest, vbm = by_band.get(conduction), by_band.get(top + 1), by_band.get(top)
    if chosen is None or lowest is None or vbm is None or point.note:
        return None
    if lowest.first_band == chosen.first_band:
        return ConductionAtGamma(chosen.label, chosen.energy_eV - vbm.energy_eV)
    return ConductionAtGamma(chosen.label, chosen.energy_eV - vbm.energy_eV, lowest.label,
                             lowest.energy_eV - vbm.energy_eV, lowest.degeneracy)


def kp_material_text(material: Material, extracted: ExtractedParameters) -> str:
    """A k·p parameter file (schema of :mod:`bandpert.input.kp_file`) for the extracted values."""
    p = extracted.parameters
    structure = "diamond" if len({a.species for a in material.atoms}) == 1 else "zincblende"

    def q(text: str) -> str:
        return '"' + text.replace("\\", "\\\\").replace('"', '\\"') + '"'

    title = material.name + ", k·p parameters implied by the plane-wave model"
    # the file's name only: a folder would tie the written file (and figures) to one machine
    where = Path(material.file).name if material.file else "a material"
    origin = (f"bandpert, extracted at Γ from {where}; the plane-wave "
              f"parameters come from: {material.source}")
    lines = [
        f"name = {q(title)}",
        f"source = {q(origin)}",
        "note = " + q(("Delta_so_eV = 0: the local pseudopotential has no spin-orbit coupling. "
                       if material.spin_orbit is None else
                       "Delta_so_eV, Eg and the conduction mass from the spin-orbit model "
                       "(second differences at Gamma, Kramers pairs averaged), gamma1-3 from its "
                       "sum over states (velocity dH/dk); Ep from its spinless states (velocity "
                       "dH/dk" + (", nonlocal wells included). " if material.nonlocal_terms
                                  else "). "))
                      + (extracted.conduction_state.sentence + " "
                         if extracted.conduction_state else "")
                      + "Model estimates, not measured values."),
        'models = ["two-band", "six-band", "eight-band"]',
        "",
        "[lattice]",
        f'structure = "{structure}"',
        f"a_A = {material.a_A:.10g}",
        "",
        "[parameters]",
        f"Eg_eV = {p.Eg_eV:.10g}",
        f"Delta_so_eV = {p.Delta_so_eV:.10g}",
        f"Ep_eV = {p.Ep_eV:.10g}",
        f"F = {p.F:.10g}",
        f"gamma1 = {p.gamma1:.10g}",
        f"gamma2 = {p.gamma2:.10g}",
        f"gamma3 = {p.gamma3:.10g}",
        "",
        "[reference]",
        f"m_e_m0 = {extracted.conduction_mass_m0:.10g}",
        "",
    ]
    c = extracted.conduction_state
    if c is not None:  # spinless labels: the Kane models' level and the lowest one at Γ
        lines += ["[conduction]", f"state = {q(c.state)}"]
        if c.lowest_state is not None:
            lines += [f"lowest_state = {q(c.lowest_state)}", f"lowest_eV = {c.lowest_eV:.6g}"]
        lines.append("")
    return "\n".join(lines)


@dataclass(frozen=True, eq=False)
class ExactLines:
    """Exact plane-wave bands along lines from Γ, drawn beside a k·p model's.

    Attributes
    ----------
    name : str
        The plane-wave material's name.
    k_frac : numpy.ndarray
        (n_k,) distance from Γ in units of 2π/a.
    energies_eV : dict
        Direction label → (n_k, n_bands) exact bands, eV from the valence-band maximum (the
        k·p models' energy zero).
    """

    name: str
    k_frac: np.ndarray
    energies_eV: dict[str, np.ndarray]


def exact_lines_from_gamma(material: Material, k_max_frac: float, n_k: int = 61,
                           directions: dict[str, str] = CUBIC_DIRECTIONS) -> ExactLines:
    """Exact bands of a plane-wave semiconductor from Γ along ``directions`` (k·p comparison).

    The energy zero is the valence-band maximum found on the material's path (20 points), so
    the bands share the k·p models' zero.

    Raises
    ------
    InputError
        If the material has no gap (key ``electrons``).
    """
    bs = compute_band_structure(material, n_k=20)
    if bs.edges is None:
        raise InputError("a comparison with k·p needs a semiconductor (a gap and "
                         "electrons.valence)", material.file, "electrons")
    t = np.linspace(0.0, k_max_frac, n_k)
    energies = {}
    for label, d in directions.items():
        k = t[:, None] * unit_vector(d) * 2 * np.pi / material.a_A
        energies[label] = exact_energies(bs.model, k, bs.n_bands) - bs.edges.valence_max_eV
    return ExactLines(material.name, t, energies)


#: Step of the second differences at Γ with spin–orbit coupling, in units of 2π/a.
SPIN_ORBIT_STEP = 0.002


@dataclass(frozen=True)
class SpinOrbitTop:
    """The valence top at Γ of a model with spin–orbit coupling (second differences).

    Attributes
    ----------
    delta_so_eV : float
        E(Γ8) − E(Γ7).
    eg_eV : float
        E(conduction pair) − E(Γ8).
    gammas : tuple of float
        γ1, γ2, γ3 from the Γ8 bands along [100] ([111] gives γ3).
    gamma1_111 : float
        γ1 from [111] (equal to the [100] value for bands parabolic near Γ).
    heavy_hole_m0, light_hole_m0 : dict
        Direction → hole mass (positive at a maximum), [100], [110], [111].
    split_off_m0 : float
        Hole mass of the Γ7 pair (mean over [100], [111]).
    conduction_m0 : float
        Mass of the conduction pair (mean over [100], [111]).
    lowest_conduction_eV : float
        The lowest conduction level at Γ above Γ8 (Eg when the reported pair is the lowest).
    """

    delta_so_eV: float
    eg_eV: float
    gammas: tuple[float, float, float]
    gamma1_111: float
    heavy_hole_m0: dict[str, float]
    light_hole_m0: dict[str, float]
    split_off_m0: float
    conduction_m0: float
    lowest_conduction_eV: float = float("nan")


def spin_orbit_valence_top(material: Material, cutoff_eV: float,
                           conduction_pair: int | None = None) -> SpinOrbitTop:
    """Δso, Γ8 Luttinger parameters and the split-off and conduction masses with spin–orbit.

    Second differences E(±h) − 2E(0) on the fixed spinor basis centred on Γ, h =
    :data:`SPIN_ORBIT_STEP`·2π/a, each Kramers pair averaged (a zincblende crystal's pairs split
    linearly and cubically in k away from Γ; the average is analytic). Sorted from the top, the
    valence pairs along [100] and [111] are heavy hole, light hole, split-off; with
    m0/m = γ1 ∓ 2γ2 along [001] and γ1 ∓ 2γ3 along [111] (CONVENTIONS.md).

    ``conduction_pair`` is the 0-based index of the Kramers pair whose gap and mass are
    reported (the spinless index of the s-like state; default the lowest conduction pair).

    Raises
    ------
    InputError
        If the valence top at Γ is not a fourfold Γ8 level above a twofold Γ7.
    """
    n_val = material.valence_electrons  # spinor bands: one electron each
    pair_c = n_val // 2 if conduction_pair is None else conduction_pair
    n_bands = 2 * pair_c + 2
    model = centred_model(material, cutoff_eV, np.zeros(3), spin_orbit=True)
    h = SPIN_ORBIT_STEP * 2.0 * np.pi / material.a_A
    e0 = exact_energies(model, np.zeros((1, 3)), n_bands)[0]
    top = e0[n_val - 4:n_val]
    if np.ptp(top) > 1e-6 or e0[n_val - 5] > top[0] - 1e-6 or abs(e0[n_val - 5]
                                                                  - e0[n_val - 6]) > 1e-6:
        raise InputError("the valence top at Γ is not a fourfold Γ8 level above a twofold Γ7; "
                         "expected a cubic semiconductor with spin-orbit coupling",
                         material.file, "spin_orbit")

    def inverse_masses(direction: str) -> np.ndarray:
        d = unit_vector(direction)
        e = exact_energies(model, np.array([-h * d, h * d]), n_bands)
        pairs = (e[:, 0::2] + e[:, 1::2]) / 2.0  # Kramers-pair averages
        mid = (e0[0::2] + e0[1::2]) / 2.0
        curvature = (pairs[0] + pairs[1] - 2.0 * mid) / h**2
        return curvature / (2.0 * C)  # m0/m, signed (negative for a valence maximum)

    pair_v = n_val // 2  # index of the first conduction pair
    inv = {d: inverse_masses(d) for d in ("100", "110", "111")}
    hh = {d: -inv[d][pair_v - 1] for d in inv}
    lh = {d: -inv[d][pair_v - 2] for d in inv}
    g1 = (hh["100"] + lh["100"]) / 2.0
    g2 = (lh["100"] - hh["100"]) / 4.0
    g3 = (lh["111"] - hh["111"]) / 4.0
    return SpinOrbitTop(
        delta_so_eV=float(top[0] - e0[n_val - 5]), eg_eV=float(e0[2 * pair_c] - top[0]),
        gammas=(float(g1), float(g2), float(g3)),
        gamma1_111=float((hh["111"] + lh["111"]) / 2.0),
        heavy_hole_m0={d: float(1.0 / v) for d, v in hh.items()},
        light_hole_m0={d: float(1.0 / v) for d, v in lh.items()},
        split_off_m0=float(2.0 / -(inv["100"][pair_v - 3] + inv["111"][pair_v - 3])),
        conduction_m0=float(2.0 / (inv["100"][pair_c] + inv["111"][pair_c])),
        lowest_conduction_eV=float(e0[n_val] - top[0]))


def _extract_with_spin_orbit(material: Material, cutoff_eV: float) -> ExtractedParameters:
    """:func:`extract_kp_parameters` of a spin–orbit model (module docstring)."""
    kane = kane_coupling(material, cutoff_eV)
    so = spin_orbit_valence_top(material, cutoff_eV, kane.conduction_band)
    ep = kane.ep_eV
    eg, delta = so.eg_eV, so.delta_so_eV
    f = 0.5 * (1.0 / so.conduction_m0 - 1.0 - ep / 3.0 * (2.0 / eg + 1.0 / (eg + delta)))
    # the exact curvature at Γ (sum over every state, velocity ∂H/∂k), free of the O(h²) error
    # of the second differences (1e-3 relative in silicon, whose Δso is small)
    g1, g2, g3 = gamma8_luttinger_sum_over_states(material, cutoff_eV).gammas
    params = KPParameters(Eg_eV=eg, Delta_so_eV=delta, Ep_eV=ep, F=float(f), gamma1=g1,
                          gamma2=g2, gamma3=g3)
    state = conduction_at_gamma(material.without_spin_orbit(), cutoff_eV,
                                int(kane.valence_bands.max()), kane.conduction_band)
    if state is not None:  # spinless labels, energies of the spinor levels above Γ8
        state = replace(state, energy_eV=eg, lowest_eV=(None if state.lowest_state is None
                                                        else so.lowest_conduction_eV))
    return ExtractedParameters(parameters=params, conduction_band=kane.conduction_band,
                               valence_bands=kane.valence_bands,
                               conduction_mass_m0=so.conduction_m0, isotropy=kane.isotropy,
                               conduction_state=state)
