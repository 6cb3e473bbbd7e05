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

from .data import bundled_names, find_material  # noqa: E402
from .errors import InputError  # noqa: E402
from .heterostructure.subbands import SubbandResult, compute_subbands  # noqa: E402
from .input.kp_file import KPMaterial, load_kp_material  # noqa: E402
from .input.material import Material, load_material, parse_material  # noqa: E402
from .input.structure_file import Structure, load_structure  # noqa: E402
from .physics.bands import BandStructure, compute_band_structure  # noqa: E402
from .physics.mass_analysis import MassesResult, compute_masses  # noqa: E402
from .physics.masses import BandMasses, band_masses, edge_masses  # noqa: E402
from .physics.nfe_gaps import GapReport, gap_analysis  # noqa: E402
from .physics.optical_spectrum import OpticalSpectrum, optical_spectrum  # noqa: E402
from .physics.perturbative_bands import PerturbationSettings  # noqa: E402
from .physics.reduced_basis_check import InterpolatedBands, interpolated_bands  # noqa: E402
from .planewave.model import PlaneWaveModel, build_model  # noqa: E402
from .planewave.solver import exact_energies  # noqa: E402
from .runs.execution import Engine  # noqa: E402
from .runs.mesh_dos import DosResult, compute_dos  # noqa: E402
from .symmetry import PointSymmetry, label_points  # noqa: E402

__all__ = [
    "BandMasses",
    "BandStructure",
    "DosResult",
    "Engine",
    "GapReport",
    "InputError",
    "InterpolatedBands",
    "KPMaterial",
    "MassesResult",
    "Material",
    "OpticalSpectrum",
    "PerturbationSettings",
    "PlaneWaveModel",
    "PointSymmetry",
    "Structure",
    "SubbandResult",
    "band_masses",
    "build_model",
    "bundled_names",
    "compute_band_structure",
    "compute_dos",
    "compute_masses",
    "compute_subbands",
    "edge_masses",
    "exact_energies",
    "find_material",
    "gap_analysis",
    "interpolated_bands",
    "label_points",
    "load_kp_material",
    "load_material",
    "load_structure",
    "optical_spectrum",
    "parse_material",
    "__version__",
]
