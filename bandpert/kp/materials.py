"""The models of a k·p parameter file, unstrained or strained.

:func:`material_model` turns a validated :class:`~bandpert.input.kp_file.KPMaterial` into one
of its models (:mod:`bandpert.kp.hamiltonians`), with a homogeneous strain when asked
(:mod:`bandpert.kp.strain`); errors name the file's keys.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..errors import InputError
from ..input.kp_file import KPMaterial
from .hamiltonians import KPModel, make_model
from .parameters import MODEL_NAMES
from .strain import (
    GROWTH_DIRECTIONS,
    check_strain,
    hydrostatic_strain,
    piezoelectric_note,
    pseudomorphic_strain,
    strained_model,
)

__all__ = ["StrainState", "material_model", "strain_state"]

FloatArray = NDArray[np.float64]


def material_model(kpm: KPMaterial, name: str | None = None, strain: ArrayLike | None = None,
                   axis: ArrayLike | str = "001", **options: Any) -> KPModel:
    """Build one of the file's models (default: the largest it supports).

    Parameters
    ----------
    kpm : KPMaterial
    name : str, optional
        One of the file's ``models``.
    strain : array_like (3, 3), optional
        A homogeneous strain (cubic axes); needs the file's ``[deformation]`` table and the
        six- or eight-band model.
    axis : str or array_like
        Quantisation axis naming heavy and light holes under strain (the growth direction).
    options
        Go to the builder (``remote=`` for the two-band model).

    Raises
    ------
    InputError
        For a model the file does not support (key ``models``), or strain without deformation
        potentials (key ``deformation``) or on the two-band model.
    """
    if name is None:
        name = kpm.models[-1]
    if name not in MODEL_NAMES:
        raise InputError(f"unknown k·p model '{name}'; expected one of {', '.join(MODEL_NAMES)}",
                         kpm.file, "models")
    if name not in kpm.models:
        raise InputError(f"the {name} model is not supported by this file (it supports "
                         f"{', '.join(kpm.models)}); expected one of those, or add its "
                         "parameters", kpm.file, "models")
    model = make_model(name, kpm.parameters, lattice_constant_A=kpm.a_A, **options)
    if strain is None:
        return model
    if kpm.deformation is None:
        raise InputError("missing; strain needs the deformation potentials (a table with "
                         "a_v_convention, a_c_eV, a_v_eV, b_eV, d_eV)", kpm.file, "deformation")
    if name == "two-band":
        raise InputError("strain needs the six- or eight-band model (the two-band model has no "
                         "heavy/light-hole structure)", kpm.file, "models")
    try:
        eps = check_strain(strain)
    except ValueError as exc:
        raise InputError(str(exc), key="strain") from None
    return strained_model(model, eps, kpm.deformation, axis)


@dataclass(frozen=True, eq=False)
class StrainState:
    """A homogeneous strain asked of a k·p file, with how it was specified.

    Attributes
    ----------
    tensor : ndarray, shape (3, 3)
        ε in cubic axes.
    kind : str
        "tensor", "hydrostatic" or "pseudomorphic".
    axis : str
        The quantisation axis naming heavy and light holes (the growth direction; "001" for a
        tensor or hydrostatic strain).
    substrate_a_A : float or None
        The substrate's lattice constant (pseudomorphic growth).
    note : str
        A warning to pass on ("" when none): the piezoelectric field left out.
    """

    tensor: FloatArray
    kind: str
    axis: str
    substrate_a_A: float | None = None
    note: str = ""

    def as_dict(self) -> dict[str, Any]:
        """For JSON."""
        return {"kind": self.kind, "tensor": self.tensor, "axis": self.axis,
                "substrate_a_A": self.substrate_a_A,
                "trace": float(np.trace(self.tensor)), "note": self.note}


def strain_state(kpm: KPMaterial, tensor: ArrayLike | None = None,
                 hydrostatic: float | None = None, substrate_a_A: float | None = None,
                 growth: str = "001") -> StrainState | None:
    """The strain of one of three kinds (at most one given; None when none is).

    Parameters
    ----------
    kpm : KPMaterial
    tensor : array_like, optional
        Six numbers (ε_xx, ε_yy, ε_zz, ε_yz, ε_xz, ε_xy) or a symmetric 3 × 3 array.
    hydrostatic : float, optional
        ε_ii = hydrostatic.
    substrate_a_A : float, optional
        Pseudomorphic growth on a substrate of this lattice constant along ``growth`` (needs the
        file's ``[elastic]`` table).
    growth : str
        "001", "110" or "111".

    Raises
    ------
    InputError
        Keys ``strain``, ``hydrostatic``, ``substrate_a_A``, ``growth`` (the request) or
        ``elastic``/``deformation`` (the file).
    """
    given = [n for n, v in (("strain", tensor), ("hydrostatic", hydrostatic),
                            ("substrate_a_A", substrate_a_A)) if v is not None]
    if not given:
        return None
    if len(given) > 1:
        raise InputError(f"{' and '.join(given)} both describe the strain; expected one",
                         key=given[1])
    if growth not in GROWTH_DIRECTIONS:
        raise InputError(f"'{growth}' is not one of {', '.join(GROWTH_DIRECTIONS)}",
                         key="growth")
    if kpm.deformation is None:
        raise InputError("missing; strain needs the deformation potentials (a table with "
                         "a_v_convention, a_c_eV, a_v_eV, b_eV, d_eV)", kpm.file, "deformation")
    try:
        if tensor is not None:
            eps = np.asarray(tensor, dtype=float)
            if eps.shape == (6,):
                xx, yy, zz, yz, xz, xy = eps
                eps = np.array([[xx, xy, xz], [xy, yy, yz], [xz, yz, zz]])
            return StrainState(check_strain(eps), "tensor", "001")
        if hydrostatic is not None:
            return StrainState(hydrostatic_strain(hydrostatic), "hydrostatic", "001")
    except ValueError as exc:
        raise InputError(f"{exc}", key=given[0]) from None
    if kpm.elastic is None:
        raise InputError("missing; pseudomorphic strain needs the elastic constants (a table "
                         "with c11_GPa, c12_GPa, c44_GPa)", kpm.file, "elastic")
    if not (math.isfinite(substrate_a_A) and substrate_a_A > 0):
        raise InputError(f"expected a positive lattice constant in Å, got {substrate_a_A}",
                         key="substrate_a_A")
    try:
        eps = pseudomorphic_strain(kpm.a_A, substrate_a_A, kpm.elastic, growth)
    except ValueError as exc:
        raise InputError(f"{exc} (substrate {substrate_a_A:g} Å on a layer of {kpm.a_A:g} Å)",
                         key="substrate_a_A") from None
    return StrainState(eps, "pseudomorphic", growth, float(substrate_a_A),
                       piezoelectric_note(eps))
