"""The documents of ``bandpert masses``: JSON results and the terminal rows.

Frames, said in every output: k in fractions of the reciprocal primitive vectors b1, b2, b3
(``k_frac``) and Cartesian in Å⁻¹ (``k_cart_invA``, 2π included); principal axes are Cartesian
unit vectors in the frame of the lattice vectors, given only where the tensor fixes them (none
for an isotropic mass; the axis of the single mass for a uniaxial one).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..kp.parameters import dkk_with_free_electron
from ..physics.deformation import describe as describe_deformation
from ..physics.mass_analysis import MassesResult
from ..physics.mass_tensor import distinct_principal
from .energy_zero import zero_entry, zero_phrase
from .report import finite_or_none
from .text import fixed, vector

#: The coordinate frames of the masses outputs, in words (JSON ``frames``, terminal notes).
FRAMES = {
    "k_frac": "fractions of the reciprocal primitive vectors b1, b2, b3",
    "k_cart_invA": "Cartesian, 1/Å (2π included), in the frame of the lattice vectors",
    "axes": "Cartesian unit vectors in the frame of the lattice vectors; given only where the "
            "tensor fixes them (none for an isotropic mass; for a uniaxial tensor the axis of "
            "its single mass, the repeated one holding in the plane normal to it)",
}


def _principal_entries(values: np.ndarray, axes: np.ndarray) -> list[dict[str, Any]]:
    """Distinct principal values (signed m0/m*) with their masses and fixed axes."""
    out = []
    for p in distinct_principal(values, axes):
        with np.errstate(divide="ignore"):
            mass = abs(1.0 / p.value) if p.value != 0 else float("inf")
        out.append({"inverse_mass": p.value, "mass_m0": mass if np.isfinite(mass) else None,
                    "multiplicity": p.multiplicity,
                    "axis": None if p.axis is None else p.axis,
                    "plane_normal": None if p.normal is None else p.normal})
    return out


def _band_masses_entry(m, energy_zero_eV: float, location: str) -> dict[str, Any]:
    entry: dict[str, Any] = {
        "label": m.label,
        "band": m.band + 1,
        "location": location,
        "k_frac": m.k_frac,
        "k_cart_invA": m.k_cart_invA,
        "energy_eV": m.energy_eV - energy_zero_eV,
        "energy_absolute_eV": m.energy_eV,
        "degenerate_bands": (m.degenerate_bands + 1).tolist(),
        "valleys": m.valleys,
        "dos_mass_m0": m.dos_mass,
        "conductivity_mass_m0": m.conductivity_mass,
        "effective_dos_cm3": m.effective_dos_cm3,
        "temperature_K": m.temperature_K,
        "sum_over_states": None,
        "finite_difference": None,
        "convergence": None,
        "degenerate_edge": None,
        "critical_point": _critical_point_entry(m.critical_point, energy_zero_eV),
        "summary": m.summary,
    }
    if m.tensor is not None:
        t = m.tensor
        with np.errstate(divide="ignore"):
            signed = t.curvature_sign / t.principal_masses
        entry["sum_over_states"] = {
            "inverse_mass_tensor": t.inverse_mass,
            "principal_masses_m0": finite_or_none(t.principal_masses)[0],
            "curvature_sign": t.curvature_sign,
            "anisotropy": t.anisotropy,
            "principal": _principal_entries(signed, t.principal_axes),
        }
        entry["finite_difference"] = {"inverse_mass_tensor": m.finite_difference,
                                      "relative_difference": m.relative_difference}
        entry["convergence"] = {"states_kept": m.convergence_counts,
                                "principal_masses_m0": m.convergence_masses}
    if m.edge is not None:
        e = m.edge
        entry["degenerate_edge"] = {
            "bands": (e.bands + 1).tolist(),
            "dkk_L": None if e.dkk_LMN is None else e.dkk_LMN[0],
            "dkk_M": None if e.dkk_LMN is None else e.dkk_LMN[1],
            "dkk_N": None if e.dkk_LMN is None else e.dkk_LMN[2],
            "dkk_LMN_with_free_electron": (None if e.dkk_LMN is None
                                           else list(dkk_with_free_electron(*e.dkk_LMN))),
            "luttinger_gamma": None if e.luttinger is None else list(e.luttinger),
            "direction_inverse_masses": {k: v for k, v in e.direction_curvatures.items()},
            "direction_masses_m0": {k: finite_or_none(1.0 / np.abs(v))[0] for k, v in
                                    e.direction_curvatures.items()},
            "band_dos_masses_m0": m.band_dos_masses,
        }
    return entry


def _critical_point_entry(cp, energy_zero_eV: float) -> dict[str, Any]:
    near = cp.nearest
    return {
        "kind": cp.kind,
        "saddle_index": cp.saddle_index,
        "principal_inverse_masses": cp.curvatures,
        "principal": (None if cp.curvatures is None or cp.axes is None
                      else _principal_entries(cp.curvatures, cp.axes)),
        "degeneracy": cp.degeneracy or None,
        "run_splittings_eV": finite_or_none(cp.run_splittings_eV)[0],
        "centred_splittings_eV": finite_or_none(cp.centred_splittings_eV),
        "gradient_eV_A": cp.gradient_eV_A,
        "nearest_extremum": None if near is None else {
            "kind": near.kind, "k_frac": near.k_frac, "k_cart_invA": near.k_cart_invA,
            "energy_eV": near.energy_eV - energy_zero_eV,
            "energy_absolute_eV": near.energy_eV, "beyond_point_eV": near.below_eV,
            "distance_invA": near.distance_invA, "along_fraction": near.along_fraction},
        "warning": cp.warning or None,
    }


def deformation_entry(dp, note: str) -> dict[str, Any]:
    """The ``deformation_potentials`` of ``bandpert masses`` (README)."""
    lmn = dp.valence_lmn_eV
    return {
        "gap_hydrostatic_eV": dp.gap_hydrostatic_eV,
        "conduction_valley": dp.conduction_valley,
        "xi_u_eV": dp.xi_u_eV,
        "xi_d_plus_xi_u_over_3_minus_a_v_eV": dp.xi_d_plus_xi_u_over_3_minus_a_v_eV,
        "valence_l_m_n_eV": None if lmn is None else list(lmn),
        "b_eV": dp.b_eV,
        "d_eV": dp.d_eV,
        "form_factors": note,
        "internal_strain_zeta": dp.internal_strain_zeta,
        "internal_strain_source": dp.internal_strain_source,
        "strain": "first order at the reference lattice (where the continuous v(q) equals the "
                  "tabulated form factors); under shear the two atoms of a diamond or "
                  "zincblende cell shift by Kleinman's internal strain (internal_strain_zeta)",
    }


def masses_results(result: MassesResult) -> dict[str, Any]:
    """The ``results`` of ``bandpert masses`` (keys documented in the README)."""
    zero = result.energy_zero_eV
    kp = result.implied_kp
    return {
        "request": "band edges" if result.at_edges else "point and band",
        "frames": FRAMES,
        "deformation_potentials": None if result.deformation is None else deformation_entry(
            result.deformation, result.deformation_note),
        "energy_zero": zero_entry(result.energy_zero_kind, zero),
        "masses": [_band_masses_entry(m, zero, loc)
                   for m, loc in zip(result.entries, result.locations, strict=True)],
        "kp_parameters": None if kp is None else {
            **kp.parameters.as_dict(), "conduction_band": kp.conduction_band + 1,
            "conduction_mass_m0": kp.conduction_mass_m0},
        "warnings": list(result.warnings),
    }


def masses_rows(m, location: str, zero_eV: float, zero_kind: str) -> list[tuple[str, str]]:
    """The terminal rows of one band's masses: (name, value) pairs, frames named."""
    rows = [("k (fractions of b1, b2, b3)", vector(m.k_frac)),
            ("k (Cartesian, 1/Å)", vector(m.k_cart_invA)),
            ("energy", f"{fixed(m.energy_eV - zero_eV)} eV from {zero_phrase(zero_kind, zero_eV)}; "
                       "band(s) " + ", ".join(str(b + 1) for b in m.degenerate_bands))]
    cp = m.critical_point
    rows.append(("point", cp.kind + ((" (warped: no index)" if cp.saddle_index is None
                                      else f" (index {cp.saddle_index})")
                                     if cp.kind == "saddle" else "")))
    if cp.curvatures is not None and m.tensor is None:
        rows.append(("principal m0/m* (signed)", _signed_values(cp.curvatures)))
    if m.tensor is not None:
        rows += _tensor_rows(m.tensor)
        if m.relative_difference is not None:
            rows.append(("finite-difference check",
                         f"relative difference {m.relative_difference:.1e}"))
            conv = ", ".join(f"{n}: {np.max(row):.4f}" for n, row in
                             zip(m.convergence_counts, m.convergence_masses, strict=True))
            rows.append(("largest mass vs states kept", conv))
        if m.valleys is not None:
            rows.append(("valleys", str(m.valleys)))
        if m.dos_mass is not None:
            rows.append(("density-of-states mass", f"{m.dos_mass:.4f} m0"))
            rows.append(("conductivity mass", f"{m.conductivity_mass:.4f} m0"))
            rows.append((f"effective DOS at {m.temperature_K:g} K",
                         f"{m.effective_dos_cm3:.3e} cm⁻³"))
    if m.edge is not None:
        e = m.edge
        if e.dkk_LMN is not None:
            big_l, big_m, big_n = e.dkk_LMN
            rows.append(("DKK L, M, N (ħ²/2m0)", f"{fixed(big_l, 3)}, {fixed(big_m, 3)}, "
                         f"{fixed(big_n, 3)} (usual: free-electron term excluded)"))
            rows.append(("  alternative L, M, N", f"{fixed(big_l + 1, 3)}, {fixed(big_m + 1, 3)}, "
                         f"{fixed(big_n, 3)} (free-electron term included)"))
            g1, g2, g3 = e.luttinger
            rows.append(("Luttinger γ1, γ2, γ3", f"{fixed(g1, 3)}, {fixed(g2, 3)}, {fixed(g3, 3)} "
                         "(spinless triplet; Γ8 hole formulas need spin–orbit)"))
        for name, curv in e.direction_curvatures.items():
            signed = ", ".join(fixed(c, 4, sign=True) for c in curv)
            rows.append((f"m0/m* along {name}", f"{signed} (bands of the set, signed)"))
        if m.dos_mass is not None:
            rows.append(("density-of-states mass", f"{m.dos_mass:.4f} m0 (all bands of the set)"))
            rows.append((f"effective DOS at {m.temperature_K:g} K",
                         f"{m.effective_dos_cm3:.3e} cm⁻³"))
    return rows


def _signed_values(values: np.ndarray) -> str:
    """Signed principal values, a repeated one written once with its multiplicity."""
    axes = np.eye(len(values))
    distinct = distinct_principal(np.asarray(values, dtype=float), axes)
    if len(distinct) == 1:
        return f"{fixed(distinct[0].value, 4, sign=True)} (isotropic)"
    return ", ".join(fixed(p.value, 4, sign=True)
                     + (f" (×{p.multiplicity})" if p.multiplicity > 1 else "") for p in distinct)


def _tensor_rows(t) -> list[tuple[str, str]]:
    """Principal masses: one number when isotropic, axes only where the tensor fixes them."""
    with np.errstate(divide="ignore"):
        signed = t.curvature_sign / t.principal_masses
    rows = []
    distinct = distinct_principal(signed, t.principal_axes)
    for i, p in enumerate(distinct):
        kind = "electron-like" if p.value > 0 else "hole-like"
        mass = f"{abs(1.0 / p.value):.4f} m0 ({kind}; m0/m* = {fixed(p.value, 4, sign=True)})"
        if len(distinct) == 1:
            rows.append(("mass (isotropic)", mass))
        elif p.axis is not None:
            rows.append((f"principal mass {i + 1}", f"{mass} along {vector(p.axis)}"))
        elif p.normal is not None:
            rows.append((f"principal mass {i + 1} (×{p.multiplicity})",
                         f"{mass} in the plane normal to {vector(p.normal)}"))
        else:
            rows.append((f"principal mass {i + 1} (×{p.multiplicity})", mass))
    return rows


def masses_notes(result: MassesResult) -> list[str]:
    """Lines after the tables: deformation potentials, the implied k·p parameters (band-edge
    request only), the frames, and each warning once."""
    notes = []
    if result.deformation is not None:
        from_dp = describe_deformation(result.deformation)
        notes.append(f"deformation potentials at the reference lattice "
                     f"({result.deformation_note}):")
        notes += ["  " + line for line in from_dp]
    if result.at_edges and result.implied_kp is not None:
        notes.append("k·p parameters implied at Γ (Δso = 0): " + ", ".join(
            f"{k} = {v:.4g}" for k, v in result.implied_kp.parameters.as_dict().items()
            if k != "Delta_so_eV"))
    notes.append("frames: k in fractions of b1, b2, b3 and Cartesian in 1/Å; axes are Cartesian "
                 "unit vectors (lattice-vector frame), only where the tensor fixes them")
    notes += [f"warning: {w}" for w in result.warnings]
    return notes
