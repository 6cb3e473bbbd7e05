"""k·p files along a path: `bandpert bands` on a k·p parameter file, and wrong kinds of file."""

from __future__ import annotations

import contextlib
import io
import json
from pathlib import Path

import numpy as np
import pytest
from matplotlib.backends.backend_agg import FigureCanvasAgg

import bandpert.cli.app as cli
from bandpert.data import MATERIALS_DIR
from bandpert.input.file_kind import file_kind, kind_of_document
from bandpert.input.kp_file import load_kp_material
from bandpert.kp import bands_along, bands_along_path, material_model
from bandpert.output.figures import kp_path_figure
from bandpert.units import HBAR2_OVER_2M0_EV_A2

GAAS = load_kp_material("gallium-arsenide")
INP = load_kp_material("indium-phosphide")


def run(args: list[str]) -> tuple[int, str, str]:
    """Run ``bandpert ARGS`` in-process; return (exit status, stdout, stderr)."""
    stdout, stderr = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(stdout), contextlib.redirect_stderr(stderr):
        with pytest.raises(SystemExit) as stop:
            cli.main(args)
    code = stop.value.code
    return (0 if code is None else code), stdout.getvalue(), stderr.getvalue()


def test_path_runs_through_gamma_to_the_stated_fractions():
    # fcc zone points L = (½,½,½), X = (1,0,0), K = (¾,¾,0)·2π/a (source: Bouckaert,
    # Smoluchowski & Wigner, Phys. Rev. 50, 58 (1936))
    models = [material_model(GAAS, n) for n in GAAS.models]
    b = bands_along_path(models, GAAS.a_A, fraction=0.1, n_per_leg=21)
    first, gamma, end_x, last = b.label_indices
    assert np.allclose(b.k_2pi_a[first], [0.05, 0.05, 0.05])
    assert np.allclose(b.k_2pi_a[gamma], 0) and np.allclose(b.k_2pi_a[b.leg_starts[1]], 0)
    assert np.allclose(b.k_2pi_a[end_x], [0.1, 0, 0]) and np.allclose(b.k_2pi_a[last],
                                                                      [0.075, 0.075, 0])
    assert b.k_max_invA == pytest.approx(0.075 * np.sqrt(2) * 2 * np.pi / GAAS.a_A)
    assert b.labels == ("0.1 L", "Γ", "0.1 X|Γ", "0.1 K")
    # the Γ–X leg is the same as the line along [100]
    line = bands_along(models[-1], "100", k_max_frac=0.1, n_k=21)
    assert np.allclose(b.energies_eV["eight-band"][gamma:end_x + 1], line.energies_eV)
    # at Γ: the levels of the models; CB at Eg = 1.519 eV (source: Vurgaftman, Meyer &
    # Ram-Mohan, J. Appl. Phys. 89, 5815 (2001), Table III; from memory)
    assert b.energies_eV["eight-band"][gamma, -1] == pytest.approx(1.519)
    # near Γ the conduction band rises as ħ²k²/2m* with m* = 0.067 (same source)
    k = np.linalg.norm(b.k_cart_invA[gamma + 1])
    rise = b.energies_eV["eight-band"][gamma + 1, -1] - 1.519
    assert rise == pytest.approx(HBAR2_OVER_2M0_EV_A2 * k**2 / 0.067, rel=0.02)
    with pytest.raises(ValueError):
        bands_along_path(models, GAAS.a_A, fraction=0.8)


def _drawn_texts(fig) -> list:
    """Every text the figure draws: titles, labels, annotations, legend, ticks in view."""
    texts = [*fig.texts, fig._suptitle]
    for ax in fig.axes:
        texts += [*ax.texts, ax.title, ax.xaxis.label, ax.yaxis.label]
        legend = ax.get_legend()
        if legend is not None:
            texts += [*legend.get_texts(), legend.get_title()]
        for axis, (lo, hi) in ((ax.xaxis, ax.get_xlim()), (ax.yaxis, ax.get_ylim())):
            lo, hi = min(lo, hi), max(lo, hi)
            texts += [t.label1 for t in axis.get_major_ticks()
                      if lo - 1e-9 <= t.get_loc() <= hi + 1e-9]
    unique = {id(t): t for t in texts if t is not None}.values()
    return [t for t in unique if t.get_visible() and t.get_text().strip()]


def _texts_fit(fig) -> None:
    """No two text labels overlap and none leaves the figure (renderer bounding boxes)."""
    FigureCanvasAgg(fig)
    renderer = fig.canvas.get_renderer()
    fig.draw(renderer)
    boxes = [t.get_window_extent(renderer) for t in _drawn_texts(fig)]
    frame = fig.bbox
    for b in boxes:
        assert b.x0 >= frame.x0 - 1 and b.y0 >= frame.y0 - 1
        assert b.x1 <= frame.x1 + 1 and b.y1 <= frame.y1 + 1
    for i, a in enumerate(boxes):
        for b in boxes[i + 1:]:
            assert not a.overlaps(b), (a, b)


@pytest.mark.parametrize("kpm", [GAAS, INP], ids=["gaas", "inp"])
def test_path_figure_names_the_bands_and_its_text_fits(kpm):
    # common practice, no source: band names on the curves, no overlapping or clipped text
    b = bands_along_path([material_model(kpm, n) for n in kpm.models], kpm.a_A)
    fig = kp_path_figure(b, kpm.name, kpm.source)
    texts = {t.get_text() for t in fig.axes[0].texts}
    assert {"CB", "HH", "LH", "SO"} <= texts
    _texts_fit(fig)


def test_file_kinds():
    # common practice, no source: the two schemas' distinguishing tables
    assert file_kind("silicon") == "planewave"
    assert file_kind("indium-phosphide") == "kp"
    assert file_kind("gallium-arsenide") == "planewave"
    assert file_kind("gallium-arsenide", prefer="kp") == "kp"
    assert file_kind(MATERIALS_DIR / "kp" / "gallium-arsenide.toml") == "kp"
    assert kind_of_document({"name": "x", "lattice": {"structure": "diamond"}}) == "kp"
    assert kind_of_document({"name": "x", "lattice": {"type": "fcc"}}) == "planewave"
    assert kind_of_document({"name": "x"}) is None and kind_of_document([1]) is None


def test_bands_on_a_kp_file_draws_its_models_along_the_path(tmp_path: Path):
    code, out, err = run(["bands", str(MATERIALS_DIR / "kp" / "indium-phosphide.toml"),
                          "--out", str(tmp_path)])
    assert code == 0, err
    doc = json.loads((tmp_path / "indium-phosphide-kp-bands.json").read_text())
    assert doc["command"] == "bands" and doc["results"]["kind"] == "kp"
    assert set(doc["results"]["models"]) == {"two-band", "six-band", "eight-band"}
    assert (tmp_path / "indium-phosphide-kp-bands.png").stat().st_size > 0
    csv = (tmp_path / "indium-phosphide-kp-bands.csv").read_text().splitlines()
    assert csv[0].startswith("#") and "eight-band_band8_eV" in csv[2]
    assert "0.1 of the way from Γ to L, X and K" in out


@pytest.mark.parametrize("args, got, command", [
    (["kp", "silicon"], "plane-wave material file", "bandpert kp"),
    (["fullzone", "indium-phosphide"], "k·p parameter file", "bandpert fullzone"),
])
def test_the_other_kind_of_file_is_refused_in_one_line(args, got, command, tmp_path: Path):
    code, _, err = run([*args, "--out", str(tmp_path / "o")])
    assert code == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in err
    assert got in lines[0] and command in lines[0] and "give it to bandpert" in lines[0]
    assert not (tmp_path / "o").exists()
