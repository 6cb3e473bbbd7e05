"""Options shared by the dense-mesh commands that can interpolate (``dos --interpolate``,
``optics``): the reduced-basis settings and their checks in the command line's terms."""

from __future__ import annotations

from typing import Annotated

import numpy as np
import typer

from ..errors import InputError
from ..physics.reduced_basis import (
    DEFAULT_BASIS_TOLERANCE,
    DEFAULT_COARSE_MESH,
    DEFAULT_TOLERANCE_EV,
    ReducedBasisSettings,
)

InterpolateOption = Annotated[bool, typer.Option(
    "--interpolate", metavar="",
    help="Interpolate the bands from reduced bases built on a coarse mesh "
    "(Shirley 1996) instead of diagonalising every point; 1 % of the points are checked "
    "exactly and the run fails above the tolerance.")]
InterpolationToleranceOption = Annotated[float, typer.Option(
    "--tolerance-meV", help="With --interpolate: the largest interpolation error "
    "accepted at the check points.")]
BasisToleranceOption = Annotated[float, typer.Option(
    "--basis-tolerance", help="Relative singular-value cut of the reduced bases (0 to 1).")]
CoarseMeshOption = Annotated[int, typer.Option(
    "--coarse-mesh", help="Points per axis of the coarse mesh whose exact states span the "
    "reduced bases.")]

DEFAULT_TOLERANCE_MEV = DEFAULT_TOLERANCE_EV * 1e3
DEFAULT_BASIS = DEFAULT_BASIS_TOLERANCE
DEFAULT_COARSE = DEFAULT_COARSE_MESH


def interpolation_settings(tolerance_meV: float, basis_tolerance: float,
                           coarse_mesh: int) -> ReducedBasisSettings:
    """The reduced-basis settings from the options, checked before any work (one-line errors)."""
    if not (np.isfinite(tolerance_meV) and 0 < tolerance_meV <= 1000):
        raise InputError(f"got {tolerance_meV}; expected a tolerance above 0 and at most "
                         "1000 meV", key="--tolerance-meV")
    return ReducedBasisSettings(coarse_mesh=coarse_mesh, basis_tolerance=basis_tolerance,
                                tolerance_eV=tolerance_meV * 1e-3).checked()
