"""``bandpert bands`` on a k·p parameter file: the models' bands along L–Γ–X | Γ–K near Γ."""

from __future__ import annotations

from pathlib import Path

from rich.table import Table

from ...errors import InputError
from ...input.kp_file import load_kp_material
from ...io import write_csv, write_json
from ...kp import BAND_SHORT_NAMES, bands_along_path, material_model
from ...output.figures import kp_path_figure
from ...output.kp_report import kp_path_results, kp_path_table
from ...output.report import document
from ..options import ImageFormat, out, output_base, output_paths, save_figure


def kp_bands(file: Path, out_dir: Path, name: str | None, image_format: ImageFormat,
             json_path: Path | None, e_min: float | None, e_max: float | None) -> None:
    """Draw and write the bands of every model of a k·p file along the path near Γ (files
    ``OUT/NAME.*``, NAME from ``--name``, else ``<file>-kp-bands``)."""
    kpm = load_kp_material(file)
    bands = bands_along_path([material_model(kpm, name) for name in kpm.models], kpm.a_A)
    window = None
    if e_min is not None or e_max is not None:
        every = [e for e in bands.energies_eV.values()]
        low = min(e.min() for e in every) - 0.1 if e_min is None else e_min
        high = max(e.max() for e in every) + 0.1 if e_max is None else e_max
        if low >= high:
            raise InputError(f"--emin {low} must be below --emax {high}", key="--emin")
        window = (low, high)
    settings = {"models": list(bands.models), "fraction": bands.fraction,
                "k_points": len(bands.distance_2pi_a)}
    doc = document("bands", kpm, settings, kp_path_results(bands))
    fig = kp_path_figure(bands, kpm.name, kpm.source, window)
    stem = Path(file).stem.removesuffix("-kp")
    image, csv_path, json_path = output_paths(output_base(out_dir, name, f"{stem}-kp-bands"),
                                              image_format, json_path)
    save_figure(fig, image, image_format)
    write_csv(csv_path, *kp_path_table(bands, kpm.name))
    write_json(json_path, doc)
    table = Table(title=f"{kpm.name}: k·p bands along {' – '.join(bands.labels)}",
                  show_header=False, title_justify="left")
    table.add_column(style="bold")
    table.add_column()
    table.add_row("file", f"{file} (a k·p parameter file)")
    table.add_row("models", ", ".join(bands.models))
    table.add_row("path", f"{bands.fraction:g} of the way from Γ to L, X and K "
                  f"(|k| ≤ {bands.k_max_invA:.4f} Å⁻¹; the models are expansions about Γ)")
    table.add_row("energy zero", "valence-band top at Γ")
    names = dict.fromkeys(bands.band_names[bands.models[-1]])
    table.add_row("bands", ", ".join(f"{BAND_SHORT_NAMES.get(n, n)} ({n})" for n in names))
    out.print(table)
    out.print(f"wrote {image}, {csv_path}, {json_path}")
