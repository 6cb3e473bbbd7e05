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
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..crystal.lattice import point_group_rotations, standard_path
from ..errors import InputError
from ..input.kp_file import parse_kp_material
from ..input.material import Material, canonical_label, parse_material
from ..physics.bands import default_bands
from ..physics.deformation_fit import strain_following_document
from ..planewave.cutoff import choose_cutoff
from ..planewave.model import build_model
from ..runs.execution import SERIAL, Engine, Outcome, Progress, run
from ..units import HBAR2_OVER_2M0_EV_A2
from .sweep_point import evaluate_point
from .sweep_spec import (
    BASIS_MODES,
    FORM_FACTOR_MODES,
    MAX_POINTS,
    QUANTITIES,
    SweepAxis,
    SweepSpec,
    check_axis_ranges,
    is_kp_document,
    parameter_grid,
    point_cutoff,
    point_document,
    point_material,
)


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
    converged default of :func:`~bandpert.planewave.cutoff.converged_cutoff`) is the reference
    cutoff.
    First of all, every axis's START and STOP are checked against the range its key accepts
    (:func:`~bandpert.runs.sweep_spec.check_axis_ranges`, on the document alone); then the
    first and last parameter points are built and validated here, so a range that leaves the
    physical domain is refused before the sweep runs.

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
    check_axis_ranges(document, tuple(axes), source)  # before any work, in the sweep's terms
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
    window = strain_note = ""
    strained = any(a.kind == "strain" for a in axes)
    if form_factors == "continuous":
        tabulated = reference
        # the file's measured deformation potentials fix the slopes of v(q) at the shells
        strain_fit = strain_following_document(doc, source, cutoff_eV)
        doc = strain_fit.document
        strain_note = "; " + strain_fit.note
        reference = parse_material(doc, source)
        lo, hi = faithful_window(tabulated, reference.potential.taper_invA)
        window = (f"; it equals the tabulated model exactly for a/a_ref in [{lo:.4f}, {hi:.4f}] "
                  f"(a = {lo * tabulated.a_A:.4g}–{hi * tabulated.a_A:.4g} Å); beyond, the "
                  "taper changes the weights of the outer shells smoothly, and the column "
                  "faithful_window says so at every such point" + strain_note)
    if reference.path is None:  # keep the reference labels: a strained cell has lower symmetry
        pts, legs = standard_path(reference)
        doc["path"] = {"points": {k: list(v) for k, v in pts.items()},
                       "legs": [list(leg) for leg in legs]}
        reference = parse_material(doc, source)
    if alloy_end is not None and "path" not in alloy_end:
        alloy_end["path"] = copy.deepcopy(doc["path"])
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
        lower_band = (n_el or 2) // reference.electrons_per_band
    if lower_band < 1 or lower_band >= nb:
        raise InputError(f"band {lower_band} must lie between 1 and {nb - 1} (bands computed: "
                         f"{nb})", source, "lower_band")
    if "masses" in quantities and (reference.spin_orbit or reference.nonlocal_terms):
        raise InputError("the masses of a sweep come from the sum over states of the local "
                         "spinless model and the material has spin-orbit or nonlocal terms; "
                         "expected quantities edges or gaps", source, "quantities")
    if ({"edges", "masses", "deformation"} & set(quantities)
            and (n_el is None or n_el % 2)):
        raise InputError("edges, masses and deformation potentials need a semiconductor: an "
                         "even electrons.valence", source, "electrons.valence")
    if "deformation" in quantities and (reference.potential.form != "continuous"
                                        or reference.dimension != 3):
        raise InputError("deformation potentials need a 3D crystal whose v(q) follows the "
                         "strain; expected form_factors continuous", source, "form_factors")
    labels = tuple(dict.fromkeys(x for leg in reference.path.legs for x in leg))
    if points:
        chosen = []
        for p in points:
            name = canonical_label(p)
            if name not in labels:
                raise InputError(f"'{p}' is not a label of the path ({', '.join(labels)})",
                                 source, "points")
            chosen.append(name)
        labels = tuple(dict.fromkeys(chosen))
    # the cutoff rule converges the spinless local bands (as compute_band_structure does)
    cutoff = choose_cutoff(reference.local_spinless(), -(-nb * reference.electrons_per_band // 2),
                           cutoff_eV, check_convergence=False)
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
        # a range leaving the basis limit fails here
        build_model(m, point_cutoff(spec, m), spin_orbit=True)
    return spec, reference, form_factor_note(reference, spec.axes, form_factors, window)


def _prepare_kp(doc: dict[str, Any], source: str, axes: tuple[SweepAxis, ...],
                alloy_end: dict[str, Any] | None, alloy_source: str, form_factors: str):
    """:func:`prepare` for a k·p parameter file: masses at Γ of each model, nothing else."""
    if form_factors != "tabulated":
        raise InputError("a k·p parameter file has no form factors", source, "form_factors")
    reference = parse_kp_material(doc, source)
    strained = any(a.kind == "strain" for a in axes)
    if strained and reference.deformation is None:
        raise InputError("missing; a strain.* axis on a k·p file needs its deformation "
                         "potentials (a table with a_v_convention, a_c_eV, a_v_eV, b_eV, d_eV)",
                         source, "deformation")
    if strained and reference.models == ("two-band",):
        raise InputError("strain needs the six- or eight-band model", source, "models")
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
    if strained:
        note += ("; strain by the file's deformation potentials (Bir–Pikus) in the six- and "
                 "eight-band models, Γ edges from the unstrained valence-band top")
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
