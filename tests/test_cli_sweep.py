"""The `sweep` and `dos` commands: outputs, exit statuses, and serial = distributed."""

from __future__ import annotations

import json

import numpy as np
import pytest
import scipy.special
from test_cli import assert_user_error, no_dot_files, run

import bandpert.cli.options as options
from bandpert.data import MATERIALS_DIR
from bandpert.units import HBAR2_OVER_2M0_EV_A2

MATERIALS = MATERIALS_DIR / "planewave"
CHAIN = MATERIALS / "cosine-chain.toml"
SILICON = MATERIALS / "silicon.toml"
V1_RANGE = "potential.coefficients[0].value=0.2:2.0:4"


@pytest.fixture(autouse=True)
def wide_console(monkeypatch):
    monkeypatch.setattr(options.out, "width", 200)


@pytest.fixture(scope="module")
def chain_sweep(tmp_path_factory):
    """The cosine chain's V1 swept over 0.2–2 eV, gaps between bands 1 and 2, serially."""
    out_dir = tmp_path_factory.mktemp("sweep")
    code, out, err = run(["sweep", str(CHAIN), "--vary", V1_RANGE, "--quantity", "gaps",
                          "--between", "1", "--engine", "serial", "--k-points", "20",
                          "--out", str(out_dir), "--name", "cosine-chain-sweep"])
    assert code == 0, err
    return out_dir, out, err


def test_sweep_writes_plot_csv_and_json(chain_sweep):
    out_dir, out, err = chain_sweep
    for name in ("cosine-chain-sweep.png", "cosine-chain-sweep.csv", "cosine-chain-sweep.json"):
        assert (out_dir / name).stat().st_size > 0
    assert (out_dir / "cosine-chain-sweep.png").read_bytes()[:4] == b"\x89PNG"
    assert "4 points, 0 failed" in out
    assert no_dot_files(out_dir)


def test_sweep_json_layout(chain_sweep):
    doc = json.loads((chain_sweep[0] / "cosine-chain-sweep.json").read_text())
    assert doc["command"] == "sweep" and doc["tool"]["name"] == "bandpert"
    assert doc["settings"]["varied"] == ["potential.coefficients[0].value"]
    assert doc["settings"]["between_bands"] == [1, 2]
    assert doc["settings"]["engine"].startswith("serial")
    res = doc["results"]
    assert res["points"] == 4 and res["failures"] == [] and res["virtual_crystal"] is False
    assert np.allclose(res["parameters"][0]["values"], [0.2, 0.8, 1.4, 2.0])
    assert np.allclose(np.array(res["values"])[:, 0], [0.2, 0.8, 1.4, 2.0])
    for key in ("gap_X_eV", "lower_X_eV", "upper_X_eV", "gap_Γ_eV", "cutoff_eV", "basis_size"):
        assert len(res["columns"][key]) == 4
    assert res["units"]["gap_X_eV"] == "eV" and res["units"]["basis_size"] == "plane waves"
    assert "as given" in res["form_factors"]


def test_sweep_gaps_equal_the_mathieu_characteristic_values(chain_sweep):
    # V(x) = 2 V1 cos(2πx/a): the zone-boundary gap of bands 1–2 is E_R (a_1(q) − b_1(q)),
    # q = V1/E_R (Abramowitz & Stegun, Handbook of Mathematical Functions (1964), ch. 20;
    # scipy.special.mathieu_a / mathieu_b as the reference library).
    res = json.loads((chain_sweep[0] / "cosine-chain-sweep.json").read_text())["results"]
    e_r = HBAR2_OVER_2M0_EV_A2 * np.pi**2 / 4.0**2
    q = np.array(res["values"])[:, 0] / e_r
    exact = e_r * (scipy.special.mathieu_a(1, q) - scipy.special.mathieu_b(1, q))
    assert np.allclose(res["columns"]["gap_X_eV"], exact, rtol=0, atol=5e-3)
    # first order: 2 V1 (common practice, no source); the exact gap falls below it as q grows
    assert np.all(np.array(res["columns"]["gap_X_eV"]) < 2 * np.array(res["values"])[:, 0])


def test_sweep_csv_layout(chain_sweep):
    lines = (chain_sweep[0] / "cosine-chain-sweep.csv").read_text().splitlines()
    comments = [x for x in lines if x.startswith("#")]
    assert any("gap_X_eV [eV]" in x for x in comments)
    header = lines[len(comments)].split(",")
    assert header[0] == "potential.coefficients[0].value" and "gap_X_eV" in header
    rows = [x.split(",") for x in lines[len(comments) + 1:]]
    assert len(rows) == 4 and float(rows[-1][0]) == pytest.approx(2.0)


def test_sweep_on_a_scheduler_equals_the_serial_run(chain_sweep, dask_scheduler, tmp_path):
    code, out, err = run(["sweep", str(CHAIN), "--vary", V1_RANGE, "--quantity", "gaps",
                          "--between", "1", "--scheduler", dask_scheduler, "--k-points", "20",
                          "--out", str(tmp_path), "--name", "cosine-chain-sweep"])
    assert code == 0, err
    serial = json.loads((chain_sweep[0] / "cosine-chain-sweep.json").read_text())["results"]
    spread = json.loads((tmp_path / "cosine-chain-sweep.json").read_text())
    assert dask_scheduler in spread["settings"]["engine"]
    for key, values in serial["columns"].items():
        assert np.allclose(spread["results"]["columns"][key], values, rtol=0, atol=1e-10), key


def test_sweep_with_failed_points_keeps_the_rest_and_exits_3(tmp_path):
    code, out, err = run(["sweep", str(SILICON), "--vary", "lattice.a_A=5.43:4.9:2",
                          "--quantity", "edges", "--engine", "serial", "--k-points", "20",
                          "--out", str(tmp_path), "--name", "silicon-sweep"])
    assert code == 3, err
    assert "failed point lattice.a_A = 4.9:" in err and "semiconductor" in err
    res = json.loads((tmp_path / "silicon-sweep.json").read_text())["results"]
    assert res["failures"][0]["values"] == {"lattice.a_A": 4.9}
    assert res["failures"][0]["input_error"] is True
    assert res["columns"]["gap_eV"][0] is not None and res["columns"]["gap_eV"][1] is None
    rows = (tmp_path / "silicon-sweep.csv").read_text().splitlines()
    assert ",," in rows[-1]  # the failed point's cells are empty


@pytest.mark.parametrize("args, fragment", [
    (["--vary", "lattice.a_A"], "--vary"),
    (["--vary", "lattice.c_A=1:2:3"], "lattice.c_A"),
    (["--vary", "lattice.a_A=5.4:5.5:2", "--quantity", "bands"], "--quantity"),
    (["--vary", "lattice.a_A=5.4:5.5:2", "--engine", "serial", "--scheduler", "tcp://x:1"],
     "--scheduler"),
    (["--vary", "lattice.a_A=5.4:5.5:2", "--workers", "0"], "--workers"),
    (["--vary", "strain.xx=0:0.01:2"], "--form-factors"),
    (["--vary", "lattice.a_A=-5.4:5.5:2"], "lattice.a_A"),
])
def test_bad_sweeps_are_user_errors_and_write_nothing(args, fragment, tmp_path):
    code, out, err = run(["sweep", str(SILICON), *args, "--out", str(tmp_path / "o")])
    assert_user_error(code, err, fragment)
    assert not (tmp_path / "o").exists()


def test_dos_writes_plot_csv_and_json(tmp_path):
    code, out, err = run(["dos", str(MATERIALS / "aluminium.toml"), "--mesh", "10", "--bands",
                          "6", "--engine", "serial", "--step-meV", "50", "--out", str(tmp_path)])
    assert code == 0, err
    doc = json.loads((tmp_path / "aluminium-dos.json").read_text())
    res = doc["results"]
    assert doc["command"] == "dos" and res["method"] == "tetrahedron"
    assert res["energy_zero"]["name"] == "Fermi level" and res["gap_eV"] is None
    assert res["mesh"] == {"shape": [10, 10, 10], "full_points": 1000,
                           "irreducible_points": res["mesh"]["irreducible_points"]}
    assert 10 < res["mesh"]["irreducible_points"] < 1000
    n = len(res["energies_eV"])
    assert len(res["dos_per_eV"]) == n == len(res["integrated_electrons"])
    # three electrons below the Fermi level (the definition of E_F here)
    e = np.array(res["energies_eV"])
    assert np.interp(res["fermi_level_eV"], e, res["integrated_electrons"]) == pytest.approx(
        3.0, abs=0.02)
    csv = (tmp_path / "aluminium-dos.csv").read_text().splitlines()
    assert csv[3] == "energy_eV,energy_absolute_eV,dos_per_eV,integrated_electrons"
    assert (tmp_path / "aluminium-dos.png").read_bytes()[:4] == b"\x89PNG"
    assert "Fermi level" in out


@pytest.mark.parametrize("args, key", [
    (["--method", "histogram"], "--method"),
    (["--mesh", "1"], "--mesh"),
    (["--smearing-eV", "0"], "--smearing-eV"),
])
def test_bad_dos_requests_are_user_errors(args, key, tmp_path):
    code, out, err = run(["dos", str(MATERIALS / "aluminium.toml"), "--engine", "serial",
                          *args, "--out", str(tmp_path / "o")])
    assert_user_error(code, err, key)
    assert not (tmp_path / "o").exists()
