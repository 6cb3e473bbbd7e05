r"""The growth-axis grid of a heterostructure and the band parameters on it.

Nodes sit at the centres of cells of width h, z_i = (i + ½) h, so every interface (a multiple of
h from the start) falls on a half-node: each node lies inside one layer and takes its
parameters, and a quantity needed between two nodes (the inverse mass of the kinetic term)
is formed there (:func:`half_node_inverse`). With the interface on a node the error of the
levels falls only as h; on half-nodes it falls as h² (the tests measure it).

Per layer (:class:`LayerEdges`): the strain of pseudomorphic growth on the substrate
(:func:`bandpert.kp.pseudomorphic_strain` along the structure's growth direction), the band
edges at Γ on the common energy scale (valence-band top of the unstrained layer + the strained
six- or eight-band levels of :func:`bandpert.kp.material_model`), and the band-edge masses
along z: m_e from the eight-band relation (:func:`~bandpert.kp.conduction_inverse_mass`),
heavy and light holes from Luttinger's bulk dispersion along the growth direction
(:func:`~bandpert.kp.luttinger_inverse_masses`: m0/(γ1 ∓ 2γ2) along [001], m0/(γ1 ∓ 2γ3)
along [111], m0/(γ1 ∓ √(γ2² + 3γ3²)) along [110]; Luttinger 1956).

The frame of a structure (:func:`growth_frame`): z along the growth direction, x and y two
in-plane axes, all in cubic crystal coordinates; the multiband operator is written in it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from ..errors import InputError
from ..input.structure_file import Structure
from ..kp import (
    conduction_inverse_mass,
    luttinger_inverse_masses,
    material_model,
    pseudomorphic_strain,
)

__all__ = ["IN_PLANE_AXES", "Grid", "LayerEdges", "build_grid", "growth_frame",
           "half_node_inverse", "layer_edges"]

#: Growth direction → (in-plane x, in-plane y) in cubic axes, Miller-index labels; x × y is
#: the growth direction (a right-handed frame). [110]: x = [-110], y = [001];
#: [111]: x = [1-10], y = [11-2].
IN_PLANE_AXES: dict[str, tuple[str, str]] = {
    "001": ("100", "010"), "110": ("-110", "001"), "111": ("1-10", "11-2")}


def _miller(label: str) -> FloatArray:
    """"1-10" → (1, −1, 0) as a unit vector."""
    digits, sign = [], 1.0
    for ch in label:
        if ch == "-":
            sign = -1.0
            continue
        digits.append(sign * float(ch))
        sign = 1.0
    v = np.array(digits)
    return v / np.linalg.norm(v)


def growth_frame(growth: str) -> FloatArray:
    """R (3, 3): rows are the frame's x, y, z (z = growth) in cubic axes; k_cubic = Rᵀ k_frame.

    Raises
    ------
    InputError
        A growth direction without a frame (key ``growth``).
    """
    if growth not in IN_PLANE_AXES:
        raise InputError(f"no frame for growth along '{growth}'; expected one of "
                         f"{', '.join(IN_PLANE_AXES)}", key="growth")
    x, y = (_miller(a) for a in IN_PLANE_AXES[growth])
    return np.array([x, y, np.cross(x, y)])

FloatArray = NDArray[np.float64]

#: How far (relative) a thickness may be from a whole number of grid cells.
_CELL_TOL = 1e-6


@dataclass(frozen=True, eq=False)
class LayerEdges:
    """Band edges at Γ (common scale, eV) and masses along z (m0) of one layer.

    Attributes
    ----------
    conduction_eV, heavy_hole_eV, light_hole_eV, split_off_eV : float
    m_e, m_hh, m_lh : float
        Band-edge masses along the growth direction (holes positive).
    strain : ndarray (3, 3) or None
    """

    conduction_eV: float
    heavy_hole_eV: float
    light_hole_eV: float
    split_off_eV: float
    m_e: float
    m_hh: float
    m_lh: float
    strain: FloatArray | None


def layer_edges(structure: Structure) -> list[LayerEdges]:
    """The :class:`LayerEdges` of every layer (module docstring)."""
    out = []
    for i, layer in enumerate(structure.layers):
        kpm = layer.material
        p = kpm.parameters
        if "eight-band" not in kpm.models:
            raise InputError(f"{layer.label} does not support the eight-band model; a "
                             "heterostructure needs Eg_eV, Ep_eV and F as well",
                             structure.file, f"layers[{i}]")
        eps = None
        if structure.substrate_a_A is not None:
            eps = pseudomorphic_strain(kpm.a_A, structure.substrate_a_A, kpm.elastic,
                                       structure.growth)
        model = material_model(kpm, "eight-band", strain=eps)
        e = model.gamma_energies_eV
        names = model.band_names

        def level(name: str, e=e, names=names) -> float:
            return float(np.mean([x for x, n in zip(e, names, strict=True) if n == name]))

        top = layer.valence_band_eV
        inv_hh, inv_lh = luttinger_inverse_masses(p.gamma1, p.gamma2, p.gamma3,
                                                  growth_frame(structure.growth)[2])
        if not (inv_hh > 0 and inv_lh > 0):
            raise InputError(f"{layer.label}: the Luttinger parameters give hole masses "
                             f"m0/{inv_hh:.3g} and m0/{inv_lh:.3g} along [{structure.growth}]; "
                             "expected both positive (γ1 larger than the warping terms)",
                             structure.file, f"layers[{i}]")
        out.append(LayerEdges(
            conduction_eV=top + level("conduction"), heavy_hole_eV=top + level("heavy hole"),
            light_hole_eV=top + level("light hole"), split_off_eV=top + level("split-off"),
            m_e=1.0 / conduction_inverse_mass(p.Eg_eV, p.Delta_so_eV, p.Ep_eV, p.F),
            m_hh=1.0 / inv_hh, m_lh=1.0 / inv_lh,
            strain=eps))
    return out


@dataclass(frozen=True, eq=False)
class Grid:
    """Cell-centred nodes along z and the layer of each.

    Attributes
    ----------
    spacing_A : float
    z_A : ndarray (n,)
        Node positions from the start of the first layer, Å.
    layer_index : ndarray of int (n,)
    interfaces_A : ndarray
        Positions of the interfaces (and the two ends), Å.
    periodic : bool
    """

    spacing_A: float
    z_A: FloatArray
    layer_index: NDArray[np.int64]
    interfaces_A: FloatArray
    periodic: bool

    @property
    def size(self) -> int:
        return self.z_A.size

    @property
    def length_A(self) -> float:
        return float(self.interfaces_A[-1])

    def on_nodes(self, per_layer) -> FloatArray:
        """A per-layer value spread on the nodes."""
        return np.asarray(per_layer, dtype=float)[self.layer_index]


def build_grid(structure: Structure, spacing_nm: float) -> Grid:
    """Cell-centred grid of spacing h (each layer a whole number of cells).

    Raises
    ------
    InputError
        ``spacing_nm`` not positive, or a layer thickness that is not a multiple of it
        (key ``layers[i].thickness_nm``).
    """
    if not (np.isfinite(spacing_nm) and 0 < spacing_nm <= 5.0):
        raise InputError(f"expected 0 < spacing_nm ≤ 5 nm, got {spacing_nm}", key="spacing_nm")
    counts = []
    for i, layer in enumerate(structure.layers):
        cells = layer.thickness_nm / spacing_nm
        n = int(round(cells))
        if n < 1 or abs(cells - n) > _CELL_TOL * max(1.0, cells):
            raise InputError(f"{layer.thickness_nm:g} nm is not a whole number of grid cells of "
                             f"{spacing_nm:g} nm; expected a multiple of spacing_nm (interfaces "
                             "sit between nodes)", structure.file, f"layers[{i}].thickness_nm")
        counts.append(n)
    total = sum(counts)
    if total > 2_000_000:
        raise InputError(f"{total} grid nodes; expected at most 2000000 (a coarser spacing_nm)",
                         key="spacing_nm")
    h = 10.0 * spacing_nm
    index = np.repeat(np.arange(len(counts)), counts)
    z = (np.arange(total) + 0.5) * h
    interfaces = h * np.concatenate([[0], np.cumsum(counts)])
    return Grid(h, z, index, interfaces.astype(float), structure.periodic)


def half_node_inverse(values: FloatArray, periodic: bool) -> FloatArray:
    r"""1/m between neighbouring nodes: 2/(m_i + m_{i+1}) (n − 1 values, n when periodic).

    Flux continuity across an interface at the half-node, ψ(z_I ± h/2) ≈ ψ(z_I) ± (h/2) m_± J
    with J = ψ'/m continuous, gives (ψ_{i+1} − ψ_i)/h = J (m_i + m_{i+1})/2 + O(h²): the
    arithmetic mean of the masses is the second-order choice (inside a layer it is just 1/m).
    """
    right = np.roll(values, -1) if periodic else values[1:]
    left = values if periodic else values[:-1]
    return 2.0 / (left + right)
