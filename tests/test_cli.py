"""The command line: help, `bands` outputs (image, CSV, JSON), `check`, and exit statuses.

User errors exit 2 with one stderr line; internal errors exit 1 with a one-line pointer to
``--debug``; no run leaves a temporary (dot) file in the output folder.
"""

from __future__ import annotations

import contextlib
import importlib.util
import io
import json
import pathlib
import re
from pathlib import Path

import numpy as np
import pytest
import scipy.special
import typer

import bandpert
import bandpert.cli.app as cli
import bandpert.cli.commands.bands as bands_command
import bandpert.cli.options as options
from bandpert.data import MATERIALS_DIR
from bandpert.input.material import load_material
from bandpert.physics.bands import compute_band_structure
from bandpert.planewave.model import build_model
from bandpert.units import HBAR2_OVER_2M0_EV_A2

MATERIALS = MATERIALS_DIR / "planewave"
CHAIN = MATERIALS / "cosine-chain.toml"
N_K = 30


def run(args: list[str]) -> tuple[int, str, str]:
    """Run ``bandpert ARGS`` in-process; return (exit status, stdout, stderr)."""
    stdout, stderr = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(stdout), contextlib.redirect_stderr(stderr):
        with pytest.raises(SystemExit) as stop:
            cli.main(args)
    code = stop.value.code
    return (0 if code is None else code), stdout.getvalue(), stderr.getvalue()


def assert_user_error(code: int, err: str, *fragments: str) -> None:
    assert code == 2, err
    lines = err.splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith("bandpert: error:")
    assert "Traceback" not in err
    for f in fragments:
        assert f in lines[0]


def no_dot_files(folder: Path) -> bool:
    return not folder.exists() or not any(p.name.startswith(".") for p in folder.iterdir())


@pytest.fixture(autouse=True)
def wide_console(monkeypatch):
    """A wide, plain console so that table cells are not wrapped mid-phrase."""
    monkeypatch.setattr(options.out, "width", 200)


# ---------------------------------------------------------------------------------------------
# help
# ---------------------------------------------------------------------------------------------

COMMAND = typer.main.get_command(cli.app)

#: The options each command documents (kept by hand so that a lost option is noticed).
OPTIONS = {
    "bands": ["--out", "--k-points", "--bands", "--cutoff-eV", "--fermi-mesh", "--format", "--json",
              "--name",
              "--emin", "--emax", "--order", "--threshold", "--tolerance-meV", "--radius-points",
              "--no-exact", "--exact-only", "--van-hove-marks", "--solver", "--help"],
    "check": ["--cutoff-eV", "--help"],
    "gaps": ["--json", "--name", "--point", "--crossings", "--bands", "--cutoff-eV",
             "--fermi-mesh", "--out", "--k-points", "--format", "--emin", "--emax", "--help"],
    "masses": ["--point", "--band", "--temperature", "--cutoff-eV", "--json", "--name", "--out",
               "--write-kp", "--help"],
    "kp": ["--model", "--compare", "--k-max", "--out", "--format", "--json", "--name", "--emin",
           "--emax", "--strain", "--hydro", "--on", "--growth", "--help"],
    "fullzone": ["--basis", "--k-points", "--bands", "--cutoff-eV", "--out", "--format", "--json",
                 "--name", "--emin", "--emax", "--help"],
    "sweep": ["--vary", "--quantity", "--point", "--between", "--form-factors", "--basis",
              "--alloy-end", "--k-points", "--bands", "--cutoff-eV", "--temperature", "--engine",
              "--workers", "--scheduler", "--out", "--format", "--json", "--name", "--help"],
    "subbands": ["--levels", "--spacing-nm", "--model", "--in-plane", "--k-points", "--engine",
                 "--workers", "--scheduler", "--out",
                 "--format", "--json", "--name", "--help"],
    "dos": ["--mesh", "--method", "--smearing-eV", "--step-meV", "--bands", "--cutoff-eV",
            "--engine", "--workers", "--scheduler", "--out", "--format", "--json", "--name",
            "--emin", "--emax", "--interpolate", "--tolerance-meV",
            "--basis-tolerance", "--coarse-mesh", "--help"],
    "optics": ["--mesh", "--broadening-meV", "--step-meV", "--exact", "--all-bands", "--bands",
               "--cutoff-eV", "--tolerance-meV", "--basis-tolerance", "--coarse-mesh", "--out",
               "--format", "--json", "--name", "--help"],
    "fit": ["--out", "--json", "--name", "--help"],
}


def test_app_help_lists_the_commands():
    code, out, err = run(["--help"])
    assert code == 0, err
    assert "Usage" in out
    for name in COMMAND.commands:
        assert name in out
    assert "--help" in out
    assert set(COMMAND.commands) == set(OPTIONS)


@pytest.mark.parametrize("name", sorted(OPTIONS))
def test_command_help_mentions_every_option(name):
    code, out, err = run([name, "--help"])
    assert code == 0, err
    declared = {opt for p in COMMAND.commands[name].params for opt in p.opts if opt.startswith("-")}
    assert declared | {"--help"} == set(OPTIONS[name])
    for opt in OPTIONS[name]:
        assert opt in out, opt
    assert "png" in out if name == "bands" else True


# ---------------------------------------------------------------------------------------------
# bands
# ---------------------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def chain_run(tmp_path_factory):
    """One `bands` run on the cosine chain (fast: a 1D basis of about a dozen plane waves)."""
    out_dir = tmp_path_factory.mktemp("bands")
    code, out, err = run(["bands", str(CHAIN), "--out", str(out_dir), "--k-points", str(N_K)])
    assert code == 0, err
    return out_dir, out, err


def test_bands_writes_image_csv_and_json(chain_run):
    out_dir, out, _ = chain_run
    names = sorted(p.name for p in out_dir.iterdir())
    assert names == ["cosine-chain-bands-perturbative.csv", "cosine-chain-bands.csv",
                     "cosine-chain-bands.json", "cosine-chain-bands.png"]
    assert (out_dir / "cosine-chain-bands.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert "cosine-chain-bands.json" in out
    assert no_dot_files(out_dir)


def test_bands_json_layout(chain_run):
    out_dir, _, _ = chain_run
    doc = json.loads((out_dir / "cosine-chain-bands.json").read_text(encoding="utf-8"))
    assert set(doc) == {"command", "tool", "material", "settings", "results"}
    assert doc["command"] == "bands"
    assert doc["tool"]["name"] == "bandpert"
    assert doc["material"]["file"] == str(CHAIN)
    res = doc["results"]
    for key in ("k_frac", "k_cart_invA", "path_distance_invA", "labels", "energies_eV",
                "energies_absolute_eV", "energy_zero", "basis_size"):
        assert key in res, key
    e = np.array(res["energies_eV"])
    n_k = len(res["k_frac"])
    assert n_k >= N_K - 1
    assert e.shape == (n_k, 6)  # basis.bands = 6 in cosine-chain.toml
    assert np.array(res["k_cart_invA"]).shape == (n_k, 1)
    assert np.all(np.diff(res["path_distance_invA"]) >= 0)
    assert np.all(np.diff(e, axis=1) >= -1e-12)  # ascending at each k
    assert [lab["label"] for lab in res["labels"]] == ["Γ", "X"]
    assert res["energy_zero"] == {"name": "model zero", "absolute_eV": 0.0}
    assert np.array(res["energies_absolute_eV"]) == pytest.approx(e + 0.0)
    assert res["basis_size"] == doc["settings"]["basis_size"]
    assert doc["settings"]["bands"] == 6
    pert = res["perturbative"]
    for key in ("order", "coupling_threshold", "tolerance_eV", "energies_eV", "treatment",
                "treatment_names", "error_estimate_eV", "error_bound_eV", "max_coupling_ratio",
                "group_size",
                "trustworthy", "trustworthy_fraction", "threshold_used", "convergence_radius",
                "comparison"):
        assert key in pert, key
    assert np.array(pert["energies_eV"]).shape == e.shape
    assert pert["treatment_names"] == ["non-degenerate", "subspace"]
    assert set(np.unique(pert["treatment"])) <= {0, 1}
    radius = pert["convergence_radius"]
    assert len(radius["radius"]) == len(radius["k_indices"]) == len(radius["lambda_inside"])
    cmp = pert["comparison"]
    assert np.allclose(np.array(cmp["abs_error_eV"]),
                       np.abs(np.array(pert["energies_eV"]) - e), atol=1e-12)


def test_bands_json_matches_mathieu_characteristic_values(chain_run):
    """V(x) = 2 V1 cos(2πx/a) turns the Schrödinger equation into Mathieu's equation
    y'' + (A − 2q cos 2z) y = 0 with z = πx/a, A = E/E_R, q = V1/E_R, E_R = ħ²π²/(2 m0 a²).
    Period-a solutions (Γ) have A = a_0, b_2, a_2; antiperiodic ones (X) have A = b_1, a_1
    (Abramowitz & Stegun, Handbook of Mathematical Functions (1964), ch. 20)."""
    out_dir, _, _ = chain_run
    e = np.array(json.loads((out_dir / "cosine-chain-bands.json").read_text())["results"]
                 ["energies_eV"])
    a, v1 = 4.0, 1.0  # cosine-chain.toml
    e_r = HBAR2_OVER_2M0_EV_A2 * np.pi**2 / a**2
    q = v1 / e_r
    gamma = [scipy.special.mathieu_a(0, q), scipy.special.mathieu_b(2, q),
             scipy.special.mathieu_a(2, q)]
    x = [scipy.special.mathieu_b(1, q), scipy.special.mathieu_a(1, q)]
    # the default cutoff converges the bands to 5 meV
    # (bandpert.physics.bands.CONVERGENCE_TOLERANCE_EV)
    assert e[0, :3] == pytest.approx(e_r * np.array(gamma), abs=5e-3)
    assert e[-1, :2] == pytest.approx(e_r * np.array(x), abs=5e-3)


def test_bands_csv_layout(chain_run):
    out_dir, _, _ = chain_run
    lines = (out_dir / "cosine-chain-bands.csv").read_text(encoding="utf-8").splitlines()
    header = [ln for ln in lines if ln.startswith("#")]
    assert lines[:len(header)] == header and len(header) >= 1
    assert any("eV" in h for h in header) and any("1/Angstrom" in h for h in header)
    columns = lines[len(header)].split(",")
    assert columns[:3] == ["k_index", "path_distance_invA", "k_label"]
    assert [c for c in columns if c.startswith("band")] == [f"band{i}_eV" for i in range(1, 7)]
    cells = [ln.split(",") for ln in lines[len(header) + 1:]]
    assert cells[0][2] == "Γ" and cells[-1][2] == "X" and cells[1][2] == ""
    columns = columns[:2] + columns[3:]
    rows = np.array([[float(x) for x in c[:2] + c[3:]] for c in cells])
    doc = json.loads((out_dir / "cosine-chain-bands.json").read_text())["results"]
    assert rows.shape == (len(doc["k_frac"]), len(columns))
    assert rows[:, 0].tolist() == list(range(len(rows)))
    energies = np.array(doc["energies_absolute_eV"]) - doc["energy_zero"]["absolute_eV"]
    assert rows[:, -6:] == pytest.approx(energies, abs=1e-8)


@pytest.mark.parametrize(("fmt", "magic"), [("svg", b"<svg"), ("pdf", b"%PDF")])
def test_bands_other_image_formats(fmt, magic, tmp_path):
    code, _, err = run(["bands", str(CHAIN), "--out", str(tmp_path), "--k-points", "10",
                        "--format", fmt])
    assert code == 0, err
    image = tmp_path / f"cosine-chain-bands.{fmt}"
    data = image.read_bytes()
    assert (magic in data[:2000]) if fmt == "svg" else data.startswith(magic)
    assert not (tmp_path / "cosine-chain-bands.png").exists()
    assert no_dot_files(tmp_path)


def test_bands_json_option_and_energy_window(tmp_path):
    target = tmp_path / "elsewhere" / "result.json"
    code, _, err = run(["bands", str(CHAIN), "--out", str(tmp_path / "out"), "--k-points", "10",
                        "--json", str(target), "--emin", "-1", "--emax", "12"])
    assert code == 0, err
    assert json.loads(target.read_text())["command"] == "bands"
    assert not (tmp_path / "out" / "cosine-chain-bands.json").exists()
    assert no_dot_files(tmp_path / "out") and no_dot_files(target.parent)


def test_bands_more_than_the_basis_is_a_user_error(tmp_path):
    # at a 20 eV cutoff the chain (a = 4 Å, ħ²(2π/a)²/2m0 ≈ 9.4 eV) keeps G = 0, ±2π/a only
    size = build_model(load_material(CHAIN), 20.0).size
    assert size == 3
    code, _, err = run(["bands", str(CHAIN), "--out", str(tmp_path), "--cutoff-eV", "20",
                        "--bands", "5"])
    assert_user_error(code, err, "5 bands", f"only {size} plane waves")
    assert not any(tmp_path.iterdir())


@pytest.mark.parametrize(("args", "fragment"), [
    (["--k-points", "1"], "--k-points"),
    (["--k-points", "0"], "--k-points"),
    (["--bands", "0"], "--bands"),
    (["--cutoff-eV", "-5"], "--cutoff-eV"),
    (["--emin", "3", "--emax", "1"], "--emin"),
])
def test_bad_options_are_user_errors(args, fragment, tmp_path):
    out_dir = tmp_path / "out"
    code, _, err = run(["bands", str(CHAIN), "--out", str(out_dir), *args])
    assert_user_error(code, err, fragment)
    assert not out_dir.exists() or not any(out_dir.iterdir())


# Usage errors (click's convention, exit status 2), whichever copy of click typer uses.
@pytest.mark.parametrize("args", [["bands"], ["bands", str(CHAIN), "--format", "gif"],
                                  ["bands", str(CHAIN), "--k-points", "many"], ["frobnicate"]])
def test_usage_errors_exit_2(args, tmp_path):
    code, out, err = run([*args, "--out", str(tmp_path / "out")] if args[0] == "bands"
                         else args)
    assert code == 2
    assert "Traceback" not in out + err
    assert not (tmp_path / "out").exists()


def test_missing_file_is_a_user_error(tmp_path):
    code, _, err = run(["check", str(tmp_path / "nowhere.toml")])
    assert_user_error(code, err, "nowhere.toml", "not found")


# ---------------------------------------------------------------------------------------------
# internal errors
# ---------------------------------------------------------------------------------------------

def test_internal_error_exits_1_with_a_pointer(monkeypatch, tmp_path):
    def broken(*args, **kwargs):
        raise RuntimeError("simulated failure")

    # `bands` calls the name bound in its command module (imported at module level)
    monkeypatch.setattr(bands_command, "compute_band_structure", broken)
    out_dir = tmp_path / "out"
    code, out, err = run(["bands", str(CHAIN), "--out", str(out_dir)])
    assert code == 1
    lines = err.splitlines()
    assert len(lines) == 1, err
    assert "internal error" in lines[0] and "--debug" in lines[0]
    assert "RuntimeError" in lines[0] and "simulated failure" in lines[0]
    assert "Traceback" not in out + err
    assert not out_dir.exists()
    # with --debug the exception itself propagates (the traceback is shown)
    with pytest.raises(RuntimeError, match="simulated failure"):
        cli.main(["bands", str(CHAIN), "--out", str(out_dir), "--debug"])


def test_failed_write_leaves_no_temporary_file(monkeypatch, tmp_path):
    import matplotlib.figure

    def half_written(self, path, **kwargs):
        Path(path).write_bytes(b"\x89PNG partial")
        raise RuntimeError("renderer crashed (simulated)")

    monkeypatch.setattr(matplotlib.figure.Figure, "savefig", half_written)
    code, _, err = run(["bands", str(CHAIN), "--out", str(tmp_path), "--k-points", "10"])
    assert code == 1, err
    assert "--debug" in err and len(err.splitlines()) == 1
    assert no_dot_files(tmp_path)
    assert not (tmp_path / "cosine-chain-bands.png").exists()


# ---------------------------------------------------------------------------------------------
# check
# ---------------------------------------------------------------------------------------------

def test_check_prints_lattice_and_basis(chain_run):
    code, out, err = run(["check", str(CHAIN)])
    assert code == 0, err
    assert "chain (1D), a = 4 Å" in out
    assert "(4.0000)" in out  # a1 in Å
    # the same converged default cutoff as `bands`, hence the same basis
    doc = json.loads((chain_run[0] / "cosine-chain-bands.json").read_text())
    assert f"{doc['settings']['basis_size']} plane waves at cutoff" in out
    assert "converged default" in out
    assert "Γ–X" in out


def test_check_with_a_given_cutoff():
    size = build_model(load_material(CHAIN), 50.0).size
    code, out, err = run(["check", str(CHAIN), "--cutoff-eV", "50"])
    assert code == 0, err
    assert f"{size} plane waves at cutoff 50.00 eV (given)" in out


def test_check_3d_material():
    code, out, err = run(["check", str(MATERIALS / "silicon.toml")])
    assert code == 0, err
    assert "fcc (3D), a = 5.43 Å" in out
    # the diamond structure has space group Fd-3m, No. 227 (source: International Tables for
    # Crystallography, Vol. A, 1983)
    assert "227" in out
    assert "plane waves at cutoff" in out
    # the measured deformation potentials the strain runs fit to, as the file lists them
    # (source beside each in materials/planewave/silicon.toml)
    flat = " ".join(out.split())
    assert "deformation targets indirect_gap +1.38" in flat and "xi_u +8.6" in flat


def test_check_names_the_kinetic_factor():
    code, out, err = run(["check", "gallium-arsenide-fitted"])
    assert code == 0, err
    assert "kinetic factor β = 1.077" in " ".join(out.split())


def test_check_lists_the_nonlocal_wells():
    # the file's own [nonlocal] table, read back (common practice, no source)
    import tomllib

    from bandpert.input.material import load_material
    from bandpert.physics.material_check import nonlocal_summary

    material = load_material("germanium-fitted")
    wells = tomllib.loads(open(material.file, encoding="utf-8").read())["nonlocal"]["species"]["Ge"]
    summary = nonlocal_summary(material)
    assert summary == (f"Ge: A0 = {wells['A0_eV']:.6g} eV {wells['A0_energy_slope']:+.6g}·E, "
                       f"R0 = {wells['R0_A']:g} Å, "
                       f"A2 = {wells['A2_eV']:.6g} eV, R2 = {wells['R2_A']:g} Å")
    code, out, err = run(["check", "germanium-fitted"])
    assert code == 0, err
    assert "│ nonlocal" in out and f"Ge: A0 = {wells['A0_eV']:.6g} eV" in out


# ---------------------------------------------------------------------------------------------
# masses and kp
# ---------------------------------------------------------------------------------------------



def test_masses_and_kp_close_the_loop(tmp_path):
    # masses on the zincblende model writes its JSON and the k·p file it implies; kp reads that
    # file back and draws the k·p bands beside the plane-wave ones (internal consistency).
    gaas = MATERIALS / "gallium-arsenide.toml"
    kp_file = tmp_path / "implied-kp.toml"
    code, out, err = run(["masses", str(gaas), "--out", str(tmp_path), "--write-kp",
                          str(kp_file)])
    assert code == 0, err
    doc = json.loads((tmp_path / "gallium-arsenide-masses.json").read_text(encoding="utf-8"))
    assert doc["command"] == "masses"
    entries = doc["results"]["masses"]
    assert [e["label"] for e in entries] == ["conduction minimum", "valence maximum"]
    cond, val = entries
    assert cond["sum_over_states"]["principal_masses_m0"][0] == pytest.approx(0.072, rel=0.05)
    assert cond["finite_difference"]["relative_difference"] < 1e-5
    assert val["degenerate_bands"] == [2, 3, 4]
    assert len(val["degenerate_edge"]["luttinger_gamma"]) == 3
    assert doc["results"]["kp_parameters"]["Delta_so_eV"] == 0.0
    code, out, err = run(["kp", str(kp_file), "--compare", str(gaas), "--out", str(tmp_path)])
    assert code == 0, err
    kp_doc = json.loads((tmp_path / "implied-kp.json").read_text(encoding="utf-8"))
    assert set(kp_doc["results"]["models"]) == {"two-band", "six-band", "eight-band"}
    assert (tmp_path / "implied-kp.png").exists()
    assert no_dot_files(tmp_path)


def test_masses_of_a_metal_need_a_point(tmp_path):
    code, _, err = run(["masses", str(MATERIALS / "aluminium.toml"), "--out",
                        str(tmp_path)])
    assert_user_error(code, err, "--point")


def test_kp_rejects_a_bad_model_name(tmp_path):
    code, _, err = run(["kp", str(MATERIALS_DIR / "kp" / "gallium-arsenide.toml"), "--model",
                        "nine-band", "--out", str(tmp_path)])
    assert_user_error(code, err, "--model")


def test_warnings_are_one_line_each_and_the_run_succeeds(tmp_path):
    code, _, err = run(["bands", str(MATERIALS / "square-demo.toml"), "--out", str(tmp_path),
                        "--cutoff-eV", "15", "--bands", "3", "--k-points", "20",
                        "--radius-points", "0"])
    assert code == 0
    lines = err.splitlines()
    assert lines and all(line.startswith("bandpert: warning:") for line in lines)
    assert any("not converged" in line for line in lines)
    assert "Traceback" not in err


def test_ctrl_c_ends_cleanly_without_partial_output(monkeypatch, tmp_path):
    # Ctrl-C during the computation: exit status 130, one line, no traceback, nothing written
    # (common practice, no source).
    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr(bands_command, "compute_band_structure", interrupted)
    out_dir = tmp_path / "out"
    code, _, err = run(["bands", str(CHAIN), "--out", str(out_dir)])
    assert code == 130
    assert len(err.splitlines()) == 1 and "interrupted" in err
    assert "Traceback" not in err
    assert not out_dir.exists() or not any(out_dir.iterdir())


def test_no_input_is_ever_executed():
    # The loaders parse TOML only: no eval, exec or pickle anywhere in the package (common
    # practice, no source).
    import pathlib

    package = pathlib.Path(cli.__file__).parents[1]
    text = "\n".join(p.read_text(encoding="utf-8") for p in package.rglob("*.py"))
    for word in ("eval(", "exec(", "pickle", "yaml.load"):
        assert word not in text, word


def test_library_messages_name_options_in_library_terms():
    # Only the command line knows flags: no string in the library names one (common practice,
    # no source: a notebook user never reads a flag name).
    import ast
    import pathlib

    package = pathlib.Path(cli.__file__).parents[1]
    offenders = []
    for path in package.rglob("*.py"):
        if "cli" in path.relative_to(package).parts:
            continue
        tree = ast.parse(path.read_text(encoding="utf-8"))
        docstrings = {id(n.body[0].value) for n in ast.walk(tree)
                      if isinstance(n, ast.Module | ast.ClassDef | ast.FunctionDef)
                      and n.body and isinstance(n.body[0], ast.Expr)}
        for node in ast.walk(tree):
            if (isinstance(node, ast.Constant) and id(node) not in docstrings
                    and isinstance(node.value, str)
                    and any(w.startswith("--") and w[2:3].isalpha()
                            for w in node.value.split())):
                offenders.append(f"{path.name}:{node.lineno}: {node.value[:60]}")
    assert not offenders, offenders


@pytest.mark.parametrize("args, line", [
    (["sweep", str(MATERIALS / "silicon.toml"), "--vary", "lattice.a_A=5.4:5.5:2",
      "--form-factors", "smooth", "--engine", "serial"], "--form-factors: unknown mode"),
    (["dos", str(CHAIN), "--method", "boxes", "--engine", "serial"], "--method: unknown method"),
    (["bands", str(CHAIN), "--order", "7"], "--order: expected an order from 1 to 6"),
    (["bands", str(CHAIN), "--threshold", "0.7"], "--threshold: expected a coupling threshold"),
])
def test_library_errors_are_shown_with_their_flags(args, line, tmp_path):
    code, _, err = run([*args, "--out", str(tmp_path)])
    assert_user_error(code, err, line)


def test_bundled_materials_are_found_by_name(tmp_path):
    # `bandpert check silicon` reads the bundled file (package data); a path still works.
    code, out, err = run(["check", "silicon"])
    assert code == 0, err
    assert "fcc (3D), a = 5.43 Å" in out
    code, _, err = run(["kp", "gallium-arsenide", "--out", str(tmp_path)])
    assert code == 0, err  # the k·p file of that name, not the plane-wave one
    code, _, err = run(["check", "unobtainium"])
    assert_user_error(code, err, "unobtainium", "silicon", "germanium")


def test_default_names_differ_between_modes_and_name_sets_them(tmp_path):
    # exact-only and comparison runs of one file do not overwrite each other; --name names
    # every file of a run; the default folder is not a tracked one (issue: named outputs).
    args = ["bands", str(CHAIN), "--k-points", "10", "--out", str(tmp_path)]
    assert run([*args, "--exact-only"])[0] == 0
    assert run([*args, "--no-exact", "--radius-points", "0"])[0] == 0
    assert run([*args, "--exact-only", "--name", "mine"])[0] == 0
    names = sorted(p.name for p in tmp_path.iterdir())
    assert names == ["cosine-chain-exact-bands.csv", "cosine-chain-exact-bands.json",
                     "cosine-chain-exact-bands.png", "cosine-chain-perturbative-bands-"
                     "perturbative.csv", "cosine-chain-perturbative-bands.csv",
                     "cosine-chain-perturbative-bands.json", "cosine-chain-perturbative-bands.png",
                     "mine.csv", "mine.json", "mine.png"]
    code, _, err = run([*args, "--name", "a/b"])
    assert_user_error(code, err, "--name")
    assert options.DEFAULT_OUT.name == "bandpert-out"


def test_mass_points_get_their_own_default_names(tmp_path):
    code, _, err = run(["masses", str(CHAIN), "--point", "X", "--band", "2", "--out",
                        str(tmp_path)])
    assert code == 0, err
    assert (tmp_path / "cosine-chain-masses-X-band2.json").exists()


def test_readme_figures_are_the_ones_the_script_regenerates():
    # Every figure the README shows is written by docs/figures/regenerate.py under that name,
    # with the very command the README prints beside it.
    root = pathlib.Path(__file__).resolve().parents[1]  # the checkout, also when installed
    spec = importlib.util.spec_from_file_location("regenerate",
                                                  root / "docs" / "figures" / "regenerate.py")
    regenerate = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(regenerate)
    readme = (root / "README.md").read_text(encoding="utf-8")
    shown = set(re.findall(r"\]\(docs/figures/([\w.-]+\.png)\)", readme))
    assert shown == set(regenerate.FIGURES)
    flat = " ".join(readme.split())
    for commands in regenerate.FIGURES.values():
        for args in commands:
            assert regenerate.command_text(args) in flat, args


def test_help_lists_choices_and_hides_flag_metavars():
    # Flags take no value, so their help shows none; choice options list their choices; the
    # file argument reads FILE|NAME; --version prints the version (common practice, no source).
    for cmd in ("bands", "check", "gaps", "masses", "kp", "fullzone", "sweep", "dos", "optics",
                "subbands", "fit"):
        code, out, err = run([cmd, "--help"])
        assert code == 0 and "<bool>" not in out, (cmd, err)  # no flag shows a value metavar
    for name, shown in [("bands", ["FILE|NAME"]), ("dos", ["tetrahedron|gaussian"]),
                        ("sweep", ["edges|gaps|masses", "tabulated|continuous", "scaled|fixed"]),
                        ("kp", ["two-band|six-band|eight-band"])]:
        code, out, err = run([name, "--help"])
        assert code == 0, err
        for text in shown:
            assert text in out, (name, text)
        assert "<list[str]>" not in out and "{file}" not in out
    code, out, _ = run(["--version"])
    assert code == 0 and out.strip() == f"bandpert {bandpert.__version__}"


def test_the_readme_python_example_uses_the_top_level_api():
    # Every `bp.NAME` the README's notebook example calls is exported by `bandpert` itself.
    readme = (pathlib.Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")
    used = set(re.findall(r"\bbp\.(\w+)\(", readme))
    assert {"load_material", "compute_band_structure", "edge_masses", "gap_analysis"} <= used
    assert used <= set(bandpert.__all__), used - set(bandpert.__all__)


def test_bands_summary_says_metal_or_semiconductor(tmp_path):
    # Aluminium has no gap between occupied and empty bands, silicon has one (Ashcroft & Mermin,
    # Solid State Physics, 1976, ch. 9 and ch. 28; from memory).
    code, out, err = run(["bands", str(MATERIALS / "aluminium.toml"), "--exact-only",
                          "--k-points", "10", "--out", str(tmp_path)])
    assert code == 0, err
    assert "metal (no gap" in out
    code, out, err = run(["bands", "silicon", "--exact-only", "--k-points", "10", "--out",
                          str(tmp_path)])
    assert code == 0, err
    assert "semiconductor or insulator" in out and "metal (" not in out


def test_fermi_mesh_option_sets_and_records_a_metals_mesh(tmp_path):
    # source: the free-electron Fermi energy of aluminium, 11.7 eV (N. W. Ashcroft & N. D.
    # Mermin, Solid State Physics (1976), Table 2.1): the band bottom lies about that far below
    # the Fermi level of a nearly-free-electron aluminium, at the default mesh and a coarse one
    # alike, and the two Fermi levels agree to a few tens of meV
    material = load_material(str(MATERIALS / "aluminium.toml"))
    bottoms = {}
    for mesh in (None, 10):
        bs = compute_band_structure(material, n_k=10, fermi_mesh=mesh)
        assert bs.energy_zero_kind == "Fermi level" and bs.fermi_mesh == (mesh or 24)
        bottoms[mesh] = float(np.min(bs.energies_eV)) - bs.energy_zero_eV
        assert bottoms[mesh] == pytest.approx(-11.7, abs=0.4)
    assert abs(bottoms[None] - bottoms[10]) < 0.05
    code, _, err = run(["gaps", str(MATERIALS / "aluminium.toml"), "--fermi-mesh", "10",
                        "--k-points", "10", "--no-crossings", "--out", str(tmp_path)])
    assert code == 0, err
    settings = json.loads((tmp_path / "aluminium-gaps.json").read_text())["settings"]
    assert settings["fermi_mesh"] == 10
    code, _, err = run(["bands", "silicon", "--exact-only", "--k-points", "10", "--fermi-mesh",
                        "10", "--out", str(tmp_path)])
    assert code == 0, err        # an insulator: its zero is the valence top, the mesh unused
    assert json.loads((tmp_path / "silicon-exact-bands.json").read_text()
                      )["settings"]["fermi_mesh"] is None


@pytest.mark.parametrize("value, words", [("1", "at least 2"), ("101", "expected at most")])
def test_bad_fermi_mesh_is_refused_in_one_line(value, words, tmp_path):
    code, _, err = run(["bands", str(MATERIALS / "aluminium.toml"), "--fermi-mesh", value,
                        "--out", str(tmp_path)])
    assert_user_error(code, err, "--fermi-mesh", words)
    assert no_dot_files(tmp_path) and not any(tmp_path.iterdir())
