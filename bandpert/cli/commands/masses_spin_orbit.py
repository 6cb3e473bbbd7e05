"""``bandpert masses`` for a material with spin–orbit coupling: the valence top at Γ.

Δso, the Γ8 Luttinger parameters, the heavy-, light- and split-off-hole masses and the
conduction mass by second differences of the spinor bands
(:func:`~bandpert.physics.kp_from_planewave.spin_orbit_valence_top`), and the k·p parameter
file they imply (``--write-kp``, with Δso from the model).
"""

from __future__ import annotations

from pathlib import Path

from rich.table import Table

from ...errors import InputError
from ...input.material import Material
from ...io import atomic_path, write_json
from ...output.report import document
from ...physics.bands import default_bands
from ...physics.kp_from_planewave import (
    SPIN_ORBIT_STEP,
    extract_kp_parameters,
    kp_material_text,
    spin_orbit_valence_top,
)
from ...planewave.cutoff import choose_cutoff
from ...planewave.model import build_model
from ..options import out, output_base


def masses_with_spin_orbit(material: Material, file: Path, cutoff_eV: float | None,
                           point: str | None, band: int | None, out_dir: Path,
                           name: str | None, json_path: Path | None,
                           kp_file: Path | None) -> None:
    """The valence top at Γ of a spin–orbit model (module docstring); prints and writes."""
    if point is not None or band is not None:
        raise InputError("with spin-orbit coupling only the valence top at Γ is analysed; "
                         "expected neither --point nor --band", material.file, "--point")
    if material.dimension != 3 or not material.valence_electrons:
        raise InputError("the valence top needs a 3D crystal with electrons.valence",
                         material.file, "electrons.valence")
    spinless = material.local_spinless()  # the cutoff rule's model, as every command's
    cutoff = choose_cutoff(spinless, default_bands(spinless), cutoff_eV)
    extracted = extract_kp_parameters(material, build_model(material, cutoff, spin_orbit=True))
    top = spin_orbit_valence_top(material, cutoff, extracted.conduction_band)
    g1, g2, g3 = top.gammas
    state = extracted.conduction_state  # spinless labels, spinor energies above Γ8
    results = {
        "spin_orbit_valence_top": {
            "method": f"second differences at ±{SPIN_ORBIT_STEP}·2π/a on the spinor basis "
                      "centred on Γ, Kramers pairs averaged",
            "delta_so_eV": top.delta_so_eV, "eg_eV": top.eg_eV,
            "gamma1": g1, "gamma2": g2, "gamma3": g3, "gamma1_from_111": top.gamma1_111,
            "heavy_hole_m0": top.heavy_hole_m0, "light_hole_m0": top.light_hole_m0,
            "split_off_m0": top.split_off_m0, "conduction_m0": top.conduction_m0,
            "conduction_band": extracted.conduction_band + 1,
            "conduction_state": None if state is None else {
                "state": state.state, "energy_eV": state.energy_eV,
                "lowest_state": state.lowest_state, "lowest_eV": state.lowest_eV},
            "sum_over_states": {
                "method": "Löwdin second order in k over every state of the basis, velocity "
                          "∂H/∂k (spin-orbit and nonlocal terms included)",
                "gamma1": extracted.parameters.gamma1, "gamma2": extracted.parameters.gamma2,
                "gamma3": extracted.parameters.gamma3}},
        "kp_parameters": extracted.parameters.as_dict(),
    }
    settings = {"cutoff_eV": cutoff, "spin_orbit": True}
    base = output_base(out_dir, name, f"{file.stem}-masses")
    json_path = json_path or base.with_name(f"{base.name}.json")
    write_json(json_path, document("masses", material, settings, results))
    written = [json_path]
    if kp_file is not None:
        with atomic_path(kp_file) as tmp:
            tmp.write_text(kp_material_text(material, extracted), encoding="utf-8")
        written.append(kp_file)
    table = Table(title=f"{material.name}: valence top at Γ with spin-orbit coupling",
                  title_justify="left", show_header=False)
    table.add_row("Δso = E(Γ8) − E(Γ7)", f"{top.delta_so_eV:.4f} eV")
    table.add_row("Eg (s-like conduction pair − Γ8)", f"{top.eg_eV:.4f} eV")
    p = extracted.parameters
    table.add_row("γ1, γ2, γ3 (Γ8, sum over states)",
                  f"{p.gamma1:.4f}, {p.gamma2:.4f}, {p.gamma3:.4f}")
    table.add_row("γ1, γ2, γ3 (Γ8, second differences)", f"{g1:.4f}, {g2:.4f}, {g3:.4f}")
    for d in ("100", "110", "111"):
        table.add_row(f"heavy / light hole [{d}]",
                      f"{top.heavy_hole_m0[d]:.4f} / {top.light_hole_m0[d]:.4f} m0")
    table.add_row("split-off hole", f"{top.split_off_m0:.4f} m0")
    table.add_row("conduction (s-like pair)", f"{top.conduction_m0:.4f} m0")
    if state is not None:
        table.add_row("its level at Γ (spinless label)", state.state if state.lowest_state is None
                      else f"{state.state}; the lowest is {state.lowest_state}, "
                           f"{state.lowest_eV:.4f} eV (not in the Kane models)")
    table.add_row("Ep, F (Kane; velocity ∂H/∂k)", f"{p.Ep_eV:.3f} eV, {p.F:.4f}")
    out.print(table)
    out.print("wrote " + ", ".join(str(p) for p in written))
