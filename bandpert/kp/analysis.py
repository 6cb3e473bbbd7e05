r"""Band-edge masses and nonparabolicity of the k·p models at Γ, and the analysis of a file.

Masses by second-order (Löwdin) perturbation theory in k, cross-checked by finite differences;
nonparabolicity α from a fit of ε(k²); :func:`analyse_kp_material` gathers both, with the bands
along [001], [110] and [111], for every model of a k·p parameter file. Energies eV (from the
valence-band top at Γ), k Å⁻¹, masses m0.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..errors import InputError, ModelWarning
from ..input.kp_file import KPMaterial
from ..units import HBAR2_OVER_2M0_EV_A2 as C  # ħ²/2m0 in eV Å²
from .bands import DirectionalBands, bands_along
from .hamiltonians import ENERGY_ZERO, KPModel
from .materials import StrainState, material_model
from .parameters import KANE_NONPARABOLICITY_SOURCE, KPParameters, kane_nonparabolicity, unit_vector

__all__ = [
    "CUBIC_DIRECTIONS",
    "DEFAULT_FD_STEP_INVA",
    "DEFAULT_NONPARABOLICITY_KMAX_INVA",
    "GammaMasses",
    "KPAnalysis",
    "ModelAnalysis",
    "Nonparabolicity",
    "analyse_kp_material",
    "masses_at_gamma",
    "nonparabolicity",
    "two_band_nonparabolicity",
]

#: Default finite-difference step for masses, in Å⁻¹ (see :func:`masses_at_gamma`).
DEFAULT_FD_STEP_INVA: float = 3e-4

#: Default largest k of the nonparabolicity fit, in Å⁻¹ (see :func:`nonparabolicity`).
DEFAULT_NONPARABOLICITY_KMAX_INVA: float = 0.01

#: Levels at Γ closer than this (eV) form one degenerate group.
_GROUP_TOL_EV = 1e-9

FloatArray = NDArray[np.float64]

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


# --------------------------------------------------------------------------------------------
# the analysis of a k·p parameter file
# --------------------------------------------------------------------------------------------

#: Direction labels and Miller indices of the masses and lines of :func:`analyse_kp_material`.
CUBIC_DIRECTIONS: dict[str, str] = {"[001]": "001", "[110]": "110", "[111]": "111"}


@dataclass(frozen=True, eq=False)
class ModelAnalysis:
    """One model of a k·p file at Γ.

    Attributes
    ----------
    model : str
    gamma_energies_eV : ndarray, shape (n,)
        Sorted energies at Γ, eV from the valence-band top.
    masses_m0 : dict
        Direction label → band name → band-edge mass (m0, positive; Kramers pairs averaged).
    nonparabolicity : Nonparabolicity or None
        The conduction band's along [001] (two- and eight-band models): the model's own α, with
        its remote-band terms.
    kane_alpha_per_eV : float or None
        Kane's α = (1 − m*/m0)²/Eg for the same edge mass m* (bare free-electron k² terms;
        :data:`~bandpert.kp.parameters.KANE_NONPARABOLICITY_SOURCE`), for comparison.
    lines : dict
        Direction label → :class:`~bandpert.kp.bands.DirectionalBands` from Γ.
    strain_edges : dict or None
        Under strain: ``edges_eV`` (band name → Γ energy, Kramers pairs averaged),
        ``shifts_eV`` (the same minus the unstrained edges) and ``hh_lh_splitting_eV``
        (E_hh − E_lh at Γ: positive when the heavy hole is on top).
    """

    model: str
    gamma_energies_eV: FloatArray
    masses_m0: dict[str, dict[str, float]]
    nonparabolicity: Nonparabolicity | None
    kane_alpha_per_eV: float | None
    lines: dict[str, DirectionalBands]
    kane_alpha_source: str = KANE_NONPARABOLICITY_SOURCE
    strain_edges: dict | None = None


@dataclass(frozen=True, eq=False)
class KPAnalysis:
    """The models of a k·p parameter file analysed at Γ (:func:`analyse_kp_material`).

    Attributes
    ----------
    name, source : str
        The file's material name and the source of its parameters.
    parameters : KPParameters
    reference_masses_m0 : dict
        Tabulated masses of the file's ``[reference]`` table.
    models : dict
        Model name → :class:`ModelAnalysis`, in the order asked.
    k_max_frac : float
        Extent of the lines from Γ, in units of 2π/a.
    energy_zero : str
    strain : StrainState or None
        The strain included (energies stay measured from the unstrained valence-band top).
    """

    name: str
    source: str
    parameters: KPParameters
    reference_masses_m0: dict[str, float]
    models: dict[str, ModelAnalysis]
    k_max_frac: float
    energy_zero: str = ENERGY_ZERO
    strain: StrainState | None = None


def _edges_by_name(model: KPModel) -> dict[str, float]:
    e = model.gamma_energies_eV
    return {name: float(np.mean([x for x, n in zip(e, model.band_names, strict=True)
                                 if n == name])) for name in dict.fromkeys(model.band_names)}


def _strain_edges(kpm: KPMaterial, name: str, strained: KPModel) -> dict:
    edges = _edges_by_name(strained)
    free = _edges_by_name(material_model(kpm, name))
    return {"edges_eV": edges, "shifts_eV": {n: edges[n] - free[n] for n in edges},
            "hh_lh_splitting_eV": edges["heavy hole"] - edges["light hole"]}


def analyse_kp_material(kpm: KPMaterial, models: tuple[str, ...] | None = None,
                        k_max_frac: float = 0.1, n_k: int = 121,
                        strain: StrainState | None = None) -> KPAnalysis:
    """Masses along [001], [110], [111], the conduction nonparabolicity and bands near Γ.

    Parameters
    ----------
    kpm : KPMaterial
        A validated k·p parameter file.
    models : tuple of str, optional
        Models to analyse (default: every model the file supports).
    k_max_frac : float
        Extent of the lines from Γ in units of 2π/a, 0 < k_max_frac ≤ 0.5 (the models are
        expansions about Γ; half the distance to X is already far outside their range).
    n_k : int
        Points per line.
    strain : StrainState, optional
        A homogeneous strain (:func:`~bandpert.kp.materials.strain_state`); the two-band model
        is then left out unless asked for (and refused when it is).

    Returns
    -------
    KPAnalysis

    Raises
    ------
    InputError
        For ``k_max_frac`` out of range or a model the file does not support.
    """
    if not 0.0 < k_max_frac <= 0.5:
        raise InputError(f"expected 0 < k_max_frac ≤ 0.5 (a fraction of 2π/a), got {k_max_frac}",
                         key="k_max_frac")
    names = tuple(models) if models else kpm.models
    if strain is not None and not models:
        names = tuple(n for n in names if n != "two-band")
    if strain is not None and strain.note:
        warnings.warn(strain.note, ModelWarning, stacklevel=2)
    lowest = kpm.conduction.lowest_state if kpm.conduction else None
    if lowest and any(n in ("two-band", "eight-band") for n in names):
        warnings.warn(f"the conduction band of this file is {kpm.conduction.state}, not the "
                      f"lowest conduction level at Γ ({lowest}, {kpm.conduction.lowest_eV:.3g} "
                      "eV above the valence top, outside the Kane models): the two- and "
                      f"eight-band results describe {kpm.conduction.state}, not the band edge",
                      ModelWarning, stacklevel=2)
    out: dict[str, ModelAnalysis] = {}
    for name in names:
        if strain is None:
            model = material_model(kpm, name)
        else:
            model = material_model(kpm, name, strain=strain.tensor, axis=strain.axis)
        masses = {label: masses_at_gamma(model, d).as_dict()
                  for label, d in CUBIC_DIRECTIONS.items()}
        npb = nonparabolicity(model, "001") if "conduction" in model.band_names else None
        kane = (None if npb is None
                else kane_nonparabolicity(npb.edge_mass_m0, kpm.parameters.Eg_eV))
        lines = {label: bands_along(model, d, k_max_frac=k_max_frac, n_k=n_k)
                 for label, d in CUBIC_DIRECTIONS.items()}
        edges = None if strain is None else _strain_edges(kpm, name, model)
        out[name] = ModelAnalysis(name, model.gamma_energies_eV, masses, npb, kane, lines,
                                  strain_edges=edges)
    return KPAnalysis(kpm.name, kpm.source, kpm.parameters, dict(kpm.reference_masses_m0),
                      out, float(k_max_frac), strain=strain)
