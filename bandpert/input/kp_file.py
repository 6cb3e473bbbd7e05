"""k·p parameter files: TOML in, a validated, frozen :class:`KPMaterial` out.

A k·p file holds the band parameters of a cubic crystal at Γ for the models of
:mod:`bandpert.kp` (which builds them: this layer knows no Hamiltonian), and optionally its
deformation potentials, elastic constants and valence-band offset (their sign convention:
:mod:`bandpert.input.kp_parameters`). It is validated like a material file
(:mod:`bandpert.input.material`): unknown keys are refused, types are checked, non-physical
values are refused, and every problem is one :class:`~bandpert.errors.InputError` naming the
file and the dotted key.

Schema
------
Units are in the key names: energies in eV (``_eV``), lengths in Å (``_A``), masses in m0
(``_m0``); F and the γ are dimensionless. ::

    name = "Gallium arsenide"                    # required, non-empty
    source = "I. Vurgaftman et al., ..."         # required, non-empty: where every value is from
    note = "..."                                 # optional free text
    models = ["two-band", "six-band", "eight-band"]   # optional; default: every model the
                                                      # parameters below allow

    [lattice]                                    # required
    structure = "zincblende"                     # required: "zincblende" or "diamond"
    a_A = 5.65325                                # required, > 0: cubic lattice constant

    [parameters]                                 # required; each key optional by itself
    Eg_eV = 1.519                                # > 0: gap Γ6 − Γ8 (inverted gaps not supported)
    Delta_so_eV = 0.341                          # ≥ 0: spin–orbit splitting Γ8 − Γ7
    Ep_eV = 28.8                                 # ≥ 0: Kane energy 2 m0 P²/ħ²
    F = -1.94                                    # Kane's remote-band parameter (conduction band)
    gamma1 = 6.98                                # Luttinger parameters (not the modified ones);
    gamma2 = 2.06                                # gamma1 > 2 max(|gamma2|, |gamma3|) so both
    gamma3 = 2.93                                # hole bands curve downward in every direction

    [reference]                                  # optional: tabulated masses to compare with
    m_e_m0 = 0.067                               # > 0: conduction-band mass
    m_so_m0 = 0.172                              # > 0: split-off mass

    [conduction]                                 # optional: which level at Γ the models'
    state = "Γ2′"                                #   conduction band is (its irrep), and the
    lowest_state = "Γ15"                         #   lowest conduction level when it is another
    lowest_eV = 3.42                             #   (> 0, above the valence top), not modelled

    [deformation]                                # optional; needed for strain (Bir–Pikus)
    a_v_convention = "a = a_c - a_v"             # required here: or "a = a_c + a_v" (the
                                                 # opposite sign of a_v, flipped on reading)
    a_c_eV = -7.17                               # conduction: ΔE_c = a_c tr ε
    a_v_eV = 1.16                                # valence: P_ε = −a_v tr ε
    b_eV = -2.0                                  # shear, tetragonal
    d_eV = -4.8                                  # shear, rhombohedral

    [elastic]                                    # optional; needed for pseudomorphic strain
    c11_GPa = 1221                               # > 0, and c11 > c12
    c12_GPa = 566
    c44_GPa = 600

    [alignment]                                  # optional; needed in heterostructures
    valence_band_eV = -0.80                      # valence-band top on a common scale

Models and the parameters they need (:data:`bandpert.kp.REQUIRED_PARAMETERS`): ``six-band``:
Delta_so_eV, gamma1–3; ``eight-band`` and ``two-band``: all seven. A model listed in ``models``
whose parameters are missing is refused (naming the missing key); without ``models`` the file
supports every model its parameters complete, and at least one must be complete. For the
two- and eight-band models the conduction band must curve upward,
m0/m_e = (1 + 2F) + (Ep/3)(2/Eg + 1/(Eg + Δso)) > 0 (else ``parameters.F`` is named).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ..data import find_material
from .kp_parameters import (
    MODEL_NAMES,
    REQUIRED_PARAMETERS,
    DeformationPotentials,
    ElasticConstants,
    KPParameters,
    conduction_inverse_mass,
)
from .reader import (
    TableReader,
    check_range,
    describe,
    read_header,
    read_toml_document,
    shorten,
)

#: Crystal structures a k·p file may name (the models have no inversion-asymmetry terms, so
#: both take the same Hamiltonians).
STRUCTURES: tuple[str, ...] = ("zincblende", "diamond")

#: Keys of ``[parameters]``, all numbers.
PARAMETER_KEYS: tuple[str, ...] = ("Eg_eV", "Delta_so_eV", "Ep_eV", "F", "gamma1", "gamma2",
                                   "gamma3")

#: Accepted range of each parameter: (low, high, why). The ranges hold every tabulated
#: zincblende and diamond crystal with a wide margin (Vurgaftman et al. 2001 list Eg 0.17–6.2 eV,
#: Δso up to 0.8 eV, Ep 8–30 eV, |F| < 3, γ1 up to 35; from memory) and keep the models' matrices
#: finite and their band-edge masses defined: below 1 meV a gap is numerically a degeneracy and
#: the conduction mass m0/m* ∝ Ep/Eg runs past anything a k·p expansion describes.
PARAMETER_RANGES: dict[str, tuple[float, float, str]] = {
    "Eg_eV": (1e-3, 20.0, "eV; a gap below 1 meV is a degenerate level with no band-edge mass; "
                          "inverted gaps are not supported"),
    "Delta_so_eV": (0.0, 5.0, "eV; 0 means no spin–orbit coupling"),
    "Ep_eV": (0.0, 100.0, "eV; it is 2m0P²/ħ², about 20–30 eV in tabulated crystals"),
    "F": (-100.0, 100.0, "Kane's remote-band parameter, of order 1"),
    "gamma1": (-1000.0, 1000.0, "Luttinger parameters are of order 1 to 40"),
    "gamma2": (-1000.0, 1000.0, "Luttinger parameters are of order 1 to 40"),
    "gamma3": (-1000.0, 1000.0, "Luttinger parameters are of order 1 to 40"),
}

#: Accepted cubic lattice constant, Å (tabulated zincblende and diamond crystals: 3.57–6.48 Å).
LATTICE_CONSTANT_RANGE_A = (1.0, 20.0)

#: Accepted tabulated masses, m0.
REFERENCE_MASS_RANGE_M0 = (1e-4, 1e3)

#: The two sign conventions of a_v a file may use (``deformation.a_v_convention``): the first
#: is the one kept (Vurgaftman et al. 2001; Chuang 1995), the second is flipped on reading.
A_V_CONVENTIONS: tuple[str, ...] = ("a = a_c - a_v", "a = a_c + a_v")

#: Accepted deformation potentials, eV (tabulated values: |a_c| < 12, |b| < 4, |d| < 8).
DEFORMATION_RANGE_EV = (-50.0, 50.0)

#: Accepted elastic constants, GPa (diamond's c11 is 1079 GPa, soft III–Vs about 30 GPa).
ELASTIC_RANGE_GPA = (1.0, 2000.0)

#: Accepted valence-band position on the common scale, eV.
VALENCE_BAND_RANGE_EV = (-20.0, 20.0)

#: Keys of ``[reference]``, all positive masses in m0.
REFERENCE_KEYS: tuple[str, ...] = ("m_e_m0", "m_so_m0")


@dataclass(frozen=True)
class KPMaterial:
    """A validated k·p parameter file.

    Attributes
    ----------
    name, source, note : str
    file : str
        The file it was read from ("" when built in code).
    structure : str
        One of :data:`STRUCTURES`.
    a_A : float
        Cubic lattice constant, Å.
    parameters : KPParameters
    models : tuple of str
        The models the file supports, in the order of :data:`bandpert.kp.MODEL_NAMES`.
    reference_masses_m0 : dict
        Tabulated masses from the file's ``[reference]`` table (keys of :data:`REFERENCE_KEYS`).
    deformation : DeformationPotentials or None
        From ``[deformation]``, in the convention a = a_c − a_v whatever the file's.
    elastic : ElasticConstants or None
        From ``[elastic]``.
    valence_band_eV : float or None
        ``alignment.valence_band_eV``: the unstrained valence-band top on a scale common to
        all materials (band offsets of heterostructures).
    conduction : ConductionState or None
        From ``[conduction]``: the conduction band's level at Γ and, when that is not the
        lowest conduction level (silicon's Γ2′ above Γ15), the lowest one.

    The models are built by :func:`bandpert.kp.material_model` (the input layer knows no
    Hamiltonian).
    """

    name: str
    source: str
    note: str
    file: str
    structure: str
    a_A: float
    parameters: KPParameters
    models: tuple[str, ...]
    reference_masses_m0: dict[str, float] = field(default_factory=dict)
    deformation: DeformationPotentials | None = None
    elastic: ElasticConstants | None = None
    valence_band_eV: float | None = None
    conduction: ConductionState | None = None


@dataclass(frozen=True)
class ConductionState:
    """Which level at Γ a file's conduction band is (``[conduction]``).

    Attributes
    ----------
    state : str
        Its irrep (e.g. ``"Γ2′"``, ``"Γ1"``, ``"Γ6"``).
    lowest_state : str or None
        The lowest conduction level at Γ when it is another level (not in the Kane models).
    lowest_eV : float or None
        That level's energy above the valence top.
    """

    state: str
    lowest_state: str | None = None
    lowest_eV: float | None = None


def _read_conduction(c: TableReader | None) -> ConductionState | None:
    if c is None:
        return None
    state = c.string("state")
    if not state.strip():
        raise c.fail("state", "expected the irrep of the conduction level at Γ, e.g. \"Γ1\"")
    lowest = c.string("lowest_state", required=False) or None
    energy = c.number("lowest_eV", required=lowest is not None, positive=True,
                      bounds=(0.0, 20.0), meaning="eV above the valence top")
    if energy is not None and lowest is None:
        raise c.fail("lowest_eV", "given without lowest_state; expected both or neither")
    c.finish()
    return ConductionState(state, lowest, energy)


def _read_models(r: TableReader) -> tuple[str, ...] | None:
    raw = r.raw("models", required=False)
    if raw is None:
        return None
    if not isinstance(raw, list) or not raw:
        got = "an empty array" if isinstance(raw, list) else describe(raw)
        raise r.fail("models", f"expected a non-empty array of model names "
                               f"({', '.join(MODEL_NAMES)}), got {got}")
    for value in raw:
        if not isinstance(value, str):
            raise r.fail("models", f"expected model names as strings, got {describe(value)}")
        if value not in MODEL_NAMES:
            raise r.fail("models", f"'{shorten(value)}' is not one of: {', '.join(MODEL_NAMES)}")
    if len(set(raw)) != len(raw):
        twice = next(v for v in raw if raw.count(v) > 1)
        raise r.fail("models", f"'{twice}' is listed twice; expected each model once")
    return tuple(m for m in MODEL_NAMES if m in raw)


def _read_parameters(r: TableReader) -> KPParameters:
    values: dict[str, float | None] = {}
    for key in PARAMETER_KEYS:
        values[key] = r.number(key, required=False, positive=key == "Eg_eV")
        if key == "Delta_so_eV" and values[key] is not None and values[key] < 0:
            raise r.fail(key, "must not be negative (0 means no spin–orbit coupling), got "
                              f"{values[key]:g}")
        if key == "Ep_eV" and values[key] is not None and values[key] < 0:
            raise r.fail(key, f"must not be negative (it is 2m0P²/ħ²), got {values[key]:g}")
        if values[key] is not None:
            low, high, why = PARAMETER_RANGES[key]
            check_range(values[key], (low, high), r, key, why)
    r.finish()
    g1, g2, g3 = values["gamma1"], values["gamma2"], values["gamma3"]
    if None not in (g1, g2, g3):
        worst = "gamma2" if abs(g2) >= abs(g3) else "gamma3"
        bound = 2.0 * max(abs(g2), abs(g3))
        if not g1 > bound:
            raise r.fail(worst, f"gamma1 = {g1:g} must exceed 2·max(|gamma2|, |gamma3|) = "
                                f"{bound:g} so that heavy holes curve downward in every "
                                "direction (Luttinger 1956); expected Luttinger parameters, "
                                "not modified ones")
    return KPParameters(**values)


def _check_models(r: TableReader, params: KPParameters, listed: tuple[str, ...] | None
                  ) -> tuple[str, ...]:
    if listed is not None:
        for model in listed:
            gone = params.missing(model)
            if gone:
                raise r.fail(gone[0], f"missing; the {model} model listed in models needs it")
        models = listed
    else:
        models = tuple(m for m in MODEL_NAMES if params.supports(m))
        if not models:
            six = ", ".join(REQUIRED_PARAMETERS["six-band"])
            raise r.fail("", f"do not complete any k·p model: the six-band model needs {six}; "
                             "the two- and eight-band models also need Eg_eV, Ep_eV and F")
    if "eight-band" in models or "two-band" in models:
        inv = conduction_inverse_mass(params.Eg_eV, params.Delta_so_eV, params.Ep_eV, params.F)
        if not inv > 0:
            raise r.fail("F", f"gives m0/m_e = (1 + 2F) + (Ep/3)(2/Eg + 1/(Eg + Delta_so)) = "
                              f"{inv:.4g}, not positive; expected an F that leaves the "
                              "conduction band curving upward")
    return models


def _read_deformation(r: TableReader | None) -> DeformationPotentials | None:
    if r is None:
        return None
    convention = r.string("a_v_convention", choices=A_V_CONVENTIONS)
    values = {key: r.number(key, bounds=DEFORMATION_RANGE_EV,
                            meaning="eV; tabulated deformation potentials lie within ±20 eV")
              for key in ("a_c_eV", "a_v_eV", "b_eV", "d_eV")}
    r.finish()
    if convention == A_V_CONVENTIONS[1]:  # the file's a_v has the opposite sign
        values["a_v_eV"] = -values["a_v_eV"]
    return DeformationPotentials(**values)


def _read_elastic(r: TableReader | None) -> ElasticConstants | None:
    if r is None:
        return None
    values = {key: r.number(key, positive=True, bounds=ELASTIC_RANGE_GPA,
                            meaning="GPa; tabulated cubic crystals have 10 to 1100 GPa")
              for key in ("c11_GPa", "c12_GPa", "c44_GPa")}
    r.finish()
    if not values["c11_GPa"] > values["c12_GPa"]:
        raise r.fail("c12_GPa", f"{values['c12_GPa']:g} is not below c11_GPa = "
                                f"{values['c11_GPa']:g}; expected c11 > c12 (a mechanically "
                                "stable cubic crystal, Born criteria)")
    return ElasticConstants(**values)


def parse_kp_material(doc: dict[str, Any], source: str = "") -> KPMaterial:
    """Validate a parsed k·p document (the TOML tables) into a :class:`KPMaterial`.

    Parameters
    ----------
    doc : dict
        The parsed TOML document (schema in the module docstring).
    source : str
        Name of the file, used in error messages.

    Raises
    ------
    InputError
        On any missing, unknown, mistyped or non-physical value.
    """
    r, name, src, note = read_header(doc, source)
    listed = _read_models(r)
    lat = r.sub("lattice")
    structure = lat.string("structure", choices=STRUCTURES)
    a = lat.number("a_A", positive=True, bounds=LATTICE_CONSTANT_RANGE_A,
                   meaning="Å; tabulated zincblende and diamond crystals have 3.5 to 6.5 Å")
    lat.finish()
    par = r.sub("parameters")
    params = _read_parameters(par)
    models = _check_models(par, params, listed)
    reference: dict[str, float] = {}
    ref = r.sub("reference", required=False)
    if ref is not None:
        for key in REFERENCE_KEYS:
            value = ref.number(key, required=False, positive=True,
                               bounds=REFERENCE_MASS_RANGE_M0, meaning="m0")
            if value is not None:
                reference[key] = value
        ref.finish()
    deformation = _read_deformation(r.sub("deformation", required=False))
    elastic = _read_elastic(r.sub("elastic", required=False))
    valence = None
    al = r.sub("alignment", required=False)
    if al is not None:
        valence = al.number("valence_band_eV", bounds=VALENCE_BAND_RANGE_EV,
                            meaning="eV on a common scale; tabulated III–V values lie within "
                                    "−3 to 1 eV")
        al.finish()
    conduction = _read_conduction(r.sub("conduction", required=False))
    r.finish()
    return KPMaterial(name=name, source=src, note=note, file=source, structure=structure, a_A=a,
                      parameters=params, models=models, reference_masses_m0=reference,
                      deformation=deformation, elastic=elastic, valence_band_eV=valence,
                      conduction=conduction)


def load_kp_material(path: str | Path) -> KPMaterial:
    """Read and validate a k·p parameter file (schema in the module docstring).

    Raises
    ------
    InputError
        If the file cannot be read, is not UTF-8 TOML, or fails validation.
    """
    path = find_material(path, "kp")  # a bundled name works too
    doc = read_toml_document(path, "a k·p parameter TOML file")
    return parse_kp_material(doc, str(path))
