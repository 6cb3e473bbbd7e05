"""Heterostructure files: layers of k·p materials along a growth axis (TOML in, a validated,
frozen :class:`Structure` out).

Schema
------
Thicknesses in nm, energies in eV; unknown keys are refused; every problem is one
:class:`~bandpert.errors.InputError` naming the file and the dotted key. ::

    name = "GaAs/Al0.3Ga0.7As well"            # required
    source = "..."                              # required: where the design comes from
    note = "..."                                # optional
    growth = "001"                              # optional: growth direction, "001" (default),
                                                # "110" or "111"
    substrate = "gallium-arsenide"              # optional: a k·p file or bundled name, or a
                                                # lattice constant in Å; every layer is then
                                                # strained pseudomorphically (needs their
                                                # [elastic] and [deformation] tables)
    periodic = false                            # optional: true makes the layers one period
                                                # of a superlattice

    [[layers]]                                  # at least one
    material = "aluminium-arsenide"             # a k·p file (relative to this file) or a
                                                # bundled name; or, for an alloy:
    alloy = "aluminium-gallium-arsenide"        # a bowing file (relative or bundled) ...
    x = 0.3                                     # ... and its composition, 0 ≤ x ≤ 1
    thickness_nm = 10.0                         # > 0
    valence_band_eV = -0.96                     # optional: the layer's unstrained valence-band
                                                # top on the common scale (default: the
                                                # material's alignment.valence_band_eV)

Band offsets come from the valence-band tops on one common scale (Vurgaftman, Meyer &
Ram-Mohan, J. Appl. Phys. 89, 5815 (2001), their VBO column, carried by the bundled k·p files
and interpolated in alloys), and the conduction edge is the valence top plus the Γ gap.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..data import find_material
from ..errors import InputError, ModelWarning
from .alloy_file import ALLOYS_KIND, local_or_bundled, parse_alloy
from .kp_file import KPMaterial, parse_kp_material
from .reader import TableReader, describe, read_header, read_toml_document

__all__ = ["GROWTH_AXES", "STRUCTURES_KIND", "Layer", "Structure", "load_structure",
           "parse_structure"]

#: Folder of the bundled structure files (``find_material(name, STRUCTURES_KIND)``): example
#: structures found by name, e.g. ``load_structure("gallium-arsenide-well")``.
STRUCTURES_KIND = "structures"

#: Growth directions a structure file may name (the k·p Hamiltonian is rotated into the
#: growth frame: :mod:`bandpert.heterostructure.multiband`).
GROWTH_AXES: tuple[str, ...] = ("001", "110", "111")

#: Largest total thickness, nm (the grid stays linear in memory, but a micrometre of quantum
#: well is not a quantum well).
MAX_TOTAL_NM = 2000.0

#: Most layers in a file.
MAX_LAYERS = 2000


@dataclass(frozen=True, eq=False)
class Layer:
    """One layer.

    Attributes
    ----------
    material : KPMaterial
        The layer's k·p parameters (an alloy already interpolated).
    thickness_nm : float
    valence_band_eV : float
        Unstrained valence-band top on the common scale.
    label : str
        Short name for tables ("GaAs file name" or "alloy, x = 0.3").
    note : str
        A warning about the layer ("" when none), e.g. a valley below Γ.
    """

    material: KPMaterial
    thickness_nm: float
    valence_band_eV: float
    label: str
    note: str = ""


@dataclass(frozen=True, eq=False)
class Structure:
    """A validated heterostructure file (module docstring)."""

    name: str
    source: str
    note: str
    file: str
    growth: str
    substrate_a_A: float | None
    periodic: bool
    layers: tuple[Layer, ...]

    @property
    def total_nm(self) -> float:
        """Total thickness (one period when periodic), nm."""
        return float(sum(layer.thickness_nm for layer in self.layers))




def _layer(r: TableReader, folder: Path, cache: dict) -> Layer:
    has_material, has_alloy = r.has("material"), r.has("alloy")
    if has_material == has_alloy:
        raise r.fail("material", "expected exactly one of material (a k·p file) or alloy (a "
                                 "bowing file with x)")
    note = ""
    if has_material:
        name = r.string("material")
        try:
            path = local_or_bundled(name, folder, "kp")
            if path not in cache:
                doc = read_toml_document(path, "a k·p parameter TOML file")
                cache[path] = parse_kp_material(doc, str(path))
        except InputError as exc:
            raise r.fail("material", f"'{name}' cannot be used: {exc.one_line()}") from None
        material, label = cache[path], Path(name).stem
    else:
        name = r.string("alloy")
        x = r.number("x", bounds=(0.0, 1.0), meaning="the fraction of the second end member")
        try:
            path = local_or_bundled(name, folder, ALLOYS_KIND)
            if path not in cache:
                doc = read_toml_document(path, "a bowing TOML file")
                cache[path] = parse_alloy(doc, str(path), path.parent)
            alloy = cache[path]
            material = alloy.at(x)
        except InputError as exc:
            raise r.fail("alloy", f"'{name}' cannot be used: {exc.one_line()}") from None
        note = alloy.valley_note(x)
        label = f"{Path(name).stem}, x = {x:g}"
    thickness = r.number("thickness_nm", positive=True, bounds=(1e-3, MAX_TOTAL_NM),
                         meaning="nm")
    valence = r.number("valence_band_eV", required=False, bounds=(-20.0, 20.0), meaning="eV")
    if valence is None:
        valence = material.valence_band_eV
    if valence is None:
        raise r.fail("valence_band_eV", f"missing, and {label} has no alignment.valence_band_eV;"
                                        " expected the layer's valence-band top on the common "
                                        "scale (the band offsets)")
    r.finish()
    return Layer(material, thickness, valence, label, note)


def parse_structure(doc: dict[str, Any], source: str = "", folder: Path | None = None
                    ) -> Structure:
    """Validate a parsed structure document (module docstring) into a :class:`Structure`.

    Warnings (:class:`~bandpert.errors.ModelWarning`) for a layer whose lowest conduction
    valley is not Γ.
    """
    r, name, src, note = read_header(doc, source)
    folder = folder if folder is not None else Path(source).parent
    growth = r.string("growth", required=False, default="001", choices=GROWTH_AXES)
    periodic = r.raw("periodic", required=False)
    if periodic is not None and not isinstance(periodic, bool):
        raise r.fail("periodic", f"expected true or false, got {describe(periodic)}")
    substrate = r.raw("substrate", required=False)
    substrate_a = None
    if isinstance(substrate, str):
        try:
            path = local_or_bundled(substrate, folder, "kp")
            sub = parse_kp_material(read_toml_document(path, "a k·p parameter TOML file"),
                                    str(path))
        except InputError as exc:
            raise r.fail("substrate", f"'{substrate}' cannot be used: {exc.one_line()}") from None
        substrate_a = sub.a_A
    elif substrate is not None:
        if isinstance(substrate, bool) or not isinstance(substrate, int | float) or not (
                math.isfinite(substrate) and 1.0 <= substrate <= 20.0):
            raise r.fail("substrate", f"expected a k·p file name or a lattice constant in Å "
                                      f"(1 to 20), got {describe(substrate)}")
        substrate_a = float(substrate)
    raw_layers = r.raw("layers")
    if not isinstance(raw_layers, list) or not raw_layers:
        raise r.fail("layers", "expected a non-empty array of [[layers]] tables")
    if len(raw_layers) > MAX_LAYERS:
        raise r.fail("layers", f"{len(raw_layers)} layers; expected at most {MAX_LAYERS}")
    layers = []
    cache: dict = {}
    for i, entry in enumerate(raw_layers):
        if not isinstance(entry, dict):
            raise r.fail(f"layers[{i}]", f"expected a table, got {describe(entry)}")
        layer = _layer(TableReader(entry, source, f"layers[{i}]."), folder, cache)
        if substrate_a is not None and (layer.material.elastic is None
                                        or layer.material.deformation is None):
            raise InputError(f"{layer.label} has no [elastic] or [deformation] table; a "
                             "substrate strains every layer, expected both", source,
                             f"layers[{i}]")
        layers.append(layer)
    r.finish()
    total = sum(layer.thickness_nm for layer in layers)
    if total > MAX_TOTAL_NM:
        raise InputError(f"the layers add up to {total:g} nm; expected at most "
                         f"{MAX_TOTAL_NM:g} nm", source, "layers")
    for text in dict.fromkeys(layer.note for layer in layers if layer.note):
        warnings.warn(text, ModelWarning, stacklevel=2)
    return Structure(name, src, note, source, growth, substrate_a, bool(periodic),
                     tuple(layers))


def load_structure(path: str | Path) -> Structure:
    """Read and validate a structure file (module docstring), or a bundled one by name
    (:data:`STRUCTURES_KIND`; a path that exists always wins)."""
    path = find_material(path, STRUCTURES_KIND)
    doc = read_toml_document(path, "a heterostructure TOML file")
    return parse_structure(doc, str(path), path.parent)
