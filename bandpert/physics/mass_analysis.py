"""What ``bandpert masses`` computes: masses at the band edges or at one point, with the
deformation potentials and the k·p parameters the model implies where they apply.

One library call, :func:`compute_masses`, returns a :class:`MassesResult`; the command only
parses its options, calls it, prints and writes.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from ..crystal.lattice import point_group_rotations
from ..errors import InputError
from ..input.material import Material
from ..input.reader import read_toml_document
from ..planewave.solver import Progress
from .bands import BandStructure, compute_band_structure
from .deformation import STRAIN_FOLLOWING_FORMS, DeformationPotentials
from .deformation_fit import material_deformation_potentials
from .kp_from_planewave import ExtractedParameters, extract_kp_parameters, kp_material_text
from .masses import BandMasses, band_masses, edge_masses
from .nfe_gaps import resolve_points

#: k-points of the path on which the band edges are first looked for (then refined in 3D).
MASSES_PATH_POINTS = 120


@dataclass(frozen=True)
class MassesResult:
    """Masses at the band edges of a semiconductor, or of one band at one point.

    Attributes
    ----------
    bands : BandStructure
        Exact bands along the path (their energy zero is the run's).
    entries : tuple of BandMasses
        Conduction minimum and valence maximum, or the one requested band.
    locations : tuple of str
        Where each entry is, in words ("0.85 of Γ→X (refined)", "X").
    at_edges : bool
        True for the band-edge request, False for a point and band.
    band : int or None
        The band requested (1-based), None at the band edges.
    temperature_K : float
    deformation : DeformationPotentials or None
        At the band edges of a 3D semiconductor with tabulated or continuous form factors.
    deformation_note : str or None
        How v(q) follows the strain (said in every output).
    implied_kp : ExtractedParameters or None
        Kane and Luttinger parameters the model implies at Γ (band-edge request, or on demand).
    implied_kp_text : str or None
        The same as a k·p parameter file.
    """

    bands: BandStructure
    entries: tuple[BandMasses, ...]
    locations: tuple[str, ...]
    at_edges: bool
    band: int | None
    temperature_K: float
    deformation: DeformationPotentials | None
    deformation_note: str | None
    implied_kp: ExtractedParameters | None
    implied_kp_text: str | None

    @property
    def energy_zero_eV(self) -> float:
        """The run's energy zero (absolute eV)."""
        return self.bands.energy_zero_eV

    @property
    def energy_zero_kind(self) -> str:
        """"valence-band maximum", "Fermi level" or "absolute"."""
        return self.bands.energy_zero_kind

    @property
    def warnings(self) -> tuple[str, ...]:
        """The warnings of the entries, each once, in order."""
        return tuple(dict.fromkeys(m.critical_point.warning for m in self.entries
                                   if m.critical_point.warning))


def compute_masses(material: Material, *, point: str | ArrayLike | None = None,
                   band: int | None = None, temperature_K: float = 300.0,
                   cutoff_eV: float | None = None, implied_kp: bool | None = None,
                   document: dict[str, Any] | None = None,
                   progress: Progress | None = None) -> MassesResult:
    """Masses at the band edges (default) or of ``band`` at ``point``.

    Band edges: the conduction minimum and valence maximum found on the path and refined in
    3D (:func:`bandpert.physics.masses.edge_masses`), and, for a 3D semiconductor, the
    deformation potentials (:func:`bandpert.physics.deformation_fit
    .material_deformation_potentials`). A point: the band's classification and masses
    (:func:`bandpert.physics.masses.band_masses`; default band the lowest empty one).

    Parameters
    ----------
    material : Material
    point : str or array_like, optional
        A path label (``G``/``Gamma`` for Γ) or fractional coordinates; with ``band`` alone,
        Γ.
    band : int, optional
        1-based band number at ``point``.
    temperature_K : float
        For N_c and N_v.
    cutoff_eV : float, optional
        Plane-wave cutoff (default: the file's, else the converged one).
    implied_kp : bool, optional
        Also extract the k·p parameters the model implies at Γ (default: for the band-edge
        request only; it says nothing about a band at another point).
    document : dict, optional
        The material's TOML document, for the strain-following v(q) of the deformation
        potentials (default: read from ``material.file``).
    progress : callable, optional
        Progress of the path diagonalisation.

    Raises
    ------
    InputError
        A non-positive cutoff or temperature (``cutoff_eV``, ``temperature_K``), a band below
        1 or beyond the basis (``band``), an unknown point (``points``), or band edges asked
        of a crystal without a gap.
    """
    if cutoff_eV is not None and not cutoff_eV > 0:
        raise InputError(f"must be positive, got {cutoff_eV}", key="cutoff_eV")
    if band is not None and band < 1:
        raise InputError(f"must be at least 1, got {band}", key="band")
    if not temperature_K > 0:
        raise InputError(f"expected a positive temperature, got {temperature_K}",
                         key="temperature_K")
    at_edges = point is None and band is None
    bs = compute_band_structure(material, n_k=MASSES_PATH_POINTS, cutoff_eV=cutoff_eV,
                                progress=progress)
    deformation = note = None
    if at_edges:
        edges, entries = edge_masses(bs, temperature_K)
        locations = [e.where for e in edges]
        if material.dimension == 3 and material.potential.form in STRAIN_FOLLOWING_FORMS:
            doc = document if document is not None else read_toml_document(material.file)
            deformation, note = material_deformation_potentials(material, doc, bs, edges)
    else:
        label, k_frac, _ = resolve_points(material, ["Γ" if point is None else point])[0]
        n_el = material.valence_electrons
        b = band - 1 if band is not None else (n_el // 2 if n_el else 0)
        k_cart = np.asarray(k_frac) @ bs.model.reciprocal_invA
        entries = [band_masses(material, bs.model, k_cart, b, point_group_rotations(material),
                               temperature_K, f"band {b + 1} at {label}", where=label)]
        locations = [label]
    extracted = text = None
    if (at_edges if implied_kp is None else implied_kp) and material.dimension == 3 \
            and material.valence_electrons:
        try:
            extracted = extract_kp_parameters(material, bs.model)
        except InputError:
            extracted = None
        if extracted is not None:
            text = kp_material_text(material, extracted)
    return MassesResult(bands=bs, entries=tuple(entries), locations=tuple(locations),
                        at_edges=at_edges, band=band, temperature_K=temperature_K,
                        deformation=deformation, deformation_note=note, implied_kp=extracted,
                        implied_kp_text=text)
