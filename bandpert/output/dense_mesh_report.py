"""JSON sections of the dense-mesh jobs: the reduced-basis interpolation and its check (``dos
--interpolate``, ``optics``) and the optical spectrum (keys documented in the README)."""

from __future__ import annotations

from typing import Any

import numpy as np

from .. import __version__
from ..physics.optical_spectrum import OpticalSpectrum
from ..physics.reduced_basis_check import InterpolatedBands


def interpolation_results(run: InterpolatedBands) -> dict[str, Any]:
    """The ``interpolation`` section: how the reduced bases were built and how they checked."""
    m, c = run.model, run.check
    s = m.settings
    return {
        "method": "reduced basis (Shirley 1996), "
                  + ("one basis per coarse point" if len(m.patches) > 1 else
                     "one basis for the zone"),
        "coarse_mesh": s.coarse_mesh,
        "coarse_points": m.coarse_points,
        "basis_tolerance": s.basis_tolerance,
        "buffer_bands": s.buffer_bands,
        "local_radius": s.local_radius,
        "fixed_plane_waves": m.fixed_size,
        "reduced_sizes": {"min": int(m.sizes.min()), "max": int(m.sizes.max()),
                          "bases": len(m.patches)},
        "check_points": len(c.point_indices),
        "check_share": c.share,
        "tolerance_eV": c.tolerance_eV,
        "max_error_eV": c.max_error_eV,
        "rms_error_eV": c.rms_error_eV,
        "max_error_vs_k_centred_eV": c.max_error_vs_k_centred_eV,
        "rms_error_vs_k_centred_eV": c.rms_error_vs_k_centred_eV,
        "max_basis_difference_eV": c.max_basis_difference_eV,
        "attempts": [{"coarse_mesh": a, "basis_tolerance": t, "reduced_size": n,
                      "max_error_eV": e} for a, t, n, e in run.attempts],
    }


def interpolation_line(run: InterpolatedBands) -> str:
    """One line for the terminal: basis sizes and the check's errors."""
    m, c = run.model, run.check
    refined = (f"; refined {len(run.attempts) - 1}×" if run.refined else "")
    return (f"{m.sizes.min()}–{m.sizes.max()} states from {m.fixed_size} plane waves "
            f"(coarse mesh {m.settings.coarse_mesh}{refined}); {len(c.point_indices)} points "
            f"checked exactly: largest error {c.max_error_eV * 1e3:.2f} meV, RMS "
            f"{c.rms_error_eV * 1e3:.2f} meV (against the k-centred bands "
            f"{c.max_error_vs_k_centred_eV * 1e3:.2f} meV)")


def optics_results(result: OpticalSpectrum) -> dict[str, Any]:
    """The ``results`` of ``bandpert optics`` (keys documented in the README)."""
    out = {
        "spectrum": "one-electron, direction-averaged (no excitonic or local-field effects)",
        "mesh": {"shape": list(result.mesh.shape), "full_points": result.mesh.n_full,
                 "irreducible_points": len(result.mesh.k_frac)},
        "bands": result.n_bands,
        "all_bands": result.all_bands,
        "broadening_eV": result.broadening_eV,
        "complete_below_eV": result.complete_below_eV if np.isfinite(
            result.complete_below_eV) else None,
        "fermi_level_absolute_eV": result.fermi_level_eV,
        "n_eff_interband": result.n_eff_interband,
        "n_eff_intraband": result.n_eff_intraband,
        "n_eff_total": result.n_eff_total,
        "valence_electrons": result.material.valence_electrons,
        "sum_rule": result.sum_rule,
        "sum_rule_terms": list(result.k_terms),
        "eps1_zero_kramers_kronig": float(result.eps1[0]),
        "eps1_zero_direct": result.eps1_zero_direct,
        "critical_points_eV": result.critical_points_eV,
        "eps2_peaks_eV": result.peaks_eV,
        "photon_energies_eV": result.energies_eV,
        "eps2": result.eps2,
        "eps1": result.eps1,
        "joint_dos_per_eV": result.jdos_per_eV,
        "n_eff": result.n_eff,
    }
    if result.interpolation is not None:
        out["interpolation"] = interpolation_results(result.interpolation)
    return out


def optics_table(result: OpticalSpectrum) -> tuple[list[str], list[str], np.ndarray]:
    """Header lines, column names and rows of the optics CSV."""
    header = [f"bandpert {__version__} optical spectrum: {result.material.name}",
              "one-electron, direction-averaged epsilon (no excitonic or local-field effects); "
              f"Gaussian broadening {result.broadening_eV:g} eV",
              "photon energy in eV; joint DOS in 1/eV per cell, both spins; n_eff in electrons "
              "per cell"]
    cols = ["photon_energy_eV", "eps2", "eps1", "joint_dos_per_eV", "n_eff"]
    rows = np.column_stack([result.energies_eV, result.eps2, result.eps1, result.jdos_per_eV,
                            result.n_eff])
    return header, cols, rows
