"""Subbands of a heterostructure: the levels, envelope functions and transitions at k∥ = 0.

:func:`compute_subbands` is the library entry point: a :class:`~bandpert.input.structure_file.
Structure` in, a :class:`SubbandResult` (numpy arrays, units in the names) out. Energies are on
the common scale of the structure's valence-band offsets (eV). The one-band model solves the
conduction, heavy-hole and light-hole bands separately with BenDaniel–Duke conditions
(:mod:`.one_band`) and band-edge masses along the growth direction (:mod:`.grid`).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from ..errors import InputError, ModelWarning
from ..input.structure_file import Structure
from ..kp import piezoelectric_note
from .grid import build_grid, growth_frame, layer_edges
from .multiband import MULTIBAND_MODELS, layer_matrices, multiband_levels
from .one_band import one_band_levels

__all__ = ["BANDS", "MODELS", "SubbandResult", "compute_subbands"]

#: Models of :func:`compute_subbands`.
MODELS: tuple[str, ...] = ("one-band", *MULTIBAND_MODELS)

#: J = 3/2 magnetic quantum numbers of the eight-band basis states 2–5 (Γ8: +3/2, +1/2,
#: −1/2, −3/2; :mod:`bandpert.kp.hamiltonians`, Condon–Shortley phases).
_GAMMA8_M = (1.5, 0.5, -0.5, -1.5)


def character_projectors(growth: str) -> dict[str, NDArray]:
    """Projectors (8, 8) on the conduction, heavy-hole, light-hole and split-off characters,
    heavy and light holes quantised along the growth direction n: the eigenvectors of J·n in
    the Γ8 block with |m| = 3/2 and 1/2 (at k∥ = 0 these are the states that decouple for
    [001] and [111] growth; for [110] the nearest in character). A multiband level is named
    by its largest projection.
    """
    m = np.array(_GAMMA8_M)
    jp = np.zeros((4, 4))
    for i in range(1, 4):  # J+|m⟩ = √(j(j+1) − m(m+1)) |m+1⟩, j = 3/2
        jp[i - 1, i] = math.sqrt(3.75 - m[i] * (m[i] + 1.0))
    j = (0.5 * (jp + jp.T), -0.5j * (jp - jp.T), np.diag(m))
    n = growth_frame(growth)[2]
    vals, vecs = np.linalg.eigh(sum(n[i] * j[i] for i in range(3)))
    out = {c: np.zeros((8, 8), dtype=complex) for c in ("conduction", "heavy hole",
                                                        "light hole", "split-off")}
    out["conduction"][[0, 1], [0, 1]] = 1.0
    out["split-off"][[6, 7], [6, 7]] = 1.0
    for name, pick in (("heavy hole", np.abs(vals) > 1.0), ("light hole", np.abs(vals) < 1.0)):
        v = vecs[:, pick]
        out[name][2:6, 2:6] = v @ v.conj().T
    return out

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
    growth : str
        Growth direction ("001", "110", "111"); z runs along it.
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
    growth: str
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
    piezo = [piezoelectric_note(e.strain) for e in layers if e.strain is not None]
    for text in dict.fromkeys(t for t in piezo if t):
        warnings.warn(text, ModelWarning, stacklevel=2)
    notes = tuple(dict.fromkeys([layer.note for layer in structure.layers if layer.note]
                                + [t for t in piezo if t]))
    return SubbandResult(
        name=structure.name, source=structure.source, file=structure.file, model=model,
        spacing_nm=float(spacing_nm), periodic=structure.periodic, growth=structure.growth,
        z_nm=grid.z_A / 10.0,
        interfaces_nm=grid.interfaces_A / 10.0, edges_eV=edges, levels_eV=levels,
        labels=labels, densities_per_nm=densities, bound=bound, miniband_edge_eV=top,
        transitions_eV=transitions, notes=notes)


def _multiband(structure, grid, layers, model, n_levels, phase):
    """Levels (one per Kramers pair) and densities of a multiband model, named by character
    (``phase``: the Bloch phase q·d of a periodic structure, None when bounded)."""
    mats = layer_matrices(structure, model)
    keep = np.ix_(MULTIBAND_MODELS[model], MULTIBAND_MODELS[model])
    projectors = {c: p[keep] for c, p in character_projectors(structure.growth).items()}
    sides = [("heavy hole", "down", max(max(e.heavy_hole_eV, e.light_hole_eV) for e in layers)
              + 1e-3)]
    if model == "eight-band":
        sides.insert(0, ("conduction", "up", min(e.conduction_eV for e in layers) - 1e-3))
    levels: dict[str, list] = {}
    dens: dict[str, list] = {}
    for kind, side, sigma in sides:
        count = n_levels if kind == "conduction" else 2 * n_levels + 2
        e, psi = multiband_levels(grid, mats, model, count, sigma, side, phase=phase)
        weight = {c: np.real(np.einsum("zaps,ab,zbps->p", psi.conj(), proj, psi))
                  for c, proj in projectors.items()}  # (pairs,) per character
        for j in range(e.size):
            char = max(weight, key=lambda c, j=j: float(weight[c][j]))
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
