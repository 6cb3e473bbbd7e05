"""What a parameter sweep varies and the material document at each of its points.

The keys a sweep may vary (``KEY=START:STOP:COUNT``), the document operations (dotted keys,
homogeneous strain of the lattice vectors (the atoms of a diamond or zincblende cell shifted by
Kleinman's internal strain under shear), the virtual crystal between two files), the picklable
:class:`SweepSpec` sent to the workers, and the material and cutoff of one parameter point. The
sweep itself is described in :mod:`bandpert.runs.sweep`.
"""

from __future__ import annotations

import copy
import itertools
import math
import re
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..errors import InputError
from ..input.key_ranges import KeyRange, key_range, registered_pattern
from ..input.material import Material, parse_material
from ..physics.internal_strain import internal_displacements, internal_strain_parameter

QUANTITIES = ("edges", "gaps", "masses", "deformation")
FORM_FACTOR_MODES = ("tabulated", "continuous")
BASIS_MODES = ("scaled", "fixed")
STRAIN_COMPONENTS = {"xx": (0, 0), "yy": (1, 1), "zz": (2, 2), "xy": (0, 1), "xz": (0, 2),
                     "yz": (1, 2), "hydrostatic": None}

#: Integer keys that count something: the two ends of an alloy must agree on them.
COUNT_KEYS = ("electrons.valence", "basis.bands")

#: Optional numeric keys a sweep or a fit may vary although the file omits them, with the value
#: an absent key means (the kinetic factor β of H0 = β ħ²|k+G|²/2m0).
OPTIONAL_NUMBERS = {"potential.kinetic_factor": 1.0}

#: Largest number of parameter points one sweep accepts.
MAX_POINTS = 100_000

#: The values ``alloy.x`` accepts: the share of the second file, 0 (this file) to 1 (the other);
#: beyond them the virtual crystal would extrapolate the two files, not mix them.
ALLOY_X = KeyRange(0.0, 1.0)

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


def check_axis_ranges(document: dict[str, Any], axes: tuple[SweepAxis, ...],
                      source: str = "") -> None:
    """Refuse an axis whose START or STOP lies outside the values its key accepts.

    A document key of a plane-wave material file is checked against its range in
    :mod:`bandpert.input.key_ranges` (the one the material reader and a fit's bounds use; a
    form factor's depends on the lattice constant and energy unit, taken from the document with
    every document axis at the same end), ``alloy.x`` against :data:`ALLOY_X`. The values of an
    axis are monotonic (``numpy.linspace``), so its two ends decide. Keys with no registered
    range (counts, a k·p file's parameters) and ``strain.*`` are left to the reader, which
    validates the first and last point of the sweep. Only dictionary operations: this runs
    before any model is built.

    Raises
    ------
    InputError
        Key ``axes``: one line naming the key, the offending value, which end it is and the
        accepted range.
    """
    kp = is_kp_document(document)
    for end, name in ((0, "START"), (-1, "STOP")):
        doc = copy.deepcopy(document)
        for axis in axes:
            if axis.kind == "document":
                set_value(doc, axis.key, float(axis.values[end]), source)
        for axis in axes:
            value = float(axis.values[end])
            if axis.kind == "alloy":
                accepted = ALLOY_X
            elif axis.kind == "document" and not kp and registered_pattern(axis.key):
                accepted = key_range(axis.key, doc)
            else:
                continue
            if not accepted.contains(value):
                raise InputError(
                    f"{axis.key} = {value:g} (the {name} of its values) is outside the values "
                    f"the key accepts, {accepted.text()}; expected START and STOP within them",
                    source, "axes")


def get_value(doc: dict[str, Any], key: str, source: str = "") -> Any:
    """The value at a dotted key of a document (InputError naming the key if absent; an absent
    key of :data:`OPTIONAL_NUMBERS` under a table the file has gives its default)."""
    if key in OPTIONAL_NUMBERS:
        parent, _, last = key.rpartition(".")
        table = get_value(doc, parent, source)
        if isinstance(table, dict) and last not in table:
            return OPTIONAL_NUMBERS[key]
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
    # measured deformation potentials belong to each pure crystal, not to the alloy
    doc_a, doc_b = ({**d, "potential": {k: v for k, v in d["potential"].items()
                                        if k != "deformation_targets"}}
                    if isinstance(d.get("potential"), dict) else d for d in (doc_a, doc_b))
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



def point_document(spec: SweepSpec, values: tuple[float, ...]) -> dict[str, Any]:
    """The material document at one parameter point (a new dictionary)."""
    doc = copy.deepcopy(spec.document)
    for axis, value in zip(spec.axes, values, strict=True):
        if axis.kind == "alloy":
            doc = virtual_crystal(doc, spec.alloy_end, value, spec.source, spec.alloy_source)
    for axis, value in zip(spec.axes, values, strict=True):
        if axis.kind == "document":
            set_value(doc, axis.key, value, spec.source)
    strain = point_strain(spec, values)
    if np.any(strain) and spec.kind != "k·p":  # a k·p file takes the strain in its model
        reference = parse_material(doc, spec.source)
        d = reference.dimension
        deform = np.eye(d) + strain[:d, :d]
        vectors = reference.vectors_A @ deform.T
        doc["lattice"] = {"type": "vectors", "vectors_A": vectors.tolist(),
                          "a_A": reference.a_A}
        # the sublattices of a diamond/zincblende cell shift under shear (Kleinman's ζ)
        moves = internal_displacements(reference, strain, internal_strain_parameter(reference)[0])
        if np.any(moves):
            shift = moves[:, :d] @ np.linalg.inv(vectors)
            for atom, ref, s in zip(doc["atoms"], reference.atoms, shift, strict=True):
                atom["position"] = (np.asarray(ref.position_frac) + s).tolist()
    return doc


def point_strain(spec: SweepSpec, values: tuple[float, ...]) -> np.ndarray:
    """The strain tensor at one parameter point (the sum of the ``strain.*`` axes)."""
    strain = np.zeros((3, 3))
    for axis, value in zip(spec.axes, values, strict=True):
        if axis.kind == "strain":
            strain += strain_tensor(axis.key, value)
    return strain


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



def parameter_grid(axes: tuple[SweepAxis, ...]) -> np.ndarray:
    """All combinations of the axis values, (n_points, n_axes), the last axis fastest."""
    return np.array(list(itertools.product(*(a.values for a in axes))), dtype=float).reshape(
        -1, len(axes))
