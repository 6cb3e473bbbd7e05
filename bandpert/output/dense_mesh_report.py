"""JSON sections of the dense-mesh jobs: the reduced-basis interpolation and its check (``dos
--interpolate``, ``optics``) and the optical spectrum (keys documented in the README)."""

from __future__ import annotations

from typing import Any

from ..physics.reduced_basis import InterpolatedBands


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
