"""Parameter sweeps: vary keys of a material file over ranges and tabulate gaps, edges and masses.

A sweep starts from the parsed TOML document of a material (a plain dictionary), not from the
validated :class:`~bandpert.material.Material`: each parameter point writes its values into a copy
of the document and validates it again with :func:`~bandpert.material.parse_material`, so every
point is checked exactly like a file and a bad value fails that point alone, with its parameters.

What can be varied (:func:`parse_axis`, ``KEY=START:STOP:COUNT``):

- any number in the document, by its dotted key: ``lattice.a_A``, ``potential.symmetric[1]``,
  ``potential.species.Ga[0]``, ``basis.cutoff_eV`` …;
- ``strain.xx``, ``strain.yy``, ``strain.zz``, ``strain.xy``, ``strain.xz``, ``strain.yz`` and
  ``strain.hydrostatic``: a homogeneous strain ε applied to the reference lattice vectors,
  a_i → (1 + ε) a_i (symmetric ε; engineering shear strain is 2ε_xy); atoms keep their
  fractional positions;
- ``alloy.x``: the virtual-crystal approximation (VCA) between the file (x = 0) and a second file
  of the same structure (x = 1): every number of the two documents interpolated linearly,
  (1 − x) p_A + x p_B, the lattice constant included (Vegard's law). The VCA ignores disorder
  (bowing, alloy scattering): the name says so in every output.

Form factors under a change of the lattice. Tabulated form factors (Cohen–Bergstresser style)
exist only on the |G|² shells of the reference lattice, in units of (2π/a)². A sweep of
``lattice.a_A`` with them keeps the tabulated values fixed on the shells (the 1/Ω scaling and the
q-dependence of v(q) are not applied), and the tool says so. ``form_factors="continuous"`` first
replaces the tabulated potential by a continuous v(q) fitted to it at the reference lattice
(:mod:`bandpert.formfactor`: the form of Friedel, Hybertsen & Schlüter, Phys. Rev. B 39, 7974
(1989), with the 1/Ω scaling); strain needs it, because strain splits the shells.

Basis. By default the cutoff scales with the cell, E_cut = E_cut,ref (Ω_ref/Ω)^{2/d}, which keeps
exactly the same plane waves (Miller indices) under a uniform change of the lattice constant, so
the bands move smoothly instead of jumping when a shell of G enters the basis. ``basis="fixed"``
keeps the cutoff in eV. The cutoff used at every point is in the results, so any point can be
recomputed alone (``bandpert bands --cutoff-eV``) and agrees to 1e-10 eV.
"""

from __future__ import annotations

import copy
import itertools
import math
import re
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..crystal.lattice import describe_position, point_group_rotations, standard_path
from ..errors import InputError
from ..input.material import Material, parse_material
from ..physics.bands import BandStructure, compute_band_structure, default_bands
from ..planewave.cutoff import choose_cutoff
from ..planewave.model import build_model
from ..planewave.solver import exact_energies, single_blas_thread
from ..runs.execution import SERIAL, Engine, Outcome, Progress, run
from ..units import HBAR2_OVER_2M0_EV_A2

QUANTITIES = ("edges", "gaps", "masses")
FORM_FACTOR_MODES = ("tabulated", "continuous")
BASIS_MODES = ("scaled", "fixed")
STRAIN_COMPONENTS = {"xx": (0, 0), "yy": (1, 1), "zz": (2, 2), "xy": (0, 1), "xz": (0, 2),
                     "yz": (1, 2), "hydrostatic": None}

#: Integer keys that count something: the two ends of an alloy must agree on them.
COUNT_KEYS = ("electrons.valence", "basis.bands")

#: Largest number of parameter points one sweep accepts.
MAX_POINTS = 100_000

_SEGMENT = re.compile(r"^([A-Za-z_][A-Za-z0-9_\-]*)((?:\[\d+\])*)$")


@dataclass(frozen=True)
class SweepAxis:
    """One varied key and its values.

    Attributes
    ----------
    key : str
        A dotted document key, ``strain.<component>`` or ``alloy.x``.
    values : numpy.ndarray
        The values, ``numpy.linspace(start, stop, count)``.
    """

    key: str
    values: np.ndarray

    @property
    def kind(self) -> str:
        """``document``, ``strain`` or ``alloy``."""
        head = self.key.split(".", 1)[0]
        return head if head in ("strain", "alloy") else "document"


#: Most values of one swept key (each point is a full band-structure run).
MAX_AXIS_POINTS = 100_000


def parse_axis(spec: str) -> SweepAxis:
    """Read ``KEY=START:STOP:COUNT`` (COUNT ≥ 1; with COUNT = 1 only START is used).

    Raises
    ------
    InputError
        Naming the axis (key ``axes``) and what was expected.
    """
    shape = "expected KEY=START:STOP:COUNT, e.g. lattice.a_A=5.3:5.6:31"
    if "=" not in spec:
        raise InputError(f"'{spec}' has no '='; {shape}", key="axes")
    key, _, rng = spec.partition("=")
    key = key.strip()
    parts = rng.split(":")
    if not key or len(parts) != 3:
        raise InputError(f"'{spec}' is not of the form KEY=START:STOP:COUNT; {shape}",
                         key="axes")
    try:
        start, stop = float(parts[0]), float(parts[1])
        count = int(parts[2])
    except ValueError:
        raise InputError(f"'{spec}': START and STOP must be numbers and COUNT an integer; "
                         f"{shape}", key="axes") from None
    if not (math.isfinite(start) and math.isfinite(stop)):
        raise InputError(f"'{spec}': START and STOP must be finite", key="axes")
    if count < 1:
        raise InputError(f"'{spec}': COUNT must be at least 1, got {count}", key="axes")
    if count > MAX_AXIS_POINTS:  # before numpy allocates the values
        raise InputError(f"'{spec[:80]}': COUNT {count} is above the limit of "
                         f"{MAX_AXIS_POINTS} points per key", key="axes")
    head = key.split(".", 1)[0]
    if head == "strain":
        comp = key.split(".", 1)[1] if "." in key else ""
        if comp not in STRAIN_COMPONENTS:
            raise InputError(f"unknown strain component '{comp}'; expected one of "
                             f"{', '.join('strain.' + c for c in STRAIN_COMPONENTS)}",
                             key="axes")
    elif head == "alloy" and key != "alloy.x":
        raise InputError(f"unknown alloy key '{key}'; expected alloy.x", key="axes")
    else:
        _split_key(key)
    return SweepAxis(key=key, values=np.linspace(start, stop, count))


def _split_key(key: str) -> list[str | int]:
    """``potential.species.Ga[1]`` → ["potential", "species", "Ga", 1]."""
    steps: list[str | int] = []
    for segment in key.split("."):
        m = _SEGMENT.match(segment)
        if not m:
            raise InputError(f"'{key}' is not a document key (segment '{segment}'); expected "
                             "dotted names with optional [index], e.g. potential.symmetric[0]",
                             key="axes")
        steps.append(m.group(1))
        steps.extend(int(i) for i in re.findall(r"\[(\d+)\]", m.group(2)))
    return steps


def get_value(doc: dict[str, Any], key: str, source: str = "") -> Any:
    """The value at a dotted key of a document (InputError naming the key if absent)."""
    node: Any = doc
    walked = ""
    for step in _split_key(key):
        if isinstance(step, int):
            if not isinstance(node, list) or step >= len(node):
                size = len(node) if isinstance(node, list) else 0
                raise InputError(f"'{walked}' has no entry [{step}] (it has {size}); expected an "
                                 "index of an array of the file", source, key)
            node = node[step]
            walked += f"[{step}]"
        else:
            if not isinstance(node, dict) or step not in node:
                where = f"'{walked}'" if walked else "the top level"
                have = ", ".join(sorted(node)) if isinstance(node, dict) else "no keys"
                raise InputError(f"{where} has no key '{step}' (it has: {have}); expected a key "
                                 "of the file", source, key)
            node = node[step]
            walked += ("." if walked else "") + step
    return node


def set_value(doc: dict[str, Any], key: str, value: float, source: str = "") -> None:
    """Write a number at a dotted key (in place); the key must hold a number already."""
    old = get_value(doc, key, source)
    if isinstance(old, bool) or not isinstance(old, int | float):
        raise InputError(f"holds {type(old).__name__}, not a number; expected a numeric key to "
                         "vary", source, key)
    steps = _split_key(key)
    node: Any = doc
    for step in steps[:-1]:
        node = node[step]
    node[steps[-1]] = int(round(value)) if isinstance(old, int) and float(value).is_integer() \
        else float(value)


def strain_tensor(key: str, value: float) -> np.ndarray:
    """The symmetric 3 × 3 strain tensor of one ``strain.<component>`` axis value."""
    comp = STRAIN_COMPONENTS[key.split(".", 1)[1]]
    eps = np.zeros((3, 3))
    if comp is None:
        return value * np.eye(3)
    i, j = comp
    eps[i, j] = eps[j, i] = value
    return eps


def virtual_crystal(doc_a: dict[str, Any], doc_b: dict[str, Any], x: float, source: str = "",
                    source_b: str = "") -> dict[str, Any]:
    """Virtual-crystal document (1 − x)·A + x·B: every number interpolated linearly.

    The two documents must have the same structure (same keys, arrays of the same length, the
    same atoms in the same order); species of B are renamed to those of A by atom order, so
    per-species form factors of Ga and In, say, mix on the same site. Strings come from A; the
    name becomes ``"<A> – <B> virtual crystal, x = …"``. Integers must agree (an electron count
    cannot be interpolated).

    Reference: L. Nordheim, Ann. Phys. 401, 607 (1931) (the virtual-crystal approximation; from
    memory); for empirical pseudopotentials, interpolated form factors as in common practice.
    """
    b = _rename_species(doc_a, doc_b, source_b)

    def mix(pa: Any, pb: Any, key: str) -> Any:
        if isinstance(pa, dict) and isinstance(pb, dict):
            if set(pa) != set(pb):
                extra = sorted(set(pa) ^ set(pb))
                raise InputError(f"the alloy end '{source_b}' differs in keys ({', '.join(extra)})"
                                 "; expected two files of the same structure", source,
                                 key or "top level")
            return {k: mix(pa[k], pb[k], f"{key}.{k}" if key else k) for k in pa}
        if isinstance(pa, list) and isinstance(pb, list):
            if len(pa) != len(pb):
                raise InputError(f"has {len(pa)} entries here and {len(pb)} in '{source_b}'; "
                                 "expected arrays of the same length", source, key)
            return [mix(u, v, f"{key}[{i}]") for i, (u, v) in enumerate(zip(pa, pb, strict=True))]
        if isinstance(pa, bool) or isinstance(pb, bool):
            if pa != pb:
                raise InputError(f"differs from '{source_b}'; expected the same value", source,
                                 key)
            return pa
        if isinstance(pa, int) and isinstance(pb, int):
            if pa == pb:
                return pa
            if key in COUNT_KEYS:
                raise InputError(f"is {pa} here and {pb} in '{source_b}'; a count cannot be "
                                 "interpolated, expected the same value", source, key)
        if isinstance(pa, int | float) and isinstance(pb, int | float):
            return (1.0 - x) * pa + x * pb
        if isinstance(pa, str) and isinstance(pb, str):
            return pa
        raise InputError(f"is {type(pa).__name__} here and {type(pb).__name__} in "
                         f"'{source_b}'; expected the same type", source, key)

    out = mix(doc_a, b, "")
    out["name"] = f"{doc_a.get('name', 'A')} – {doc_b.get('name', 'B')} virtual crystal, x = {x:g}"
    out["source"] = (f"virtual-crystal approximation between {doc_a.get('source', '')} and "
                     f"{doc_b.get('source', '')}")
    return out


def _rename_species(doc_a: dict[str, Any], doc_b: dict[str, Any], source_b: str) -> dict:
    b = copy.deepcopy(doc_b)
    atoms_a, atoms_b = doc_a.get("atoms"), b.get("atoms")
    if atoms_a is None and atoms_b is None:  # k·p parameter files have no atoms
        return b
    if not (isinstance(atoms_a, list) and isinstance(atoms_b, list)) or len(atoms_a) != len(
            atoms_b):
        raise InputError("expected the same number of atoms in both alloy ends", source_b,
                         "atoms")
    rename: dict[str, str] = {}
    for i, (ua, ub) in enumerate(zip(atoms_a, atoms_b, strict=True)):
        sa, sb = ua.get("species"), ub.get("species")
        if rename.setdefault(sb, sa) != sa:
            raise InputError(f"species '{sb}' sits where the other file has two different "
                             "species; expected the same arrangement of species", source_b,
                             f"atoms[{i}].species")
        ub["species"] = sa
    species = b.get("potential", {}).get("species")
    if isinstance(species, dict):
        b["potential"]["species"] = {rename.get(k, k): v for k, v in species.items()}
    return b


@dataclass(frozen=True)
class SweepSpec:
    """Everything a parameter point needs; picklable, sent to the workers.

    Attributes
    ----------
    document : dict
        The reference TOML document (after any form-factor replacement).
    source : str
        The file name, for messages.
    axes : tuple of SweepAxis
    quantities : tuple of str
        A subset of :data:`QUANTITIES`.
    points : tuple of str
        Labels at which gaps are tabulated.
    n_k : int
        k-points along the path of each point.
    n_bands : int
    lower_band : int
        1-based band below the gap at the labelled points.
    reference_cutoff_eV : float
    reference_volume : float
        Cell volume (Å³, Å², Å) of the reference material.
    basis : str
        "scaled" or "fixed" (:data:`BASIS_MODES`).
    alloy_end : dict or None
        The x = 1 document of an ``alloy.x`` sweep.
    alloy_source : str
    temperature_K : float
    kind : str
        "plane-wave" (a material file) or "k·p" (a k·p parameter file: the masses at Γ of each
        of its models).
    reference_rotations : numpy.ndarray or None
        Point group of the reference crystal (spglib, fractional direct coordinates). A strained
        cell has lower symmetry, so valleys that were equivalent split and the lowest one may not
        lie on the path: every band edge found on the path is compared with its images under
        these rotations before it is refined.
    """

    document: dict[str, Any]
    source: str
    axes: tuple[SweepAxis, ...]
    quantities: tuple[str, ...]
    points: tuple[str, ...]
    n_k: int
    n_bands: int
    lower_band: int
    reference_cutoff_eV: float
    reference_volume: float
    basis: str = "scaled"
    alloy_end: dict[str, Any] | None = None
    alloy_source: str = ""
    temperature_K: float = 300.0
    kind: str = "plane-wave"
    reference_rotations: np.ndarray | None = None


def is_kp_document(document: dict[str, Any]) -> bool:
    """True for a k·p parameter file (a ``[parameters]`` table and no ``[potential]``)."""
    return "parameters" in document and "potential" not in document


#: Directions along which a k·p sweep reports the Γ masses.
KP_DIRECTIONS = ("001", "110", "111")


def point_document(spec: SweepSpec, values: tuple[float, ...]) -> dict[str, Any]:
    """The material document at one parameter point (a new dictionary)."""
    doc = copy.deepcopy(spec.document)
    for axis, value in zip(spec.axes, values, strict=True):
        if axis.kind == "alloy":
            doc = virtual_crystal(doc, spec.alloy_end, value, spec.source, spec.alloy_source)
    strain = np.zeros((3, 3))
    for axis, value in zip(spec.axes, values, strict=True):
        if axis.kind == "document":
            set_value(doc, axis.key, value, spec.source)
        elif axis.kind == "strain":
            strain += strain_tensor(axis.key, value)
    if np.any(strain):
        reference = parse_material(doc, spec.source)
        d = reference.dimension
        deform = np.eye(d) + strain[:d, :d]
        vectors = reference.vectors_A @ deform.T
        doc["lattice"] = {"type": "vectors", "vectors_A": vectors.tolist(),
                          "a_A": reference.a_A}
    return doc


def point_material(spec: SweepSpec, values: tuple[float, ...]) -> Material:
    """The validated material at one parameter point."""
    return parse_material(point_document(spec, values), spec.source)


def point_cutoff(spec: SweepSpec, material: Material) -> float:
    """Cutoff at a point: the file's if the sweep varies it, else scaled or fixed (module doc)."""
    if any(a.key.startswith("basis.cutoff") for a in spec.axes) and material.cutoff_eV:
        return float(material.cutoff_eV)
    if spec.basis == "fixed":
        return spec.reference_cutoff_eV
    ratio = spec.reference_volume / material.volume_A
    return float(spec.reference_cutoff_eV * ratio ** (2.0 / material.dimension))


def evaluate_point(task: tuple[SweepSpec, tuple[float, ...]]) -> dict[str, float | str]:
    """One parameter point → one row of the sweep table (a flat dict of numbers and text).

    Module-level so that Dask workers import it by name; BLAS runs on one thread, so a point
    gives the same numbers serially and on any worker (energies and refined positions).
    Keys (all energies absolute, the model's own zero; masses in m0; see the README for the
    full list): ``cutoff_eV``,
    ``basis_size``; with "gaps" ``lower_<P>_eV``, ``upper_<P>_eV``, ``gap_<P>_eV`` for every
    label P; with "edges" ``valence_max_eV``, ``conduction_min_eV``, ``gap_eV``,
    ``direct_gap_eV``, ``valence_max_k{1,2,3}_frac``, ``conduction_min_k{1,2,3}_frac``,
    ``valence_max_at``, ``conduction_min_at``; with "masses" ``conduction_m{1,2,3}``,
    ``conduction_valleys``, ``conduction_dos_mass``, ``conduction_conductivity_mass``,
    ``valence_m{1,2,3}`` or ``valence_gamma{1,2,3}`` (degenerate top), ``valence_dos_mass``.
    """
    spec, values = task
    with single_blas_thread():  # the same arithmetic in this process and in any worker
        if spec.kind == "k·p":
            return _kp_point(spec, values)
        return _plane_wave_point(spec, values)


def _plane_wave_point(spec: SweepSpec, values: tuple[float, ...]) -> dict[str, float | str]:
    material = point_material(spec, values)
    cutoff = point_cutoff(spec, material)
    bs = compute_band_structure(material, n_k=spec.n_k, n_bands=spec.n_bands, cutoff_eV=cutoff,
                                check_cutoff=False)
    row: dict[str, float | str] = {"cutoff_eV": cutoff, "basis_size": float(bs.model.size)}
    if "gaps" in spec.quantities:
        row.update(_gaps_at_points(bs, spec.points, spec.lower_band))
    if "edges" in spec.quantities or "masses" in spec.quantities:
        row.update(_edges_and_masses(bs, spec))
    return row


def _kp_point(spec: SweepSpec, values: tuple[float, ...]) -> dict[str, float | str]:
    """A k·p file at one parameter point: Γ energies and masses of each model along
    [001], [110], [111] (columns ``<model>_<band>_<direction>_m0``, spaces as ``_``)."""
    from ..input.kp_file import parse_kp_material
    from ..kp import masses_at_gamma

    kpm = parse_kp_material(point_document(spec, values), spec.source)
    row: dict[str, float | str] = {}
    for name in kpm.models:
        model = kpm.model(name)
        for direction in KP_DIRECTIONS:
            for band, mass in masses_at_gamma(model, direction).as_dict().items():
                row[f"{name}_{band}_{direction}_m0".replace(" ", "_").replace("-", "_")] = mass
    return row


def _gaps_at_points(bs: BandStructure, labels: tuple[str, ...], lower_band: int) -> dict:
    row: dict[str, float] = {}
    e = bs.energies_eV
    if lower_band >= e.shape[1]:
        raise InputError(f"band {lower_band} has no band above it among the {e.shape[1]} "
                         "computed; expected fewer or more bands", key="lower_band")
    where = {}
    for index, label in zip(bs.path.label_indices, bs.path.labels, strict=True):
        for name in label.split("|"):
            where.setdefault(name, int(index))
    for label in labels:
        i = where[label]
        lo, hi = float(e[i, lower_band - 1]), float(e[i, lower_band])
        row[f"lower_{label}_eV"] = lo
        row[f"upper_{label}_eV"] = hi
        row[f"gap_{label}_eV"] = hi - lo
    return row


def _edges_and_masses(bs: BandStructure, spec: SweepSpec) -> dict:
    from ..physics.masses import band_masses, edge_point, eigenstates

    if bs.edges is None:
        raise InputError("no gap between the occupied and the empty bands at this point (a "
                         "metal, or no electrons.valence); edges and masses need a semiconductor",
                         spec.source, "electrons.valence")
    n_val = bs.material.valence_electrons // 2
    row: dict[str, float | str] = {}
    found = {}
    for name, index, band, maximum in (
            ("valence_max", bs.edges.valence_max_index, n_val - 1, True),
            ("conduction_min", bs.edges.conduction_min_index, n_val, False)):
        candidates, best = _valley_images(bs, index, band, maximum, spec.reference_rotations)
        k = edge_point(bs.model, candidates, best, band, maximum)
        found[name] = (k, band)
        energy = float(eigenstates(bs.model, k, band + 1).energies_eV[band])
        k_frac = np.linalg.solve(bs.model.reciprocal_invA.T, k)
        row[f"{name}_eV"] = energy
        for i, x in enumerate(k_frac):
            row[f"{name}_k{i + 1}_frac"] = float(x)
        moved = not np.allclose(k, candidates[best], atol=1e-9)
        where = describe_position(bs.path, index)
        if best:
            where = f"image of {where} under the reference symmetry"
        row[f"{name}_at"] = where + (" (refined)" if moved else "")
    row["gap_eV"] = float(row["conduction_min_eV"]) - float(row["valence_max_eV"])
    row["direct_gap_eV"] = bs.edges.direct_gap_eV
    if "masses" in spec.quantities:
        rot = point_group_rotations(bs.material)
        for name, prefix in (("conduction_min", "conduction"), ("valence_max", "valence")):
            k, band = found[name]
            m = band_masses(bs.model, k, band, rot, spec.temperature_K, name, cross_check=False)
            if m.tensor is not None:
                masses = np.sort(m.tensor.principal_masses)
                for i, x in enumerate(masses):
                    row[f"{prefix}_m{i + 1}"] = float(x)
                if m.conductivity_mass is not None:
                    row[f"{prefix}_conductivity_mass"] = float(m.conductivity_mass)
            elif m.edge is not None and m.edge.luttinger is not None:
                for i, g in enumerate(m.edge.luttinger):
                    row[f"{prefix}_gamma{i + 1}"] = float(g)
            if m.valleys is not None:
                row[f"{prefix}_valleys"] = float(m.valleys)
            if m.dos_mass is not None:
                row[f"{prefix}_dos_mass"] = float(m.dos_mass)
    return row


def _valley_images(bs: BandStructure, index: int, band: int, maximum: bool,
                   rotations: np.ndarray | None) -> tuple[np.ndarray, int]:
    """The path extremum and its images under the reference point group (and −k).

    Returns the Cartesian candidates (the path point first) and the index of the best one; an
    image wins only if it is better by more than 1e-9 eV, so an unstrained crystal keeps the
    point on the path.
    """

    k0 = bs.path.k_frac[index]
    if rotations is None:
        return bs.path.k_cart_invA[index:index + 1], 0
    images = np.array([k0 @ np.linalg.inv(r) for r in rotations])
    images = np.concatenate([images, -images])
    images = images[np.unique(np.round(images, 9), axis=0, return_index=True)[1]]
    others = images[~np.all(np.isclose(images, k0, atol=1e-9), axis=1)]
    images = np.concatenate([[k0], others])
    cart = images @ bs.model.reciprocal_invA
    e = exact_energies(bs.model, cart, band + 1)[:, band]
    gain = (e - e[0]) if maximum else (e[0] - e)
    best = int(np.argmax(gain))
    return cart, (best if gain[best] > 1e-9 else 0)


@dataclass(frozen=True)
class SweepFailure:
    """A parameter point that failed: its values and the one-line reason."""

    values: tuple[float, ...]
    error: str
    user_error: bool


@dataclass(frozen=True)
class SweepResult:
    """The table of a sweep.

    Attributes
    ----------
    spec : SweepSpec
    values : numpy.ndarray
        (n_points, n_axes) parameter values, the last axis varying fastest.
    columns : dict of str to numpy.ndarray
        Numeric results per point (NaN where the point failed or the value does not apply).
    text : dict of str to list of str
        Text results per point ("" where missing), e.g. where the band edges sit.
    failures : list of SweepFailure
    form_factor_note : str
        How the form factors follow the lattice in this sweep (said plainly in every output).
    engine : str
        How the sweep ran.
    """

    spec: SweepSpec
    values: np.ndarray
    columns: dict[str, np.ndarray]
    text: dict[str, list[str]]
    failures: list[SweepFailure] = field(default_factory=list)
    form_factor_note: str = ""
    engine: str = ""

    @property
    def n_points(self) -> int:
        """Parameter points in the sweep."""
        return int(self.values.shape[0])


def parameter_grid(axes: tuple[SweepAxis, ...]) -> np.ndarray:
    """All combinations of the axis values, (n_points, n_axes), the last axis fastest."""
    return np.array(list(itertools.product(*(a.values for a in axes))), dtype=float).reshape(
        -1, len(axes))


def faithful_window(tabulated: Material, taper_invA: tuple[float, float]) -> tuple[float, float]:
    """Scale factors s = a/a_ref for which a fitted continuous model keeps the tabulated shells.

    Under a uniform scaling every |G| goes as 1/s. The listed shells keep the full weight of the
    taper while |G_last|/s ≤ q1, and the next shell of the lattice stays switched off while
    |G_next|/s ≥ q2: s ∈ [|G_last|/q1, |G_next|/q2]. Strain moves the shells unevenly, so for
    strain the window is a guide, not a bound.
    """
    unit = 2.0 * np.pi / tabulated.a_A
    shells = np.array(tabulated.potential.shells_g2, dtype=float)
    q_last = unit * np.sqrt(shells.max())
    g = build_model(tabulated, 4.0 * HBAR2_OVER_2M0_EV_A2 * q_last**2).basis.g_cart_invA
    q = np.unique(np.round(np.linalg.norm(g, axis=1), 9))
    q_next = q[q > q_last * (1 + 1e-9)].min()
    return float(q_last / taper_invA[0]), float(q_next / taper_invA[1])


def form_factor_note(material: Material, axes: tuple[SweepAxis, ...], mode: str,
                     window: str = "") -> str:
    """One sentence on how the form factors follow the varied lattice."""
    lattice_moves = any(a.kind in ("strain", "alloy") or a.key.startswith("lattice.")
                        for a in axes)
    form = material.potential.form
    if mode == "continuous":
        return ("form factors from a continuous v(q) (Friedel, Hybertsen & Schlüter 1989 form) "
                "fitted to the file's tabulated values at the reference lattice, scaled by 1/Ω"
                + window)
    if form in ("symmetric-antisymmetric", "per-species") and lattice_moves:
        return ("tabulated form factors kept fixed on the |G|² shells of the reference lattice "
                "(no 1/Ω scaling, no q-dependence); use form_factors continuous for a v(q) "
                "that follows the lattice")
    if form == "continuous":
        return "the file's continuous v(q) follows the lattice, scaled by 1/Ω"
    return f"the file's potential (form '{form}') as given at every point"


def prepare(document: dict[str, Any], source: str, axes: tuple[SweepAxis, ...],
            quantities: tuple[str, ...] = ("edges", "gaps"), points: tuple[str, ...] | None = None,
            n_k: int = 60, n_bands: int | None = None, cutoff_eV: float | None = None,
            lower_band: int | None = None, form_factors: str = "tabulated",
            basis: str = "scaled", alloy_end: dict[str, Any] | None = None,
            alloy_source: str = "", temperature_K: float = 300.0
            ) -> tuple[SweepSpec, Material, str]:
    """Check a sweep before it runs and fix its reference settings.

    The reference material is the file itself (x = 0 for an alloy); its cutoff (given, or the
    converged default of :func:`~bandpert.bands.converged_cutoff`) is the reference cutoff.
    The first and last parameter points are built and validated here, so a range that leaves
    the physical domain is refused before any work starts.

    Returns
    -------
    spec : SweepSpec
    reference : Material
    note : str
        :func:`form_factor_note`.
    """
    if not axes:
        raise InputError("nothing to vary; expected at least one KEY=START:STOP:COUNT",
                         source, "axes")
    keys = [a.key for a in axes]
    if len(set(keys)) != len(keys):
        raise InputError("a key is varied twice; expected each key once", source, "axes")
    n_points = int(np.prod([len(a.values) for a in axes]))
    if n_points > MAX_POINTS:
        raise InputError(f"{n_points} parameter points; expected at most {MAX_POINTS}", source,
                         "axes")
    for q in quantities:
        if q not in QUANTITIES:
            raise InputError(f"unknown quantity '{q}'; expected {', '.join(QUANTITIES)}",
                             source, "quantities")
    if form_factors not in FORM_FACTOR_MODES:
        raise InputError(f"unknown mode '{form_factors}'; expected "
                         f"{', '.join(FORM_FACTOR_MODES)}", source, "form_factors")
    if basis not in BASIS_MODES:
        raise InputError(f"unknown basis rule '{basis}'; expected {', '.join(BASIS_MODES)}",
                         source, "basis")
    if any(a.kind == "alloy" for a in axes) and alloy_end is None:
        raise InputError("alloy.x needs the second end of the alloy (alloy_end)", source,
                         "alloy_end")
    doc = copy.deepcopy(document)
    if is_kp_document(doc):
        return _prepare_kp(doc, source, tuple(axes), alloy_end, alloy_source, form_factors)
    reference = parse_material(doc, source)
    if alloy_end is not None:
        if form_factors == "continuous":
            raise InputError("alloy.x interpolates the two files' own form factors (virtual "
                             "crystal); expected form_factors tabulated with alloy_end",
                             source, "form_factors")
        alloy_end = copy.deepcopy(alloy_end)
        parse_material(alloy_end, alloy_source)  # each end must be valid on its own
    window = ""
    if form_factors == "continuous":
        from ..planewave.formfactor import continuous_document

        tabulated = reference
        doc = continuous_document(doc, source)
        reference = parse_material(doc, source)
        lo, hi = faithful_window(tabulated, reference.potential.taper_invA)
        window = (f"; it equals the tabulated model exactly for a/a_ref in [{lo:.4f}, {hi:.4f}] "
                  f"(a = {lo * tabulated.a_A:.4g}–{hi * tabulated.a_A:.4g} Å); beyond, the "
                  "taper changes the weights of the outer shells smoothly")
    if reference.path is None:  # keep the reference labels: a strained cell has lower symmetry
        pts, legs = standard_path(reference)
        doc["path"] = {"points": {k: list(v) for k, v in pts.items()},
                       "legs": [list(leg) for leg in legs]}
        reference = parse_material(doc, source)
    if alloy_end is not None and "path" not in alloy_end:
        alloy_end["path"] = copy.deepcopy(doc["path"])
    strained = any(a.kind == "strain" for a in axes)
    if strained and reference.potential.form in ("symmetric-antisymmetric", "per-species"):
        raise InputError("strain splits the |G|² shells, where tabulated form factors do not "
                         "exist; expected form_factors continuous (a fitted v(q))", source,
                         "form_factors")
    if strained and reference.dimension < 2 and any(
            a.kind == "strain" and a.key not in ("strain.xx", "strain.hydrostatic")
            for a in axes):
        raise InputError("a 1D lattice has only strain.xx", source, "axes")
    nb = n_bands or default_bands(reference)
    n_el = reference.valence_electrons
    if lower_band is None:
        if "gaps" in quantities and (n_el is None or n_el % 2):
            raise InputError("gaps at points need the band below the gap: give lower_band (or "
                             "an even electrons.valence)", source, "lower_band")
        lower_band = (n_el or 2) // 2
    if lower_band < 1 or lower_band >= nb:
        raise InputError(f"band {lower_band} must lie between 1 and {nb - 1} (bands computed: "
                         f"{nb})", source, "lower_band")
    if (("edges" in quantities or "masses" in quantities)
            and (n_el is None or n_el % 2)):
        raise InputError("edges and masses need a semiconductor: an even electrons.valence",
                         source, "electrons.valence")
    labels = tuple(dict.fromkeys(x for leg in reference.path.legs for x in leg))
    if points:
        from ..input.material import canonical_label

        chosen = []
        for p in points:
            name = canonical_label(p)
            if name not in labels:
                raise InputError(f"'{p}' is not a label of the path ({', '.join(labels)})",
                                 source, "points")
            chosen.append(name)
        labels = tuple(dict.fromkeys(chosen))
    cutoff = choose_cutoff(reference, nb, cutoff_eV, check_convergence=False)
    rotations = point_group_rotations(reference) if strained else None
    spec = SweepSpec(document=doc, source=source, axes=tuple(axes), quantities=tuple(quantities),
                     points=labels, n_k=n_k, n_bands=nb, lower_band=lower_band,
                     reference_rotations=rotations,
                     reference_cutoff_eV=float(cutoff), reference_volume=reference.volume_A,
                     basis=basis, alloy_end=alloy_end, alloy_source=alloy_source,
                     temperature_K=temperature_K)
    grid = parameter_grid(spec.axes)
    for values in (grid[0], grid[-1]):
        m = point_material(spec, tuple(values))
        build_model(m, point_cutoff(spec, m))  # a range leaving the basis limit fails here
    return spec, reference, form_factor_note(reference, spec.axes, form_factors, window)


def _prepare_kp(doc: dict[str, Any], source: str, axes: tuple[SweepAxis, ...],
                alloy_end: dict[str, Any] | None, alloy_source: str, form_factors: str):
    """:func:`prepare` for a k·p parameter file: masses at Γ of each model, nothing else."""
    from ..input.kp_file import parse_kp_material

    if any(a.kind == "strain" for a in axes):
        raise InputError("a k·p parameter file has no lattice vectors to strain (its deformation "
                         "potentials are not modelled); expected keys of its [parameters]",
                         source, "axes")
    if form_factors != "tabulated":
        raise InputError("a k·p parameter file has no form factors", source, "form_factors")
    reference = parse_kp_material(doc, source)
    if alloy_end is not None:
        alloy_end = copy.deepcopy(alloy_end)
        parse_kp_material(alloy_end, alloy_source)
    spec = SweepSpec(document=doc, source=source, axes=axes, quantities=("masses",), points=(),
                     n_k=0, n_bands=0, lower_band=0, reference_cutoff_eV=0.0,
                     reference_volume=reference.a_A**3, alloy_end=alloy_end,
                     alloy_source=alloy_source, kind="k·p")
    grid = parameter_grid(axes)
    for values in (grid[0], grid[-1]):
        parse_kp_material(point_document(spec, tuple(values)), source)
    note = ("k·p parameters as given at every point (masses at Γ of the file's models along "
            "[001], [110], [111])")
    return spec, reference, note


def run_sweep(spec: SweepSpec, engine: Engine = SERIAL, progress: Progress | None = None,
              note: str = "") -> SweepResult:
    """Evaluate every parameter point on the engine and gather the table.

    Parameters
    ----------
    spec : SweepSpec
        From :func:`prepare`.
    engine : Engine
        Serial, a local Dask cluster, or a scheduler address (:mod:`bandpert.execution`).
    progress : callable, optional
        ``progress(done, total)`` in points.
    note : str
        The form-factor note to carry into the result.

    Returns
    -------
    SweepResult
    """
    grid = parameter_grid(spec.axes)
    tasks = [(spec, tuple(float(x) for x in row)) for row in grid]
    outcomes: list[Outcome] = run(evaluate_point, tasks, engine, progress)
    numeric: dict[str, np.ndarray] = {}
    text: dict[str, list[str]] = {}
    failures = []
    for i, outcome in enumerate(outcomes):
        if not outcome.ok:
            failures.append(SweepFailure(tuple(grid[i]), outcome.error, outcome.user_error))
            continue
        for key, value in outcome.value.items():
            if isinstance(value, str):
                text.setdefault(key, [""] * len(grid))[i] = value
            else:
                numeric.setdefault(key, np.full(len(grid), np.nan))[i] = value
    return SweepResult(spec=spec, values=grid, columns=numeric, text=text, failures=failures,
                       form_factor_note=note, engine=engine.describe())
