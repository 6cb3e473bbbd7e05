"""bandpert: crystal bands by exact diagonalisation and by perturbation theory, side by side.

The library is usable without the command line::

    from bandpert import load_material, compute_band_structure
    bs = compute_band_structure(load_material("silicon"))
"""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("bandpert")
except PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0.1.0"

from .errors import InputError  # noqa: E402
from .input.material import Material, load_material, parse_material  # noqa: E402
from .physics.bands import BandStructure, compute_band_structure, exact_energies  # noqa: E402
from .planewave.model import PlaneWaveModel, build_model  # noqa: E402

__all__ = [
    "BandStructure",
    "InputError",
    "Material",
    "PlaneWaveModel",
    "__version__",
    "build_model",
    "compute_band_structure",
    "exact_energies",
    "load_material",
    "parse_material",
]
