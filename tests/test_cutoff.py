"""The one cutoff rule: choice, converged search and its budget, sizes checked before allocation."""

from __future__ import annotations

import copy
import subprocess
import sys
import tomllib

import pytest
from conftest import MATERIALS, bundled

from bandpert.crystal.kmesh import MAX_MESH_POINTS, reciprocal_mesh
from bandpert.crystal.lattice import reciprocal_vectors
from bandpert.errors import InputError
from bandpert.input.material import parse_material
from bandpert.planewave import cutoff
from bandpert.planewave.basis import MAX_ENUMERATED, estimated_basis_size, plane_wave_basis
from bandpert.planewave.model import build_model


def gaas_doc() -> dict:
    return tomllib.loads((MATERIALS / "gallium-arsenide.toml").read_text(encoding="utf-8"))


def hostile(kind: str) -> dict:
    """The inputs that made the converged-cutoff search hang (issue 15's fuzz cases)."""
    doc = gaas_doc()
    if kind == "a x 1e6":
        doc["lattice"]["a_A"] *= 1e6
    elif kind == "a int64 max":
        doc["lattice"]["a_A"] = 2**63 - 1
    elif kind == "form factors x 1e6":
        doc["potential"]["symmetric"] = [x * 1e6 for x in doc["potential"]["symmetric"]]
    return doc


@pytest.fixture
def no_diagonalisation(monkeypatch):
    """Fail if the search diagonalises anything: a refusal must come before any work."""
    def forbidden(*args, **kwargs):
        raise AssertionError("the search diagonalised a Hamiltonian before refusing")
    monkeypatch.setattr(cutoff, "exact_energies", forbidden)


@pytest.mark.parametrize("kind", ["a x 1e6", "a int64 max", "form factors x 1e6"])
def test_hostile_inputs_are_refused_before_any_work(kind, no_diagonalisation):
    # refused by the reader's range checks or by the search's strength limit, in one line
    with pytest.raises(InputError) as err:
        cutoff.converged_cutoff(parse_material(hostile(kind), "hostile.toml"), 8)
    text = str(err.value)
    assert "hostile.toml" in text and "\n" not in text


def test_search_refuses_a_potential_it_cannot_converge_before_any_work(no_diagonalisation):
    # 100x the GaAs form factors: inside the reader's range, 16x the first shell's kinetic
    # energy, beyond the search's limit of 10
    doc = gaas_doc()
    doc["potential"]["symmetric"] = [x * 100 for x in doc["potential"]["symmetric"]]
    material = parse_material(doc, "hostile.toml")
    with pytest.raises(InputError) as err:
        cutoff.converged_cutoff(material, 8)
    text = str(err.value)
    assert "hostile.toml" in text and "\n" not in text and "first reciprocal-lattice shell" in text


def test_bundled_materials_lie_well_inside_the_strength_limit():
    # ratio max|V(G)| / (ħ²|G1|²/2m0) of the bundled models (measured: 0.03–0.17); the limit
    # keeps a factor of about 60 of headroom (common practice, no source)
    for name in ("silicon", "germanium", "gallium-arsenide", "aluminium", "cosine-chain",
                 "square-demo"):
        v, e1 = cutoff.potential_strength(bundled(name))
        assert 0 < v / e1 < cutoff.SEARCH_MAX_STRENGTH / 50


def test_plane_wave_budget_ends_the_search_in_one_line(monkeypatch):
    monkeypatch.setattr(cutoff, "SEARCH_MAX_BASIS", 100)
    with pytest.raises(InputError) as err:
        cutoff.converged_cutoff(bundled("silicon"), 8)
    text = str(err.value)
    assert "budget of 100 plane waves" in text and "basis.cutoff_eV" in text
    assert "\n" not in text


def test_time_budget_ends_the_search_in_one_line(monkeypatch):
    monkeypatch.setattr(cutoff, "SEARCH_SECONDS", 0.0)
    with pytest.raises(InputError, match="budget of 0 s"):
        cutoff.converged_cutoff(bundled("silicon"), 8)


def test_a_strong_but_legitimate_potential_still_converges_within_the_budget():
    # −1 Ry on the first GaAs shell (5× the tabulated −0.23 Ry) once grew the basis without end
    doc = gaas_doc()
    doc["potential"]["symmetric"][0] = -1
    material = parse_material(doc, "strong.toml")
    c = cutoff.converged_cutoff(material, 8)
    assert build_model(material, 1.5 * c).size <= cutoff.SEARCH_MAX_BASIS
    assert cutoff.warn_if_unconverged(material, c, 8) < cutoff.CONVERGENCE_TOLERANCE_EV


@pytest.mark.parametrize("bad", [0.0, -5.0, float("nan"), float("inf")])
def test_a_given_cutoff_must_be_positive_and_finite(bad, silicon):
    with pytest.raises(InputError, match="cutoff_eV"):
        cutoff.choose_cutoff(silicon, 8, bad)


def test_the_rule_prefers_the_given_cutoff_then_the_file_then_the_search(silicon):
    assert cutoff.choose_cutoff(silicon, 8, 123.0, check_convergence=False) == 123.0
    doc = tomllib.loads((MATERIALS / "silicon.toml").read_text(encoding="utf-8"))
    with_file = copy.deepcopy(doc)
    with_file.setdefault("basis", {})["cutoff_eV"] = 150.0
    m = parse_material(with_file, "si.toml")
    assert cutoff.choose_cutoff(m, 8, check_convergence=False) == 150.0
    assert cutoff.choose_cutoff(m, 8, 99.0, check_convergence=False) == 99.0


def test_basis_size_is_estimated_before_enumeration(silicon):
    b = reciprocal_vectors(silicon.vectors_A)
    for c in (20.0, 100.0, 400.0):
        # the estimate bounds the count from above (sphere widened by one reciprocal vector)
        assert plane_wave_basis(b, c).size <= estimated_basis_size(b, c)
    huge = 1e6
    assert estimated_basis_size(b, huge) > MAX_ENUMERATED
    with pytest.raises(InputError, match="plane waves"):
        plane_wave_basis(b, huge)


def test_mesh_size_is_checked_before_allocation(silicon):
    n = int(round(MAX_MESH_POINTS ** (1 / 3))) + 1
    with pytest.raises(InputError, match="expected at most"):
        reciprocal_mesh(silicon, n)
    with pytest.raises(InputError, match="expected at most"):
        reciprocal_mesh(silicon, 2**62)


@pytest.mark.parametrize("old,new", [("a_A = 5.64", "a_A = 5.64e6"),
                                     ("symmetric = [-0.23,", "symmetric = [-0.23e6,")])
def test_check_refuses_hostile_files_in_one_line(old, new, tmp_path):
    text = (MATERIALS / "gallium-arsenide.toml").read_text(encoding="utf-8")
    assert old in text
    path = tmp_path / "hostile.toml"
    path.write_text(text.replace(old, new, 1), encoding="utf-8")
    proc = subprocess.run([sys.executable, "-m", "bandpert", "check", str(path)],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 2, proc.stderr
    assert "Traceback" not in proc.stderr and len(proc.stderr.strip().splitlines()) == 1
    assert "hostile.toml" in proc.stderr
