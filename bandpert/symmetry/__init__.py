"""Symmetry of the plane-wave states: irreducible-representation labels at k-points.

Sits at the physics level: it reads crystals (:mod:`bandpert.crystal`) and diagonalises
plane-wave models (:mod:`bandpert.planewave`); :mod:`bandpert.physics` may import it, nothing
below does. Group theory from spgrep (irreps of little groups from spglib's operations).
"""

from .groups import LittleGroup, SpaceGroupFrame, little_group, space_group_frame
from .labels import NO_SYMMETRY, LevelLabel, PointSymmetry, label_point, label_points

__all__ = [
    "NO_SYMMETRY",
    "LevelLabel",
    "LittleGroup",
    "PointSymmetry",
    "SpaceGroupFrame",
    "label_point",
    "label_points",
    "little_group",
    "space_group_frame",
]
