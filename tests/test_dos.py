"""Density of states: the k-mesh and its C order, the linear tetrahedron method against the free
electron gas in 1D, 2D and 3D, the Fermi level of aluminium, silicon's gap, sum rules and
properties of single simplices."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import bundled, make_material
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import quad

from bandpert.crystal.kmesh import KMesh, full_grid_frac, reciprocal_mesh
from bandpert.crystal.lattice import point_group_rotations
from bandpert.errors import InputError
from bandpert.physics import dos, tetrahedra
from bandpert.planewave.model import build_model
from bandpert.planewave.solver import exact_energies
from bandpert.units import HBAR2_OVER_2M0_EV_A2 as C

A_AL = 4.05  # Å, aluminium (source: Ashcroft & Mermin, Solid State Physics (1976), Table 4.3)


def empty(kind: str, a: float, d: int):
    return make_material({"type": kind, "a_A": a}, [{"species": "X", "position": [0.0] * d}],
                         {"form": "empty"})


def empty_bands(material, mesh: KMesh, n_bands: int, cutoff_eV: float) -> np.ndarray:
    """Empty-lattice bands: with V = 0 the Hamiltonian is its kinetic diagonal, so the sorted
    diagonal is the spectrum (checked against the diagonalisation at a few points)."""
    model = build_model(material, cutoff_eV)
    e = np.sort(model.kinetic_eV(mesh.k_cart_invA), axis=1)[:, :n_bands]
    np.testing.assert_allclose(exact_energies(model, mesh.k_cart_invA[:3], n_bands), e[:3],
                               atol=1e-9)
    return e


# --------------------------------------------------------------------------------------------
# the mesh
# --------------------------------------------------------------------------------------------


def test_full_grid_is_in_c_order():
    # C order by definition of KMesh: index = i0 n1 n2 + i1 n2 + i2 (common practice, no source)
    k = full_grid_frac((2, 3, 4))
    i0, i1, i2 = 1, 2, 3
    np.testing.assert_allclose(k[i0 * 12 + i1 * 4 + i2], [1 / 2, 2 / 3, 3 / 4])
    assert len(k) == 24


def test_orthorhombic_mesh_maps_each_point_to_its_mirror_images():
    # Orthorhombic P with one atom: point group mmm, whose reciprocal-space operations flip the
    # sign of any set of fractional components; the irreducible point of (i0, i1, i2) must be
    # (±i0/n0, ±i1/n1, ±i2/n2) mod 1, and per axis n → ⌊n/2⌋ + 1 classes
    # (common practice, no source). Distinct n per axis exposes any mix-up of spglib's
    # first-index-fastest grid with our C order.
    m = make_material({"type": "orthorhombic", "a_A": 3.0, "b_A": 4.0, "c_A": 5.0},
                      [{"species": "X", "position": [0.0, 0.0, 0.0]}], {"form": "empty"})
    mesh = reciprocal_mesh(m, (4, 5, 6))
    n = np.array(mesh.shape)
    assert mesh.n_full == 120
    assert len(mesh.k_frac) == 3 * 3 * 4
    full = np.rint(mesh.full_k_frac * n).astype(int)
    irr = np.rint(mesh.k_frac[mesh.full_to_irreducible] * n).astype(int)
    assert np.all((np.mod(irr - full, n) == 0) | (np.mod(irr + full, n) == 0))
    np.testing.assert_allclose(mesh.weights, np.bincount(mesh.full_to_irreducible) / 120)
    assert mesh.weights.sum() == pytest.approx(1.0, abs=1e-14)


@pytest.mark.parametrize("bad, why", [(1, "at least 2"), ((4, 4), "3"), (2.5, "integer"),
                                      ((4, 0, 4), "at least 2"), (True, "whole")])
def test_bad_mesh_is_refused(bad, why):
    with pytest.raises(InputError, match=why) as err:
        reciprocal_mesh(empty("fcc", A_AL, 3), bad)
    assert err.value.key == "mesh"


@pytest.fixture(scope="module")
def silicon_mesh():
    """Silicon, 8×8×8 mesh, 6 bands at a small cutoff (51 plane waves): the irreducible mesh
    with its energies, and the full grid with energies computed at each of its 512 points
    (at the image of the point reached from its irreducible point by a symmetry operation)."""
    si = bundled("silicon")
    model = build_model(si, 60.0)
    mesh = reciprocal_mesh(si, 8)
    e_irr = exact_energies(model, mesh.k_cart_invA, 6)
    full = reciprocal_mesh(si, 8, reduce_by_symmetry=False)
    e_full = exact_energies(model, symmetry_images(si, mesh) @ mesh.reciprocal_invA, 6)
    return mesh, e_irr, full, e_full


def test_irreducible_silicon_mesh_unfolds_to_the_full_grid(silicon_mesh):
    # Symmetry-equivalent k have equal energies (Ashcroft & Mermin (1976), ch. 8, from memory):
    # every full-grid point, in C order, must be R k_irr (mod a reciprocal lattice vector) for an
    # operation R of the point group (or R followed by k → −k) and its unfolded energies must be
    # the energies computed at that image. The image, not any k + G: a finite plane-wave basis
    # around Γ makes E(k + G) differ from E(k) by the basis error (0.2 eV at 60 eV here).
    mesh, e_irr, full, e_full = silicon_mesh
    assert len(mesh.k_frac) == 29 and full.n_full == mesh.n_full == 512
    diff = full.k_frac - full.full_k_frac
    np.testing.assert_allclose(diff, np.rint(diff), atol=1e-12)  # the same points, folded
    np.testing.assert_allclose(mesh.unfold(e_irr), e_full, atol=1e-9)


def test_grouped_simplices_give_the_dos_of_every_simplex(silicon_mesh):
    # The irreducible mesh integrates simplices grouped by the irreducible points at their
    # corners (equal corner energies, added once with their multiplicity); the full grid with
    # energies computed at every point integrates each of its 6·512 tetrahedra on its own. The
    # two are the same sum (Blöchl, Jepsen & Andersen, Phys. Rev. B 49, 16223 (1994): the DOS
    # is a sum over tetrahedra), so DOS, count and Fermi level agree to rounding.
    mesh, e_irr, full, e_full = silicon_mesh
    corners, weights = tetrahedra.irreducible_simplices(mesh)
    assert len(corners) < 6 * 512 / 10 and weights.sum() == pytest.approx(1.0, abs=1e-14)
    plain, w_plain = tetrahedra.irreducible_simplices(full)
    assert plain.shape == (6 * 512, 4) and np.all(w_plain == 1 / (6 * 512))
    grid = np.linspace(e_irr.min() - 0.5, e_irr[:, -1].min(), 400)
    a, b = dos.tetrahedron_dos(mesh, e_irr, grid), dos.tetrahedron_dos(full, e_full, grid)
    np.testing.assert_allclose(a.dos_per_eV, b.dos_per_eV, atol=1e-8)
    np.testing.assert_allclose(a.integrated, b.integrated, atol=1e-9)
    for n in (3.0, 5.0):  # a partly filled band: a metal-like level inside the bands
        assert dos.fermi_level_from_count(mesh, e_irr, n) == pytest.approx(
            dos.fermi_level_from_count(full, e_full, n), abs=1e-8)


def symmetry_images(material, mesh: KMesh) -> np.ndarray:
    """For each full-grid point, the image ±R k_irr of its irreducible point that equals it
    modulo a reciprocal lattice vector (R from spglib, acting on fractional reciprocal rows as
    W⁻¹ for the direct-space rotation W)."""
    w = point_group_rotations(material)
    m = np.unique(np.rint(np.linalg.inv(w)).astype(int), axis=0)
    m = np.concatenate([m, -m])
    k_irr = mesh.k_frac[mesh.full_to_irreducible]
    images = np.einsum("ni,oij->noj", k_irr, m)
    diff = images - mesh.full_k_frac[:, None, :]
    ok = np.all(np.abs(diff - np.rint(diff)) < 1e-9, axis=-1)
    assert np.all(ok.any(axis=1)), "a full-grid point is no image of its irreducible point"
    return images[np.arange(len(images)), np.argmax(ok, axis=1)]


def test_empty_fcc_mesh_unfolds_to_energies_at_the_full_grid_points():
    # Free electrons in a basis holding every G the lowest bands need are periodic in k, so
    # the unfolded energies equal those computed directly at k_frac = i/n in [0, 1), C order
    # (Ashcroft & Mermin (1976), ch. 9, the empty lattice, from memory).
    m = empty("fcc", A_AL, 3)
    mesh = reciprocal_mesh(m, 6)
    model = build_model(m, 300.0)
    direct = np.sort(model.kinetic_eV(mesh.full_k_frac @ mesh.reciprocal_invA), axis=1)[:, :6]
    unfolded = mesh.unfold(empty_bands(m, mesh, 6, 300.0))
    np.testing.assert_allclose(unfolded, direct, atol=1e-10)


def test_irreducible_and_full_mesh_give_the_same_dos(silicon_mesh):
    # Same energies on the same tetrahedra, so the same DOS (common practice, no source).
    mesh, e_irr, full, e_full = silicon_mesh
    grid = np.linspace(e_full.min() - 0.5, e_full[:, -1].min(), 400)
    a = dos.tetrahedron_dos(mesh, e_irr, grid)
    b = dos.tetrahedron_dos(full, e_full, grid)
    np.testing.assert_allclose(a.dos_per_eV, b.dos_per_eV, rtol=0, atol=1e-10)
    np.testing.assert_allclose(a.integrated, b.integrated, rtol=0, atol=1e-10)
    assert a.dos_per_eV.max() > 0.5  # a real comparison, not zeros against zeros


# --------------------------------------------------------------------------------------------
# free electrons
# --------------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def free_fcc():
    """Empty fcc lattice a = 4.05 Å, 24³ mesh, 30 bands (covering every state up to ~76 eV)."""
    m = empty("fcc", A_AL, 3)
    mesh = reciprocal_mesh(m, 24)
    return m, mesh, empty_bands(m, mesh, 30, 300.0)


def test_free_electron_dos_is_square_root_in_3d(free_fcc):
    # g(E) = Ω/(2π²) (2m/ħ²)^{3/2} √E, N(E) = Ω/(3π²) (2m/ħ²)^{3/2} E^{3/2}, both spins
    # (source: Ashcroft & Mermin, Solid State Physics (1976), ch. 2, eqs. 2.61–2.62, from memory).
    m, mesh, e = free_fcc
    top = dos.band_energy_window(e)[1]
    assert top > 70.0
    grid = np.arange(2.0, 40.0 + 1e-9, 0.25)  # well inside the window the 30 bands cover
    d = dos.tetrahedron_dos(mesh, e, grid)
    g = m.volume_A / (2 * np.pi**2) * C**-1.5 * np.sqrt(grid)
    n = m.volume_A / (3 * np.pi**2) * (grid / C) ** 1.5
    rel = d.dos_per_eV / g - 1
    w = grid >= 4.0
    # the sorted empty-lattice bands kink where they cross (zone faces: L 6.9 eV, X 9.2 eV, …);
    # linear interpolation makes spikes of ~10 % at single energies there, so the pointwise
    # check is an rms one and the local one is over 2-eV bins (measured: rms 2.3 %, largest
    # single-point deviation 11 %, largest bin deviation 0.9 %)
    assert np.sqrt(np.mean(rel[w] ** 2)) < 0.04
    edges = np.arange(4.0, 40.0 + 1e-9, 2.0)
    for lo, hi in zip(edges[:-1], edges[1:], strict=False):
        s = (grid >= lo - 1e-9) & (grid <= hi + 1e-9)
        exact = m.volume_A / (3 * np.pi**2) * C**-1.5 * (hi**1.5 - lo**1.5)
        assert np.trapezoid(d.dos_per_eV[s], grid[s]) == pytest.approx(exact, rel=0.02)
    # integrated count (exact for the interpolation; measured within 0.40 % from 6 eV up); lower
    # down the sphere spans few mesh cells and the relative error grows (0.59 % at 4 eV)
    high = grid >= 6.0
    np.testing.assert_allclose(d.integrated[high], n[high], rtol=0.005)
    slope = np.polyfit(np.log(grid[w]), np.log(d.dos_per_eV[w]), 1)[0]
    assert slope == pytest.approx(0.5, abs=0.02)  # measured 0.5008


def test_free_electron_dos_is_constant_in_2d():
    # g = A m/(π ħ²), both spins; with C = ħ²/2m that is A/(2π C)
    # (source: Ashcroft & Mermin (1976), ch. 2, problem 1, from memory).
    m = empty("square", 3.0, 2)
    mesh = reciprocal_mesh(m, 48)
    e = empty_bands(m, mesh, 16, 200.0)
    top = dos.band_energy_window(e)[1]
    grid = np.arange(1.0, 0.8 * top, 0.1)
    d = dos.tetrahedron_dos(mesh, e, grid)
    g = m.volume_A / (2 * np.pi * C)
    rel = d.dos_per_eV / g - 1
    assert np.sqrt(np.mean(rel**2)) < 0.05  # measured 3.6 % (spikes at the band crossings)
    np.testing.assert_allclose(d.integrated, g * grid, rtol=0.004)  # measured 0.25 %


def test_free_electron_dos_in_1d():
    # g(E) = L/(π √(C E)) both spins, N = 2 L √(E/C)/π (source: Ashcroft & Mermin (1976), ch. 2,
    # the 1D case of eq. 2.61's derivation, from memory).
    m = empty("chain", 2.5, 1)
    mesh = reciprocal_mesh(m, 200)
    e = empty_bands(m, mesh, 8, 1500.0)
    grid = np.arange(1.0, 0.8 * dos.band_energy_window(e)[1], 0.1)
    d = dos.tetrahedron_dos(mesh, e, grid)
    length = m.volume_A
    # measured: DOS within 0.87 %, count within 6e-5 (relative), 1–236 eV
    np.testing.assert_allclose(d.dos_per_eV, length / (np.pi * np.sqrt(C * grid)), rtol=0.015)
    np.testing.assert_allclose(d.integrated, 2 * length * np.sqrt(grid / C) / np.pi, rtol=2e-4)


def free_electron_fermi_energy(n_per_A3: float) -> float:
    # k_F³ = 3π² n, E_F = ħ²k_F²/2m (source: Ashcroft & Mermin (1976), ch. 2, from memory)
    return C * (3 * np.pi**2 * n_per_A3) ** (2 / 3)


def test_aluminium_free_electron_fermi_level():
    # Al: 3 electrons per atom, fcc a = 4.05 Å: E_F = 11.7 eV (source: Ashcroft & Mermin,
    # Solid State Physics (1976), Table 2.1). Measured with a 32³ mesh: 11.6603 eV against the
    # analytic 11.6524 eV (+8 meV; the linear interpolation error falls as 1/n²).
    m = empty("fcc", A_AL, 3)
    mesh = reciprocal_mesh(m, 32)
    e = empty_bands(m, mesh, 8, 150.0)
    ef = dos.fermi_level_from_count(mesh, e, 3)
    exact = free_electron_fermi_energy(3 / m.volume_A)
    assert ef == pytest.approx(11.7, abs=0.05)
    assert ef == pytest.approx(exact, abs=0.02)
    assert dos.tetrahedron_count(mesh, e, ef) == pytest.approx(3.0, abs=1e-8)


@pytest.fixture(scope="module")
def aluminium():
    """The bundled aluminium (weak local pseudopotential), 150 eV (65 plane waves), 20³ mesh."""
    al = bundled("aluminium")
    mesh = reciprocal_mesh(al, 20)
    return al, mesh, exact_energies(build_model(al, 150.0), mesh.k_cart_invA, 8)


def test_aluminium_pseudopotential_fermi_level_is_nearly_free(aluminium):
    # A weak pseudopotential moves E_F little from the free-electron value (Ashcroft & Mermin
    # (1976), ch. 9, from memory). Measured: 11.550 eV at 20³ (11.529 eV at 28³; the same at
    # 200 and 300 eV cutoff) against 11.652 eV free: −0.10 eV.
    al, mesh, e = aluminium
    ef = dos.fermi_level_from_count(mesh, e, al.valence_electrons)
    assert ef == pytest.approx(free_electron_fermi_energy(3 / al.volume_A), abs=0.3)


def test_gaussian_and_tetrahedron_fermi_levels_agree_for_aluminium(aluminium):
    # Two counts of the same states must place E_F within the smearing (common practice, no
    # source). Measured: tetrahedron 11.550 eV, Gaussian (σ = 0.2 eV) 11.547 eV.
    al, mesh, e = aluminium
    sigma = 0.2
    tet = dos.fermi_level_from_count(mesh, e, 3)
    gau = dos.fermi_level_from_count(mesh, e, 3, method="gaussian", smearing_eV=sigma)
    assert abs(tet - gau) < sigma
    assert dos.gaussian_dos(e, mesh.weights, np.array([gau, gau + 1]), sigma).integrated[0] == (
        pytest.approx(3.0, abs=1e-8))


def test_too_few_bands_are_refused(aluminium):
    # Two bands hold 4 electrons, but the second band's bottom (at L, 6.9 eV) is far below
    # E_F ≈ 11.6 eV: the count there would miss the third band (common practice, no source).
    al, mesh, e = aluminium
    for method in ("tetrahedron", "gaussian"):
        with pytest.raises(InputError, match="cannot hold") as err:
            dos.fermi_level_from_count(mesh, e[:, :2], 3, method=method)
        assert err.value.key == "bands"
    with pytest.raises(InputError, match="at least 2 bands") as err:
        dos.fermi_level_from_count(mesh, e[:, :1], 3)
    assert err.value.key == "bands"


# --------------------------------------------------------------------------------------------
# sum rules and the gap
# --------------------------------------------------------------------------------------------


def test_sum_rules(silicon_mesh):
    # Each band holds 2 electrons; D is the derivative of N (common practice, no source).
    mesh, e, _, _ = silicon_mesh
    assert dos.tetrahedron_count(mesh, e, e.max() + 1e-6) == pytest.approx(12.0, abs=1e-12)
    assert dos.tetrahedron_count(mesh, e, e.min() - 1e-6) == 0.0
    grid = np.linspace(e.min() - 0.1, e.max() + 0.1, 3001)
    d = dos.tetrahedron_dos(mesh, e, grid)
    running = np.concatenate(([0.0], np.cumsum(np.diff(grid) * 0.5 * (d.dos_per_eV[1:]
                                                                       + d.dos_per_eV[:-1]))))
    np.testing.assert_allclose(running, d.integrated, atol=2e-3)  # measured 2.0e-4
    assert d.integrated[-1] == pytest.approx(12.0, abs=1e-12)
    np.testing.assert_allclose(dos.tetrahedron_count(mesh, e, grid), d.integrated, atol=1e-12)
    # Gaussian: the count is the exact integral of the density
    grid = np.linspace(e.min() - 1.0, e.max() + 1.0, 3001)  # 10 σ beyond the levels
    g = dos.gaussian_dos(e, mesh.weights, grid, 0.1)
    running = g.integrated[0] + np.concatenate(([0.0], np.cumsum(
        np.diff(grid) * 0.5 * (g.dos_per_eV[1:] + g.dos_per_eV[:-1]))))
    np.testing.assert_allclose(running, g.integrated, atol=3e-4)  # measured 7.5e-5
    assert g.integrated[-1] == pytest.approx(12.0, abs=1e-9)
    assert g.method == "gaussian" and g.smearing_eV == 0.1
    assert d.method == "tetrahedron" and d.smearing_eV is None


def test_silicon_fermi_level_lies_in_the_gap(silicon_mesh):
    # Silicon's 8 valence electrons fill 4 bands; the tetrahedron DOS vanishes between the
    # valence maximum and the conduction minimum on the mesh and E_F is placed mid-gap
    # (Ashcroft & Mermin (1976), ch. 28, from memory; mid-gap is common practice, no source).
    mesh, e, _, _ = silicon_mesh
    vbm, cbm = e[:, 3].max(), e[:, 4].min()
    assert cbm - vbm > 0.5  # measured 0.93 eV (10.592 → 11.519 eV) on this mesh and basis
    for method in ("tetrahedron", "gaussian"):
        ef = dos.fermi_level_from_count(mesh, e, 8, method=method)
        assert ef == pytest.approx(0.5 * (vbm + cbm), abs=1e-12)
    grid = np.linspace(vbm, cbm, 52)[1:-1]
    d = dos.tetrahedron_dos(mesh, e, grid)
    np.testing.assert_allclose(d.dos_per_eV, 0.0, atol=1e-12)
    np.testing.assert_allclose(d.integrated, 8.0, atol=1e-12)
    with pytest.raises(InputError, match="at least 5 bands"):
        dos.fermi_level_from_count(mesh, e[:, :4], 8)


# --------------------------------------------------------------------------------------------
# properties
# --------------------------------------------------------------------------------------------


@settings(max_examples=25, deadline=None)
@given(st.integers(2, 4), st.lists(st.floats(-10.0, 10.0), min_size=4, max_size=4))
def test_one_simplex_integrates_to_its_weight(m, corners):
    # ∫ D dε over a simplex = 1 (its whole weight) and D = dN/dε (Blöchl, Jepsen & Andersen,
    # Phys. Rev. B 49, 16223 (1994), Appendix A: the formulas are a CDF and its density).
    e = np.sort(np.array(corners[:m]))
    f_lo, _ = tetrahedra.simplex_occupation(e, e[0] - 1e-9)
    f_hi, _ = tetrahedra.simplex_occupation(e, e[-1])
    assert f_lo == 0.0 and f_hi == 1.0
    if e[-1] - e[0] < 1e-6:
        return  # a flat simplex: a δ-function, nothing to integrate on a grid
    density = lambda x: float(tetrahedra.simplex_occupation(e, x)[1])
    inner = [x for x in e[1:-1] if e[0] < x < e[-1]]
    total, _ = quad(density, e[0], e[-1], points=inner or None, limit=200)
    assert total == pytest.approx(1.0, abs=1e-8)
    x = np.linspace(e[0], e[-1], 41)
    f, dens = tetrahedra.simplex_occupation(np.broadcast_to(e, (41, m)), x)
    assert np.all(np.diff(f) >= -1e-15) and np.all(dens >= 0)
    # the fast polynomial path used on grids agrees with the formulas
    f2, d2 = tetrahedra.accumulate(np.broadcast_to(e, (1, m)).copy(), x)
    np.testing.assert_allclose(f2, f, atol=1e-12)
    np.testing.assert_allclose(d2[x < e[-1]], dens[x < e[-1]], rtol=1e-9, atol=1e-9)


@settings(max_examples=25, deadline=None)
@given(st.integers(1, 3), st.integers(0, 2**32 - 1), st.floats(-20.0, 20.0))
def test_random_bands_dos_properties(d, seed, shift):
    # On any bands: D ≥ 0, N non-decreasing, N at the top = 2 × bands, and a rigid shift of
    # every energy shifts D and N exactly (to rounding) (common practice, no source).
    rng = np.random.default_rng(seed)
    shape = tuple(int(x) for x in rng.integers(2, 6, size=d))
    n_full, n_bands = int(np.prod(shape)), 3
    b = rng.normal(size=(d, d)) + 3 * np.eye(d)
    mesh = KMesh(shape, full_grid_frac(shape), np.full(n_full, 1 / n_full),
                     np.arange(n_full), b)
    e = np.sort(rng.uniform(-3.0, 3.0, size=(n_full, n_bands)), axis=1)
    grid = np.linspace(-4.0, 4.0, 301)
    a = dos.tetrahedron_dos(mesh, e, grid)
    assert np.all(a.dos_per_eV >= 0)
    assert np.all(np.diff(a.integrated) >= -1e-12)
    assert a.integrated[-1] == pytest.approx(2 * n_bands, abs=1e-12)
    assert a.integrated[0] == 0.0
    s = dos.tetrahedron_dos(mesh, e + shift, grid + shift)
    scale = max(1.0, a.dos_per_eV.max())
    np.testing.assert_allclose(s.dos_per_eV, a.dos_per_eV, rtol=0, atol=1e-7 * scale)
    np.testing.assert_allclose(s.integrated, a.integrated, rtol=0, atol=1e-9)


def test_grid_simplices_tile_the_cell():
    # The 6 tetrahedra of each cube (2 triangles, 1 segment) are distinct and use the shortest
    # diagonal: for fcc the reciprocal (bcc) cell's shortest diagonal (Blöchl, Jepsen &
    # Andersen (1994), Sec. III).
    m = empty("fcc", A_AL, 3)
    mesh = reciprocal_mesh(m, 4)
    corners = tetrahedra.simplex_corners(mesh)
    assert corners.shape == (6 * 64, 4)
    assert len(np.unique(np.sort(corners, axis=1), axis=0)) == 6 * 64
    k = mesh.full_k_frac @ mesh.reciprocal_invA
    # all six share the diagonal from their first to their last corner; it is the shortest
    # (the first six belong to the cell at the origin, which does not wrap around the grid)
    step = mesh.reciprocal_invA / 4
    diagonals = [np.linalg.norm(np.array(s) @ step) for s in
                 ([1, 1, 1], [-1, 1, 1], [1, -1, 1], [1, 1, -1])]
    first = corners[:6]
    v = k[first[:, 3]] - k[first[:, 0]]
    assert len({tuple(r) for r in first[:, [0, 3]]}) == 1
    assert np.linalg.norm(v[0]) == pytest.approx(min(diagonals), rel=1e-12)


def test_triangles_use_the_shorter_diagonal():
    # Hexagonal net: b1 and b2 at 60°, so the diagonal b1 − b2 is shorter than b1 + b2
    # (common practice, no source).
    m = make_material({"type": "hexagonal-2d", "a_A": 2.5},
                      [{"species": "X", "position": [0.0, 0.0]}], {"form": "empty"})
    mesh = reciprocal_mesh(m, 4)
    corners = tetrahedra.simplex_corners(mesh)
    assert corners.shape == (2 * 16, 3)
    k = mesh.full_k_frac @ mesh.reciprocal_invA
    shared = k[corners[0, 2]] - k[corners[0, 0]]
    b = mesh.reciprocal_invA / 4
    lengths = sorted(np.linalg.norm(v) for v in (b[0] + b[1], b[0] - b[1]))
    assert np.linalg.norm(shared) == pytest.approx(lengths[0], rel=1e-12)
    assert lengths[0] < 0.99 * lengths[1]


def test_mesh_points_are_folded_to_the_first_zone(silicon_mesh):
    # Each point is its shortest image k + G (the first Brillouin zone; Ashcroft & Mermin
    # (1976), ch. 5, from memory), checked against all 125 images with |m_i| ≤ 2.
    mesh = silicon_mesh[2]
    b = mesh.reciprocal_invA
    m = np.array(np.meshgrid(*[np.arange(-2, 3)] * 3, indexing="ij")).reshape(3, -1).T
    lengths = np.linalg.norm((mesh.k_frac[:, None, :] + m[None]) @ b, axis=-1)
    np.testing.assert_allclose(np.linalg.norm(mesh.k_frac @ b, axis=1), lengths.min(axis=1),
                               atol=1e-12)


def test_count_keeps_the_shape_and_order_of_its_energies(silicon_mesh):
    mesh, e, _, _ = silicon_mesh
    x = np.array([[3.0, -5.0], [20.0, 1.0]])
    n = dos.tetrahedron_count(mesh, e, x)
    assert n.shape == (2, 2) and n[0, 1] == 0.0 and n[1, 0] == pytest.approx(12.0)
    assert isinstance(dos.tetrahedron_count(mesh, e, 3.0), float)
    assert dos.tetrahedron_count(mesh, e, 3.0) == n[0, 0]


def test_bad_inputs_are_refused(silicon_mesh):
    mesh, e, _, _ = silicon_mesh
    with pytest.raises(InputError, match="do not fit"):
        dos.tetrahedron_dos(mesh, e[:-1], np.linspace(0, 1, 5))
    with pytest.raises(InputError, match="strictly increasing"):
        dos.tetrahedron_dos(mesh, e, np.array([1.0, 0.0, 2.0]))
    with pytest.raises(InputError, match="positive") as err:
        dos.gaussian_dos(e, mesh.weights, np.linspace(0, 1, 5), 0.0)
    assert err.value.key == "smearing_eV"
    with pytest.raises(InputError, match="unknown method"):
        dos.fermi_level_from_count(mesh, e, 8, method="histogram")
