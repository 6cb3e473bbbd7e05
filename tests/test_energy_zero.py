"""One energy zero per run: every output gives energies from it, says which it is, and keeps the
absolute energies beside them."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import MATERIALS, bundled

from bandpert.input.material import read_toml_document
from bandpert.output import figures
from bandpert.output.dos_report import dos_results, dos_table
from bandpert.output.gaps_report import gap_results, gap_table
from bandpert.output.report import band_structure_results
from bandpert.output.sweep_report import sweep_columns, sweep_results, sweep_table
from bandpert.physics.bands import compute_band_structure
from bandpert.physics.nfe_gaps import gap_analysis
from bandpert.runs.execution import SERIAL
from bandpert.runs.mesh_dos import compute_dos
from bandpert.runs.sweep import prepare, run_sweep
from bandpert.runs.sweep_spec import parse_axis

CUTOFF_EV = 60.0  # a small basis: the zero's bookkeeping, not convergence, is tested here


@pytest.fixture(scope="module")
def silicon_bands():
    return compute_band_structure(bundled("silicon"), n_k=16, cutoff_eV=CUTOFF_EV)


def test_bands_json_gives_energies_from_the_valence_maximum(silicon_bands):
    # A semiconductor's zero is its valence-band maximum (common practice, no source): the
    # highest occupied band peaks at exactly 0 and the absolute energies differ by the zero.
    bs = silicon_bands
    res = band_structure_results(bs)
    zero = res["energy_zero"]
    assert zero == {"name": "valence-band maximum", "absolute_eV": bs.energy_zero_eV}
    rel, absolute = np.asarray(res["energies_eV"]), np.asarray(res["energies_absolute_eV"])
    assert np.max(rel[:, 3]) == pytest.approx(0.0, abs=1e-12)  # band 4 of 8 electrons
    assert rel == pytest.approx(absolute - zero["absolute_eV"], abs=1e-12)
    edges = res["band_edges"]
    assert edges["valence_max_eV"] == pytest.approx(0.0, abs=1e-12)
    assert edges["conduction_min_eV"] == pytest.approx(edges["gap_eV"], abs=1e-12)
    assert edges["valence_max_absolute_eV"] == pytest.approx(zero["absolute_eV"])


def test_band_figure_names_the_zero_and_its_absolute_value(silicon_bands):
    fig = figures.band_figure(silicon_bands)
    assert "valence-band maximum" in fig.axes[0].get_ylabel()
    note = fig.get_supxlabel().replace("\n", " ")
    assert "Energy zero: the valence-band maximum" in note
    assert f"{silicon_bands.energy_zero_eV:.4f} eV" in note


def test_gap_table_and_json_use_the_band_figure_zero(silicon_bands):
    bs = silicon_bands
    report = gap_analysis(bs.material, model=bs.model, n_bands=bs.n_bands, points=["X"],
                          crossings=False)
    res = gap_results(report, bs)
    group = res["points"][0]["groups"][0]
    assert group["exact_eV"] == pytest.approx(
        np.asarray(group["exact_absolute_eV"]) - bs.energy_zero_eV, abs=1e-12)
    tables, _ = gap_table(report, bs.energy_zero_eV)
    e0 = float(tables[1][2][0][1])
    assert e0 == pytest.approx(group["free_electron_energy_eV"], abs=1e-3)


def test_dos_outputs_give_the_fermi_level_from_the_zero():
    # An insulator's Fermi level lies mid-gap (Ashcroft & Mermin 1976, ch. 28): from the
    # valence-band maximum it is half the gap.
    result = compute_dos(bundled("silicon"), 4, cutoff_eV=CUTOFF_EV, energy_step_eV=0.05)
    res = dos_results(result)
    assert res["energy_zero"]["name"] == "valence-band maximum"
    assert res["valence_max_eV"] == pytest.approx(0.0, abs=1e-12)
    assert res["fermi_level_eV"] == pytest.approx(res["gap_eV"] / 2, abs=1e-6)
    assert res["fermi_level_absolute_eV"] == pytest.approx(result.fermi_level_eV)
    header, cols, rows = dos_table(result)
    assert cols[:2] == ["energy_eV", "energy_absolute_eV"]
    assert rows[:, 0] == pytest.approx(rows[:, 1] - result.energy_zero_eV)
    assert any("valence-band maximum" in h for h in header)


def test_sweep_levels_are_measured_from_each_points_own_zero():
    path = MATERIALS / "silicon.toml"
    spec, _, note = prepare(read_toml_document(path), str(path),
                            (parse_axis("lattice.a_A=5.35:5.50:2"),), quantities=("gaps",),
                            points=("G", "X"), n_k=12, cutoff_eV=CUTOFF_EV)
    result = run_sweep(spec, SERIAL, None, note)
    cols = sweep_columns(result)
    zero = cols["energy_zero_absolute_eV"]
    assert result.text["energy_zero"] == ["valence-band maximum"] * 2
    # silicon's valence top is at Γ: the lower level at Γ is the zero at every point
    assert cols["lower_Γ_eV"] == pytest.approx([0.0, 0.0], abs=1e-12)
    assert cols["upper_X_eV"] == pytest.approx(cols["upper_X_absolute_eV"] - zero, abs=1e-12)
    assert not np.allclose(zero[0], zero[1])  # the absolute zero moves with the lattice
    doc = sweep_results(result)
    assert "each point's own" in doc["energy_zero"]["note"]
    header, names, _ = sweep_table(result)
    assert "upper_X_absolute_eV" in names and any("each point's own" in h for h in header)
    fig = figures.sweep_figure(result)
    labels = {ax.get_ylabel() for ax in fig.axes if ax.get_visible()}
    assert "energy − valence-band maximum (eV)" in labels
