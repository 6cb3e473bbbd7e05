"""Figures of every command: no overlapping or clipped text, and the features a paper needs."""

from __future__ import annotations

import dataclasses
import warnings

import numpy as np
import pytest
from conftest import bundled
from figure_cases import all_cases, kp, own_crystal, sweep, text_problems
from matplotlib.collections import PathCollection, QuadMesh

from bandpert.output import figures, style
from bandpert.output.figures.bands import band_groups, validity_states
from bandpert.physics.bands import compute_band_structure
from bandpert.physics.perturbative_bands import PerturbationSettings
from bandpert.runs.mesh_dos import compute_dos

CASES = all_cases()


@pytest.fixture(scope="module")
def drawn():
    """Each case's figure, built once for the module."""
    cache: dict = {}

    def get(name: str):
        if name not in cache:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")  # small test bases warn about convergence
                cache[name] = CASES[name]()
        return cache[name]

    return get


@pytest.mark.parametrize("name", list(CASES))
def test_no_text_overlaps_or_leaves_the_figure(drawn, name):
    fig = drawn(name)
    assert text_problems(fig) == []


def test_the_checker_sees_overlaps_and_clipping():
    # the test above must be able to fail: two labels on one spot and one off the canvas
    fig = style.new_figure(3, 2)
    ax = fig.subplots()
    ax.text(0.5, 0.5, "one label", transform=ax.transAxes)
    ax.text(0.5, 0.5, "another", transform=ax.transAxes)
    ax.text(1.5, 0.5, "outside", transform=ax.transAxes)
    problems = text_problems(fig)
    assert any("overlaps" in p for p in problems)
    assert any("'outside' leaves the figure" in p for p in problems)


@pytest.fixture(scope="module")
def chain_comparison():
    """The cosine chain with 400 k-points: dense enough that markers must be thinned."""
    bs = compute_band_structure(bundled("cosine-chain"), n_k=400,
                                perturbation=PerturbationSettings(radius_points=6))
    return bs, figures.band_figure(bs)


def test_markers_are_thinned_on_dense_paths(chain_comparison):
    bs, fig = chain_comparison
    ax = fig.axes[0]
    n_markers = sum(len(c.get_offsets()) for c in ax.collections
                    if isinstance(c, PathCollection))
    assert 0 < n_markers <= (style.MAX_MARKERS_PER_BAND + 1) * bs.n_bands


def test_error_axis_starts_near_the_smallest_meaningful_error(chain_comparison):
    bs, fig = chain_comparison
    lo, hi = fig.axes[1].get_ylim()
    tol_meV = bs.perturbative.settings.tolerance_eV * 1e3
    # from the decade of a hundredth of the tolerance to a decade under the tolerance
    assert 10 ** np.floor(np.log10(tol_meV / 100)) * 0.99 <= lo <= tol_meV / 10
    assert hi >= tol_meV
    # one solid and one dashed curve per band group, keyed in the legend
    groups = band_groups(bs)
    styles = [ln.get_linestyle() for ln in fig.axes[1].lines if ln.get_linestyle() != ":"]
    assert styles.count("-") == styles.count("--") == len(groups)
    texts = [t.get_text() for t in fig.axes[1].get_legend().get_texts()]
    assert all(name in texts for name, _ in groups)
    assert any("estimate" in t or "bound" in t for t in texts)
    assert any("exact" in t for t in texts)


def test_validity_map_ticks_every_band_and_shows_undetermined_points(chain_comparison):
    bs, _ = chain_comparison
    pb = bs.perturbative
    radius = np.array(pb.convergence_radius, dtype=float)
    radius[0, 0] = np.nan  # an undetermined radius
    bs_nan = dataclasses.replace(bs, perturbative=dataclasses.replace(
        pb, convergence_radius=radius))
    states = validity_states(bs_nan)
    assert states[pb.radius_k_indices[0], 0] == 2
    fig = figures.band_figure(bs_nan)
    ax_map = fig.axes[2]
    mesh = next(c for c in ax_map.collections if isinstance(c, QuadMesh))
    assert 2 in set(np.asarray(mesh.get_array()).ravel().astype(int))
    assert list(ax_map.get_yticks()) == list(range(1, bs.n_bands + 1))
    labels = [t.get_text() for t in ax_map.get_legend().get_texts()]
    assert labels == ["trustworthy", "not trustworthy", "undetermined"]
    # colour-blind-safe pair: blue and orange, told apart by lightness too, plus grey
    from matplotlib.colors import to_rgb
    blue, orange = to_rgb(style.TRUSTED_COLOUR), to_rgb(style.UNTRUSTED_COLOUR)
    lightness = [0.2126 * r + 0.7152 * g + 0.0722 * b for r, g, b in (blue, orange)]
    assert abs(lightness[0] - lightness[1]) > 0.2


def test_energy_window_of_every_band_figure():
    window = (-3.0, 4.0)
    m = bundled("silicon")
    bs = compute_band_structure(m, n_k=12)
    assert figures.band_figure(bs, window).axes[0].get_ylim() == window
    bs_p = compute_band_structure(m, n_k=12, perturbation=PerturbationSettings(radius_points=0))
    assert figures.band_figure(bs_p, window).axes[0].get_ylim() == window
    assert kp(window=window).axes[0].get_ylim() == window
    result = compute_dos(own_crystal(), 4, energy_step_eV=0.05)
    assert figures.dos_figure(result, window).axes[0].get_xlim() == window


def test_band_edge_markers_are_not_clipped_at_the_frame():
    bs = compute_band_structure(bundled("silicon"), n_k=12)
    fig = figures.band_figure(bs)
    edge = [ln for ln in fig.axes[0].lines if ln.get_marker() == "o"]
    assert len(edge) == 2
    # the valence maximum sits at Γ, the first point of the path: on the frame
    assert bs.edges.valence_max_index == 0 and not edge[0].get_clip_on()


def test_kp_figure_names_bands_and_tells_models_apart(drawn):
    fig = drawn("kp-gaas")
    texts = {t.get_text() for t in fig.axes[-1].texts}
    assert {"CB", "HH", "LH", "SO"} <= texts
    legend = fig.legends[0]
    assert "Gallium arsenide" in legend.get_title().get_text()
    styles = {(h.get_color(), h.get_linestyle()) for h in legend.legend_handles}
    assert len({s for _, s in styles}) == len(styles) == 3


def test_sweep_axis_in_words_and_constant_panels_left_out(drawn):
    fig = drawn("sweep-silicon")
    visible = [ax for ax in fig.axes if ax.get_visible()]
    assert all(ax.get_xlabel() == "lattice constant (Å)" for ax in visible)
    assert "Silicon" in fig.get_suptitle()
    assert all(ax.get_title(loc="left") != "basis" for ax in visible)  # 259 plane waves
    assert "Constant over the sweep: basis" in fig.get_supxlabel()
    # more than ten lines, each its own colour/line style/marker combination
    levels = next(ax for ax in visible if ax.get_title(loc="left") == "levels at the points")
    looks = [(ln.get_color(), ln.get_linestyle(), ln.get_marker()) for ln in levels.lines]
    assert len(looks) > 10 and len(set(looks)) == len(looks)


def test_strain_axis_in_per_cent():
    from bandpert.output.figures.sweep import parameter_axis

    assert parameter_axis("strain.xx") == ("strain ε$_{xx}$ (%)", 100.0)
    assert parameter_axis("lattice.a_A") == ("lattice constant (Å)", 1.0)


def test_dos_figure_fermi_level_gap_and_smearing_warning(drawn):
    fig = drawn("dos-silicon")
    ax = fig.axes[0]
    label = next(t for t in ax.texts if "E_\\mathrm{F}" in t.get_text())
    renderer = style.renderer_of(fig)
    assert ax.get_window_extent(renderer).contains(*label.get_window_extent(renderer).p0)
    assert "gap" in label.get_text()
    assert any("warning" in t.get_text() and "σ = 0.01" in t.get_text() for t in ax.texts)
    metal = drawn("dos-aluminium")
    assert not any("warning" in t.get_text() for t in metal.axes[0].texts)
    assert "gap" not in next(t.get_text() for t in metal.axes[0].texts
                             if "E_\\mathrm{F}" in t.get_text())


def test_gap_figure_draws_the_crossings_of_the_report(drawn):
    fig = drawn("gaps-own")
    widths = {round(ln.get_linewidth(), 2) for ln in fig.axes[0].lines}
    assert round(2.4 * 0.6, 2) in widths and 2.4 in widths


def test_sweep_with_many_points_has_no_markers():
    fig = sweep("cosine-chain", ("potential.coefficients[0].value=0.2:2.0:61",), ("gaps",), 8,
                lower_band=1)
    assert all(ln.get_marker() in (None, "None", "") for ax in fig.axes for ln in ax.lines
               if ln.get_label() != "failed point")


def test_gap_figure_marks_an_order_that_fails_its_verdict(drawn):
    # a report whose groups carry verdicts: the failing order is drawn dotted with crosses
    from types import SimpleNamespace

    from bandpert.physics.nfe_gaps import gap_analysis

    m = bundled("cosine-chain")
    bs = compute_band_structure(m, n_k=20, n_bands=4)
    report = gap_analysis(m, model=bs.model, n_bands=4, crossings=False)
    judged_verdicts = (SimpleNamespace(holds=True), SimpleNamespace(holds=False))

    class Judged:
        def __init__(self, g):
            self._g = g

        def __getattr__(self, name):
            return getattr(self._g, name)

        verdicts = judged_verdicts

    judged = dataclasses.replace(report, points=tuple(
        dataclasses.replace(p, groups=tuple(Judged(g) for g in p.groups))
        for p in report.points))
    fig = figures.gap_figure(bs, judged)
    ax = fig.axes[0]
    assert any(ln.get_marker() == "x" for ln in ax.lines)
    assert any(t.get_text().endswith(", fails)") for t in ax.texts)
    assert any("fails" in t.get_text() for t in ax.get_legend().get_texts())
    assert text_problems(fig) == []


def test_energy_window_options_of_every_figure_command(tmp_path):
    import contextlib
    import io

    import bandpert.cli.app as cli

    def run(args):
        stdout, stderr = io.StringIO(), io.StringIO()
        with contextlib.redirect_stdout(stdout), contextlib.redirect_stderr(stderr):
            with pytest.raises(SystemExit) as stop:
                cli.main(args)
        return stop.value.code or 0, stderr.getvalue()

    for args in (["gaps", "cosine-chain", "--k-points", "10"],
                 ["fullzone", "cosine-chain", "--basis", "4,8", "--k-points", "10"],
                 ["kp", "gallium-arsenide"],
                 ["dos", "cosine-chain", "--mesh", "16", "--engine", "serial"]):
        code, err = run([*args, "--out", str(tmp_path), "--emin", "-1", "--emax", "2"])
        assert code == 0, err
    code, err = run(["gaps", "cosine-chain", "--emin", "2", "--emax", "1",
                     "--out", str(tmp_path / "refused")])
    assert code == 2 and "--emin" in err and len(err.splitlines()) == 1
    assert not (tmp_path / "refused").exists()
