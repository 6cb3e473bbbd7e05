"""Heterostructures along a growth axis: envelope-function k·p on a z-grid.

- :mod:`.grid`: the cell-centred grid (interfaces on half-nodes) and each layer's band edges
  and masses (strained on a substrate);
- :mod:`.one_band`: the one-band BenDaniel–Duke operator and its levels;
- :mod:`.multiband`: the four-, six- and eight-band operator along z (spurious-solution
  control);
- :mod:`.subbands`: :func:`compute_subbands`, the library entry point;
- :mod:`.dispersion`: :func:`in_plane_dispersion`, subbands along [100] and [110] and their
  in-plane masses.
"""

from .dispersion import IN_PLANE_DIRECTIONS, InPlaneDispersion, in_plane_dispersion
from .grid import Grid, LayerEdges, build_grid, layer_edges
from .multiband import MULTIBAND_MODELS, rescaled_parameters
from .one_band import one_band_levels
from .subbands import BANDS, MODELS, SubbandResult, compute_subbands

__all__ = ["BANDS", "IN_PLANE_DIRECTIONS", "MODELS", "MULTIBAND_MODELS", "Grid",
           "InPlaneDispersion", "LayerEdges", "SubbandResult", "build_grid", "compute_subbands",
           "in_plane_dispersion", "layer_edges", "one_band_levels", "rescaled_parameters"]
