"""Subbands of a heterostructure: the levels, envelope functions and transitions at k∥ = 0.

:func:`compute_subbands` is the library entry point: a :class:`~bandpert.input.structure_file.
Structure` in, a :class:`SubbandResult` (numpy arrays, units in the names) out. Energies are on
the common scale of the structure's valence-band offsets (eV). The one-band model solves the
conduction, heavy-hole and light-hole bands separately with BenDaniel–Duke conditions
(:mod:`.one_band`) and band-edge masses along [001] (:mod:`.grid`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from ..errors import InputError
from ..input.structure_file import Structure
from .grid import build_grid, layer_edges
from .multiband import MULTIBAND_MODELS, layer_matrices, multiband_levels
from .one_band import one_band_levels

__all__ = ["BANDS", "MODELS", "SubbandResult", "compute_subbands"]

#: Models of :func:`compute_subbands`.
MODELS: tuple[str, ...] = ("one-band", *MULTIBAND_MODELS)

#: Character of each eight-band basis state (the multiband levels are named by the largest).
_CHARACTER = ("conduction", "conduction", "heavy hole", "light hole", "light hole",
              "heavy hole", "split-off", "split-off")

#: The bands of the one-band model, with the prefix of their level labels.
BANDS: dict[str, str] = {"conduction": "E", "heavy hole": "HH", "light hole": "LH"}

FloatArray = NDArray[np.float64]


@dataclass(frozen=True, eq=False)
class SubbandResult:
    """Subbands at k∥ = 0 (:func:`compute_subbands`).

    Attributes
    ----------
    name, source, file : str
        The structure's.
    model : str
    spacing_nm : float
    periodic : bool
    z_nm : ndarray (n,)
        Node positions.
    interfaces_nm : ndarray
        Layer boundaries (the two ends included).
    edges_eV : dict
        Band name → band edge on the nodes (common scale).
    levels_eV : dict
        Band name → levels (electrons upward, holes downward from the top); for a periodic
        structure the levels at q = 0.
    labels : dict
        Band name → level labels ("E1", "HH1", ...).
    densities_per_nm : dict
        Band name → |ψ|² on the nodes, shape (n_levels, n), each integrating to 1 over z in nm.
    bound : dict
        Band name → bool per level: below the barriers at both ends (electrons; above for
        holes); always True for a periodic structure.
    miniband_edge_eV : dict or None
        Periodic: band name → the levels at q = π/d (the other edge of each miniband).
    transitions_eV : dict
        "E1-HH1" style labels → energy differences: interband E_n − HH_n, E_n − LH_n and
        intersubband E_n − E_1.
    notes : tuple of str
    """

    name: str
    source: str
    file: str
    model: str
    spacing_nm: float
    periodic: bool
    z_nm: FloatArray
    interfaces_nm: FloatArray
    edges_eV: dict[str, FloatArray]
    levels_eV: dict[str, FloatArray]
    labels: dict[str, tuple[str, ...]]
    densities_per_nm: dict[str, FloatArray]
    bound: dict[str, NDArray[np.bool_]]
    miniband_edge_eV: dict[str, FloatArray] | None
    transitions_eV: dict[str, float]
    notes: tuple[str, ...] = field(default_factory=tuple)


def compute_subbands(structure: Structure, spacing_nm: float = 0.1, n_levels: int = 3,
                     model: str = "one-band") -> SubbandResult:
    """Levels and envelope functions of the structure at k∥ = 0.

    Parameters
    ----------
    structure : Structure
    spacing_nm : float
        Grid spacing h; every layer thickness must be a multiple of it.
    n_levels : int
        Levels per band (1 to 50).
    model : str
        One of :data:`MODELS`.

    Raises
    ------
    InputError
        For an unknown model, a bad ``n_levels`` or ``spacing_nm``, or a layer without the
        parameters the model needs.
    """
    if model not in MODELS:
        raise InputError(f"'{model}' is not one of {', '.join(MODELS)}", key="model")
    if not 1 <= n_levels <= 50:
        raise InputError(f"expected 1 to 50 levels per band, got {n_levels}", key="n_levels")
    grid = build_grid(structure, spacing_nm)
    layers = layer_edges(structure)
    edges = {"conduction": grid.on_nodes([e.conduction_eV for e in layers]),
             "heavy hole": grid.on_nodes([e.heavy_hole_eV for e in layers]),
             "light hole": grid.on_nodes([e.light_hole_eV for e in layers])}
    masses = {"conduction": grid.on_nodes([e.m_e for e in layers]),
              "heavy hole": grid.on_nodes([e.m_hh for e in layers]),
              "light hole": grid.on_nodes([e.m_lh for e in layers])}
    levels, densities, bound, labels = {}, {}, {}, {}
    top: dict[str, FloatArray] | None = {} if structure.periodic else None
    if model != "one-band":
        phase = 0.0 if structure.periodic else None
        levels, densities = _multiband(structure, grid, layers, model, n_levels, phase)
        if structure.periodic:  # the other miniband edges, band by band in the same order
            other = _multiband(structure, grid, layers, model, n_levels, math.pi)[0]
            top = {b: np.resize(other.get(b, np.full(e.size, np.nan)), e.size)
                   for b, e in levels.items()}
        for band, e in levels.items():
            labels[band] = tuple(f"{BANDS[band]}{i + 1}" for i in range(e.size))
            outer = edges[band][[0, -1]]
            bound[band] = (np.ones(e.size, dtype=bool) if structure.periodic
                           else e > outer.max() if band != "conduction" else e < outer.min())
    for band, prefix in (BANDS.items() if model == "one-band" else ()):
        hole = band != "conduction"
        phase = 0.0 if structure.periodic else None
        e, psi = one_band_levels(edges[band], masses[band], grid.spacing_A, n_levels, hole,
                                 phase)
        levels[band] = e
        densities[band] = (np.abs(psi.T) ** 2) * 10.0  # Å⁻¹ → nm⁻¹
        labels[band] = tuple(f"{prefix}{i + 1}" for i in range(e.size))
        if structure.periodic:
            bound[band] = np.ones(e.size, dtype=bool)
            top[band] = one_band_levels(edges[band], masses[band], grid.spacing_A, n_levels,
                                        hole, math.pi)[0]
        else:
            outer = edges[band][[0, -1]]
            bound[band] = e > outer.max() if hole else e < outer.min()
    transitions = _transitions(levels, labels, bound)
    notes = tuple(dict.fromkeys(layer.note for layer in structure.layers if layer.note))
    return SubbandResult(
        name=structure.name, source=structure.source, file=structure.file, model=model,
        spacing_nm=float(spacing_nm), periodic=structure.periodic, z_nm=grid.z_A / 10.0,
        interfaces_nm=grid.interfaces_A / 10.0, edges_eV=edges, levels_eV=levels,
        labels=labels, densities_per_nm=densities, bound=bound, miniband_edge_eV=top,
        transitions_eV=transitions, notes=notes)


def _multiband(structure, grid, layers, model, n_levels, phase):
    """Levels (one per Kramers pair) and densities of a multiband model, named by character
    (``phase``: the Bloch phase q·d of a periodic structure, None when bounded)."""
    mats = layer_matrices(structure, model)
    basis = MULTIBAND_MODELS[model]
    sides = [("heavy hole", "down", max(max(e.heavy_hole_eV, e.light_hole_eV) for e in layers)
              + 1e-3)]
    if model == "eight-band":
        sides.insert(0, ("conduction", "up", min(e.conduction_eV for e in layers) - 1e-3))
    levels: dict[str, list] = {}
    dens: dict[str, list] = {}
    for kind, side, sigma in sides:
        count = n_levels if kind == "conduction" else 2 * n_levels + 2
        e, psi = multiband_levels(grid, mats, model, count, sigma, side, phase=phase)
        weight = np.sum(np.abs(psi) ** 2, axis=(0, 3))  # (n, pairs)
        names = np.array([_CHARACTER[b] for b in basis])
        for j in range(e.size):
            char = max(("conduction", "heavy hole", "light hole", "split-off"),
                       key=lambda c, j=j: float(weight[names == c, j].sum()))
            if char == "split-off" or len(levels.get(char, [])) >= n_levels:
                continue
            levels.setdefault(char, []).append(float(e[j]))
            rho = 0.5 * np.sum(np.abs(psi[:, :, j, :]) ** 2, axis=(1, 2)) * grid.spacing_A
            dens.setdefault(char, []).append(rho / grid.spacing_A * 10.0)  # nm⁻¹
    order = [b for b in BANDS if b in levels]
    return ({b: np.array(levels[b]) for b in order},
            {b: np.array(dens[b]) for b in order})


def _transitions(levels, labels, bound) -> dict[str, float]:
    out: dict[str, float] = {}
    if "conduction" not in levels:
        return out
    ce, cl, cb = levels["conduction"], labels["conduction"], bound["conduction"]
    for hole in ("heavy hole", "light hole"):
        if hole not in levels:
            continue
        he, hl, hb = levels[hole], labels[hole], bound[hole]
        for i in range(min(ce.size, he.size)):
            if cb[i] and hb[i]:
                out[f"{cl[i]}-{hl[i]}"] = float(ce[i] - he[i])
    for i in range(1, ce.size):
        if cb[i] and cb[0]:
            out[f"{cl[i]}-{cl[0]}"] = float(ce[i] - ce[0])
    return out
