"""Error control of the reduced-basis interpolation: a share of the dense points diagonalised
exactly, compared with the interpolated bands, refinement, or a loud failure.

The bases come from :mod:`bandpert.physics.reduced_basis` (E. L. Shirley, Phys. Rev. B 54, 16464
(1996)). A stated share of the dense points is also diagonalised exactly, both in the fixed set of
plane waves the interpolation works in and in each point's own k-centred basis (the tool's exact
bands); the largest and RMS differences are reported. Above the tolerance the coarse mesh is
refined and the basis tolerance tightened
(:data:`~bandpert.physics.reduced_basis.MAX_REFINEMENTS` times); then the run fails with the
numbers of every attempt.
"""

from __future__ import annotations

import dataclasses
import warnings
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError, ModelWarning
from ..input.material import Material
from ..planewave.model import build_k_centred_model
from ..planewave.solver import exact_energies
from .reduced_basis import (
    MAX_COARSE_MESH,
    MAX_REFINEMENTS,
    MIN_CHECK_POINTS,
    ReducedBasisModel,
    ReducedBasisSettings,
    build_reduced_basis,
)


@dataclass(frozen=True)
class InterpolationCheck:
    """Interpolated against exact bands at the check points.

    Two exact references: the same fixed set of plane waves the interpolation works in (what
    the tolerance controls), and each point's own k-centred basis (the tool's exact bands; the
    two exact results differ only by basis convergence, which the cutoff controls).

    Attributes
    ----------
    point_indices : numpy.ndarray
        Indices of the check points among the dense points.
    max_error_eV, rms_error_eV : float
        Largest and root-mean-square |E_interpolated − E_exact, fixed set| over check points and
        bands: the interpolation error.
    max_basis_difference_eV : float
        Largest |E_exact, fixed set − E_exact, k-centred|.
    max_error_vs_k_centred_eV, rms_error_vs_k_centred_eV : float
        Largest and RMS |E_interpolated − E_exact, k-centred|: the error against the tool's
        exact bands.
    tolerance_eV : float
    share : float
        Share of the dense points checked.
    """

    point_indices: np.ndarray
    max_error_eV: float
    rms_error_eV: float
    max_basis_difference_eV: float
    max_error_vs_k_centred_eV: float
    rms_error_vs_k_centred_eV: float
    tolerance_eV: float
    share: float

    @property
    def passed(self) -> bool:
        """True when the largest interpolation error is within the tolerance."""
        return self.max_error_eV <= self.tolerance_eV


@dataclass(frozen=True)
class InterpolatedBands:
    """Bands on many k-points by reduced-basis interpolation, with their check.

    Attributes
    ----------
    energies_eV : numpy.ndarray
        (n_k, n_bands) absolute energies.
    model : ReducedBasisModel
        The basis that passed (the last one tried).
    check : InterpolationCheck
    attempts : tuple of (int, float, int, float)
        Every basis tried: (coarse mesh, basis tolerance, largest reduced size, largest
        interpolation error in eV).
    exact_energies_eV : numpy.ndarray
        (n_check, n_bands) exact energies at ``check.point_indices`` in their k-centred bases
        (kept apart: the interpolated ones stay in ``energies_eV`` so that every point has the
        same method).
    """

    energies_eV: np.ndarray
    model: ReducedBasisModel
    check: InterpolationCheck
    attempts: tuple
    exact_energies_eV: np.ndarray = field(repr=False)

    @property
    def refined(self) -> bool:
        """True when the first basis failed its check and a finer one was built."""
        return len(self.attempts) > 1


def check_points(n_points: int, share: float, seed: int = 0) -> np.ndarray:
    """Indices of the dense points diagonalised exactly: a seeded random sample, sorted.

    max(:data:`MIN_CHECK_POINTS`, ⌈share·n⌉) points (all of them when fewer exist).
    """
    n = min(n_points, max(MIN_CHECK_POINTS, int(np.ceil(share * n_points))))
    rng = np.random.default_rng(seed)
    return np.sort(rng.choice(n_points, size=n, replace=False))


def interpolated_bands(material: Material, k_cart_invA: np.ndarray, n_bands: int,
                       cutoff_eV: float,
                       settings: ReducedBasisSettings | None = None) -> InterpolatedBands:
    """Bands at many k-points by reduced-basis interpolation, checked against exact ones.

    Builds :func:`build_reduced_basis`, diagonalises the check points (:func:`check_points`)
    exactly, both in the fixed set of plane waves and in their own k-centred bases
    (:func:`~bandpert.planewave.solver.exact_energies`), and compares
    (:class:`InterpolationCheck`). When the interpolation error exceeds
    ``settings.tolerance_eV`` the coarse mesh grows by 2 and the basis tolerance shrinks by 3,
    up to :data:`MAX_REFINEMENTS` times; only then is every point interpolated. A basis
    difference above the tolerance (an unconverged cutoff) is reported by a
    :class:`~bandpert.errors.ModelWarning`.

    Parameters
    ----------
    material : Material
    k_cart_invA : numpy.ndarray
        (n_k, d) Cartesian points, best folded into the first zone
        (:func:`~bandpert.crystal.kmesh.fold_to_first_zone`).
    n_bands : int
    cutoff_eV : float
    settings : ReducedBasisSettings, optional
        Default :class:`~bandpert.physics.reduced_basis.ReducedBasisSettings`.

    Returns
    -------
    InterpolatedBands

    Raises
    ------
    InputError
        Key ``interpolation_tolerance_eV`` when even the last refinement misses the tolerance
        (the message gives every attempt's largest error).
    """
    s = (settings or ReducedBasisSettings()).checked()
    k = np.atleast_2d(np.asarray(k_cart_invA, dtype=float))
    idx = check_points(len(k), s.check_share, s.seed)
    centred = exact_energies(build_k_centred_model(material, cutoff_eV), k[idx], n_bands)
    attempts = []
    current = s
    for step in range(MAX_REFINEMENTS + 1):
        if step:
            current = dataclasses.replace(
                current, coarse_mesh=min(MAX_COARSE_MESH, current.coarse_mesh + 2),
                basis_tolerance=current.basis_tolerance / 3.0)
        model = build_reduced_basis(material, cutoff_eV, n_bands, current)
        interpolated = model.energies(k[idx])
        exact = exact_energies(model.fixed, k[idx], n_bands)
        diff = interpolated - exact
        err_max = float(np.max(np.abs(diff)))
        attempts.append((current.coarse_mesh, current.basis_tolerance, model.size, err_max))
        if err_max <= s.tolerance_eV:
            overall = interpolated - centred
            check = InterpolationCheck(
                point_indices=idx, max_error_eV=err_max,
                rms_error_eV=float(np.sqrt(np.mean(diff**2))),
                max_basis_difference_eV=float(np.max(np.abs(exact - centred))),
                max_error_vs_k_centred_eV=float(np.max(np.abs(overall))),
                rms_error_vs_k_centred_eV=float(np.sqrt(np.mean(overall**2))),
                tolerance_eV=s.tolerance_eV, share=len(idx) / len(k))
            if check.max_basis_difference_eV > s.tolerance_eV:
                warnings.warn(f"the fixed set of {model.fixed_size} plane waves and the bases "
                              "centred on each k give bands differing by up to "
                              f"{check.max_basis_difference_eV * 1e3:.3g} meV at the check "
                              f"points: the cutoff of {cutoff_eV:.4g} eV is not converged",
                              ModelWarning, stacklevel=2)
            return InterpolatedBands(model.energies(k), model, check, tuple(attempts), centred)
    tried = "; ".join(f"coarse mesh {c}, basis tolerance {t:.1e}, {n} states: "
                      f"{e * 1e3:.2f} meV" for c, t, n, e in attempts)
    raise InputError(f"the interpolated bands differ from the exact ones by more than "
                     f"{s.tolerance_eV * 1e3:.3g} meV at the {len(idx)} check points ({tried}); "
                     "expected a looser tolerance, a finer coarse mesh or a smaller basis "
                     "tolerance", material.file, "interpolation_tolerance_eV")
