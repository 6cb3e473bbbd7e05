"""Command line: thin commands over the library.

A user error prints one line to stderr and exits with status 2; an internal error exits 1 with a
short pointer (``--debug`` shows the traceback).
"""

from __future__ import annotations

import sys
from contextlib import contextmanager
from enum import StrEnum
from pathlib import Path
from typing import Annotated

import numpy as np
import typer
from rich.console import Console
from rich.progress import BarColumn, Progress, TextColumn, TimeRemainingColumn
from rich.table import Table

from ..crystal.lattice import crystal_symmetry, describe_position, reciprocal_vectors, standard_path
from ..errors import InputError
from ..input.material import Material, load_material
from ..perturbation.series import DEFAULT_COUPLING_THRESHOLD
from ..physics.bands import compute_band_structure, converged_cutoff, default_bands
from ..physics.perturbative_bands import (
    DEFAULT_RADIUS_POINTS,
    DEFAULT_TOLERANCE_EV,
    PerturbationSettings,
)
from ..planewave.model import build_model

try:  # typer >= 0.26 carries its own copy of click; its exceptions are the ones raised
    from typer._click.exceptions import ClickException, UsageError
except ImportError:  # pragma: no cover - older typer on the public click
    from click.exceptions import ClickException, UsageError

app = typer.Typer(add_completion=False, no_args_is_help=True, pretty_exceptions_enable=False,
                  help="Crystal bands by exact diagonalisation and by perturbation theory. "
                       "Add --debug anywhere on the line to see the traceback of an internal "
                       "error.")
out = Console() if sys.stdout.isatty() else Console(width=160)  # files and pipes: no wrap
err = Console(stderr=True)


class ImageFormat(StrEnum):
    png = "png"
    svg = "svg"
    pdf = "pdf"


MaterialFile = Annotated[Path, typer.Argument(help="Material description file (TOML).",
                                              show_default=False)]
OutDir = Annotated[Path, typer.Option("--out", help="Folder for the plot and JSON.")]
FormatOption = Annotated[ImageFormat, typer.Option("--format", help="Image format.")]
BandsOption = Annotated[int | None, typer.Option(
    "--bands", help="Bands computed (default: the file's basis.bands, else occupied + 4).",
    show_default=False)]
PlotCsvJsonDir = Annotated[Path, typer.Option("--out", help="Folder for the plot, CSV and JSON.")]
CutoffOption = Annotated[float | None, typer.Option(
    "--cutoff-eV", help="Plane-wave kinetic-energy cutoff in eV (default: the file's, else a "
    "converged one).", show_default=False)]


def json_option(command: str) -> object:
    """The ``--json PATH`` option of a command, its default named in the help."""
    return typer.Option("--json", help="Where to write the JSON results (default: "
                        f"OUT/<name>-{command}.json).", show_default=False)


@contextmanager
def progress_bar(description: str):
    """A transient rich progress bar on stderr; yields a ``progress(done, total)`` callback."""
    bar = Progress(TextColumn("{task.description}"), BarColumn(),
                   TextColumn("{task.percentage:>3.0f}%"), TimeRemainingColumn(), console=err,
                   transient=True, disable=not err.is_terminal)
    with bar:
        task = bar.add_task(description, total=None)

        def update(done: int, total: int) -> None:
            bar.update(task, completed=done, total=total)

        yield update


def output_paths(file: Path, out_dir: Path, command: str, image_format: ImageFormat,
                 json_path: Path | None) -> tuple[Path, Path, Path]:
    """The image, CSV and JSON paths of a command: ``OUT/<stem>-<command>.<ext>``."""
    base = out_dir / f"{file.stem}-{command}"
    return (base.with_name(f"{base.name}.{image_format.value}"),
            base.with_name(f"{base.name}.csv"), json_path or base.with_name(f"{base.name}.json"))


def save_figure(fig, image: Path, image_format: ImageFormat, dpi: int = 200) -> None:
    """Write a figure atomically in the chosen format."""
    from ..output.style import save_figure as write_figure

    write_figure(fig, image, image_format.value, dpi)


def _check_count(value: int | None, name: str, minimum: int) -> None:
    if value is not None and value < minimum:
        raise InputError(f"must be at least {minimum}, got {value}", key=name)


@app.command()
def bands(
    file: MaterialFile,
    out_dir: PlotCsvJsonDir = Path("plots"),
    k_points: Annotated[int, typer.Option("--k-points", help="Number of k-points along the path.")]
    = 200,
    n_bands: Annotated[int | None, typer.Option("--bands", help="Number of bands (default: the "
                                                "file's basis.bands, else occupied + 4).",
                                                show_default=False)] = None,
    cutoff_eV: CutoffOption = None,
    image_format: FormatOption = ImageFormat.png,
    json_path: Annotated[Path | None, json_option("bands")] = None,
    e_min: Annotated[float | None, typer.Option("--emin", help="Lower energy limit of the plot "
                                                "(eV from the energy zero).",
                                                show_default=False)] = None,
    e_max: Annotated[float | None, typer.Option("--emax", help="Upper energy limit of the plot "
                                                "(eV from the energy zero).",
                                                show_default=False)] = None,
    order: Annotated[int, typer.Option("--order", help="Perturbation order in λ (1, 2 or 3).")]
    = 2,
    threshold: Annotated[float, typer.Option("--threshold", help="Coupling ratio |V_mn|/|E_m−E_n| "
                                             "above which levels are treated together in a "
                                             "subspace (Löwdin).")]
    = DEFAULT_COUPLING_THRESHOLD,
    tolerance_meV: Annotated[float, typer.Option("--tolerance-meV", help="A point is trustworthy "
                                                 "when its error estimate is below this.")]
    = DEFAULT_TOLERANCE_EV * 1e3,
    radius_points: Annotated[int, typer.Option("--radius-points", help="k-points at which the "
                                               "convergence radius in λ is computed (0: none).")]
    = DEFAULT_RADIUS_POINTS,
    no_exact: Annotated[bool, typer.Option("--no-exact", help="Skip the exact diagonalisation "
                                           "(perturbative bands only, no comparison).")] = False,
    exact_only: Annotated[bool, typer.Option("--exact-only", help="Skip the perturbative bands.")]
    = False,
) -> None:
    """Bands along the Brillouin-zone path, exact and perturbative side by side.

    Writes the plot, a CSV of the bands (and one of the perturbative bands) and the JSON, and
    prints a short summary: space group, basis, energy zero, gap and band edges, and how much
    of the path perturbation theory can be trusted on.
    """
    from ..io import write_csv, write_json
    from ..output.plotting import band_figure
    from ..output.report import (
        band_structure_results,
        band_structure_table,
        document,
        perturbative_table,
    )

    _check_count(k_points, "--k-points", 2)
    _check_count(n_bands, "--bands", 1)
    if cutoff_eV is not None and not cutoff_eV > 0:
        raise InputError(f"must be positive, got {cutoff_eV}", key="--cutoff-eV")
    if no_exact and exact_only:
        raise InputError("--no-exact and --exact-only leave nothing to compute; give one",
                         key="--no-exact")
    settings_p = None if exact_only else PerturbationSettings(
        order=order, coupling_threshold=threshold, tolerance_eV=tolerance_meV * 1e-3,
        radius_points=radius_points)
    material = load_material(file)
    with progress_bar("diagonalising") as progress:
        bs = compute_band_structure(material, n_k=k_points, n_bands=n_bands, cutoff_eV=cutoff_eV,
                                    progress=progress, exact=not no_exact,
                                    perturbation=settings_p)
    stem = file.stem
    window = None
    if e_min is not None or e_max is not None:
        e = bs.relative_energies_eV
        window = (e.min() - 0.5 if e_min is None else e_min, e.max() + 0.5 if e_max is None
                  else e_max)
        if window[0] >= window[1]:
            raise InputError(f"--emin {window[0]} must be below --emax {window[1]}", key="--emin")
    settings = {"k_points": len(bs.path.k_frac), "bands": bs.n_bands,
                "cutoff_eV": bs.model.basis.cutoff_eV, "basis_size": bs.model.size,
                "real_hamiltonian": bs.model.is_real, "exact": not no_exact,
                "perturbative": not exact_only}
    doc = document("bands", material, settings, band_structure_results(bs))
    header, cols, rows = band_structure_table(bs)
    fig = band_figure(bs, window)
    image, csv_path, json_path = output_paths(file, out_dir, "bands", image_format, json_path)
    written = [image, csv_path]
    save_figure(fig, image, image_format)
    write_csv(csv_path, header, cols, rows)
    if bs.perturbative is not None:
        pert_csv = out_dir / f"{stem}-perturbative.csv"
        write_csv(pert_csv, *perturbative_table(bs))
        written.append(pert_csv)
    write_json(json_path, doc)
    written.append(json_path)
    _summary(bs)
    out.print("wrote " + ", ".join(str(w) for w in written))


def _summary(bs) -> None:
    table = Table(title=bs.material.name, show_header=False, title_justify="left")
    table.add_column(style="bold")
    table.add_column()
    sym = bs.symmetry
    if sym.number is not None:
        table.add_row("space group", f"{sym.international} ({sym.number})")
    table.add_row("basis", f"{bs.model.size} plane waves, cutoff {bs.model.basis.cutoff_eV:.2f} eV")
    table.add_row("energy zero", f"{bs.energy_zero_kind} = {bs.energy_zero_eV:.4f} eV (absolute)")
    if bs.edges is not None:
        g = bs.edges
        table.add_row("gap", f"{g.gap_eV:.3f} eV")
        table.add_row("valence maximum", describe_position(bs.path, g.valence_max_index))
        table.add_row("conduction minimum", describe_position(bs.path, g.conduction_min_index))
        table.add_row("smallest direct gap", f"{g.direct_gap_eV:.3f} eV at "
                      f"{describe_position(bs.path, g.direct_gap_index)}")
    pb = bs.perturbative
    if pb is not None:
        s = pb.settings
        table.add_row(f"perturbative (order {s.order})",
                      f"trustworthy on {100 * pb.trustworthy.mean():.1f} % of (band, k) points "
                      f"(estimate < {s.tolerance_eV * 1e3:g} meV); subspace treatment on "
                      f"{100 * (pb.treatment == 1).mean():.1f} %")
        if bs.comparison is not None:
            c = bs.comparison
            table.add_row("against exact", f"largest error {1e3 * c.abs_error_eV.max():.1f} meV; "
                          f"on trustworthy points {1e3 * c.max_error_trustworthy_eV:.2f} meV; "
                          f"estimate ≥ true error on {100 * c.estimate_coverage:.1f} %")
        if len(pb.radius_k_indices):
            inside = pb.convergence_radius > s.lam
            table.add_row("convergence radius", f"λ = {s.lam:g} inside on "
                          f"{100 * inside.mean():.0f} % of the sampled (band, k) points "
                          f"(smallest radius {pb.convergence_radius.min():.2f})")
    out.print(table)


@app.command()
def check(
    file: MaterialFile,
    cutoff_eV: Annotated[float | None, typer.Option("--cutoff-eV", help="Cutoff to report the "
                                                    "basis for (default: the file's, else a "
                                                    "converged one).", show_default=False)] = None,
) -> None:
    """Validate a material file and print what it describes: lattice, symmetry, path, basis."""
    material = load_material(file)
    nb = default_bands(material)
    cutoff = cutoff_eV or material.cutoff_eV or converged_cutoff(material, nb)
    model = build_model(material, cutoff)
    sym = crystal_symmetry(material)
    points, legs = standard_path(material)
    table = Table(title=f"{material.name}  ({file})", show_header=False, title_justify="left")
    table.add_column(style="bold")
    table.add_column()
    table.add_row("source", material.source)
    table.add_row("lattice", f"{material.lattice_type} ({material.dimension}D), "
                  f"a = {material.a_A:g} Å")
    for i, v in enumerate(material.vectors_A):
        table.add_row(f"a{i + 1} (Å)", _vec(v))
    for i, v in enumerate(reciprocal_vectors(material.vectors_A)):
        table.add_row(f"b{i + 1} (1/Å)", _vec(v))
    unit = {1: "Å", 2: "Å²", 3: "Å³"}[material.dimension]
    table.add_row("cell size", f"{material.volume_A:.4f} {unit}")
    for i, atom in enumerate(material.atoms):
        table.add_row(f"atom {i + 1}", f"{atom.species} at {_vec(atom.position_frac)} (fractional)")
    if sym.number is not None:
        inv = "with" if sym.has_inversion else "without"
        table.add_row("space group", f"{sym.international} ({sym.number}), {inv} inversion")
    table.add_row("potential", _describe_potential(material))
    table.add_row("path", " | ".join("–".join(leg) for leg in legs))
    for label in dict.fromkeys(x for leg in legs for x in leg):
        table.add_row(f"  {label}", _vec(points[label]))
    source = "given" if (cutoff_eV or material.cutoff_eV) else "converged default"
    table.add_row("basis", f"{model.size} plane waves at cutoff {cutoff:.2f} eV ({source}); "
                  f"H(k) {'real symmetric' if model.is_real else 'complex Hermitian'}")
    table.add_row("electrons", "not given (absolute energies)" if material.valence_electrons is None
                  else f"{material.valence_electrons} per cell; {nb} bands by default")
    out.print(table)


@app.command()
def gaps(
    file: MaterialFile,
    json_path: Annotated[Path | None, json_option("gaps")] = None,
    point: Annotated[list[str] | None, typer.Option("--point", metavar="<label|coords>",
                                                    help="A point to examine: a "
                                                    "label of the path (G/Gamma for Γ) or "
                                                    "fractional coordinates such as "
                                                    "'0.5,0,0.5'; repeat for more (default: "
                                                    "every labelled point of the path).",
                                                    show_default=False)] = None,
    crossings: Annotated[bool | None, typer.Option("--crossings/--no-crossings",
                                                   help="Also examine where free-electron "
                                                   "bands cross between labelled points "
                                                   "(default: on, off when --point is given).",
                                                   show_default=False)] = None,
    n_bands: Annotated[int | None, typer.Option("--bands", help="Examine the degeneracies "
                                                "among this many lowest levels (default: the "
                                                "file's basis.bands, else occupied + 4).",
                                                show_default=False)] = None,
    cutoff_eV: CutoffOption = None,
    out_dir: Annotated[Path, typer.Option("--out", help="Folder for the figure and the JSON.")]
    = Path("plots"),
    k_points: Annotated[int, typer.Option("--k-points", help="k-points of the band plot.")] = 200,
    image_format: FormatOption = ImageFormat.png,
) -> None:
    """Gaps at free-electron degeneracies: degenerate perturbation theory against exact levels.

    At every examined point the plane waves with equal |k+G|² are grouped; for each group the
    first-order (V block) and second-order (Löwdin) splittings are printed beside the exact
    ones, with the Fourier coefficients V(G−G′) that couple it and, when a degeneracy stays
    closed, why. Writes the band plot with the gaps marked and the JSON.
    """
    from ..io import write_json
    from ..output.plotting import gap_figure
    from ..output.report import document, gap_results, gap_table
    from ..physics.nfe_gaps import gap_analysis, resolve_points

    _check_count(k_points, "--k-points", 2)
    _check_count(n_bands, "--bands", 1)
    if cutoff_eV is not None and not cutoff_eV > 0:
        raise InputError(f"must be positive, got {cutoff_eV}", key="--cutoff-eV")
    material = load_material(file)
    resolve_points(material, point)  # refuse a bad --point before the diagonalisation
    search = (not point) if crossings is None else crossings
    with progress_bar("diagonalising") as progress:
        bs = compute_band_structure(material, n_k=k_points, n_bands=n_bands, cutoff_eV=cutoff_eV,
                                    progress=progress)
    report = gap_analysis(material, model=bs.model, n_bands=bs.n_bands, points=point,
                          crossings=search)
    settings = {"k_points": len(bs.path.k_frac), "bands": bs.n_bands,
                "cutoff_eV": bs.model.basis.cutoff_eV, "basis_size": bs.model.size,
                "real_hamiltonian": bs.model.is_real,
                "points": list(point) if point else "labelled points of the path",
                "crossings": search}
    doc = document("gaps", material, settings, gap_results(report, bs))
    stem = file.stem
    image = out_dir / f"{stem}-gaps.{image_format.value}"
    json_path = json_path or out_dir / f"{stem}-gaps.json"
    fig = gap_figure(bs, report)
    save_figure(fig, image, image_format)
    write_json(json_path, doc)
    from rich import box

    cols, rows, notes = gap_table(report)
    table = Table(title=f"{material.name}: free-electron degeneracies and their gaps",
                  title_justify="left", box=box.SIMPLE_HEAD, pad_edge=False)
    for c in cols:
        numeric = c in ("E0 (eV)", "g", "1st", "2nd", "exact", "2nd−exact")
        table.add_column(c, overflow="fold", justify="right" if numeric else "left")
    for r in rows:
        table.add_row(*r)
    out.print(table)
    for note in notes:
        out.print(note)
    zero = ("" if bs.energy_zero_kind == "absolute" else
            f"; the {bs.energy_zero_kind} is at {bs.energy_zero_eV:.4f} eV")
    out.print(f"energies absolute (the model's zero{zero}); gaps in eV between consecutive "
              "levels of a group, "
              "shown where the exact splitting is open; exact levels matched by sorted position; "
              f"{report.n_bands} lowest levels, {report.basis_size} plane waves at "
              f"{report.cutoff_eV:.2f} eV")
    out.print(f"wrote {image}, {json_path}")


@app.command()
def masses(
    file: MaterialFile,
    point: Annotated[str | None, typer.Option("--point", help="Where: a path label (G/Gamma for Γ) "
                                              "or fractional coordinates '0.5,0,0.5'. Default: "
                                              "the conduction minimum and valence maximum, "
                                              "refined in 3D.", show_default=False)] = None,
    band: Annotated[int | None, typer.Option("--band", help="Band number (1 = lowest) at --point; "
                                             "default: the lowest empty band.",
                                             show_default=False)] = None,
    temperature_K: Annotated[float, typer.Option("--temperature", help="Temperature (K) of the "
                                                 "effective densities of states N_c, N_v.")]
    = 300.0,
    cutoff_eV: CutoffOption = None,
    json_path: Annotated[Path | None, json_option("masses")] = None,
    out_dir: Annotated[Path, typer.Option("--out", help="Folder for the JSON.")] = Path("plots"),
    kp_file: Annotated[Path | None, typer.Option("--write-kp", help="Also write the k·p parameter "
                                                 "file (Eg, Ep, F, γ1–γ3) this model implies.",
                                                 show_default=False)] = None,
) -> None:
    """Effective masses by second-order k·p, with the finite-difference cross-check.

    For each band edge: the inverse-mass tensor, principal masses and axes, the finite-difference
    tensor of the exact band and their relative difference, the convergence of the sum over
    states, the valley count, density-of-states and conductivity masses and N_c / N_v. At a
    degenerate edge (the valence top at Γ): the Löwdin k·p Hamiltonian, the Dresselhaus–Kip–Kittel
    L, M, N, the Luttinger γ1, γ2, γ3 and the masses along [100], [110] and [111].
    """
    from ..crystal.lattice import point_group_rotations
    from ..io import atomic_path, write_json
    from ..output.report import document, masses_results
    from ..physics.kp_from_planewave import extract_kp_parameters, kp_material_text
    from ..physics.masses import band_masses, edge_masses
    from ..physics.nfe_gaps import resolve_points

    if cutoff_eV is not None and not cutoff_eV > 0:
        raise InputError(f"must be positive, got {cutoff_eV}", key="--cutoff-eV")
    if band is not None and band < 1:
        raise InputError(f"must be at least 1, got {band}", key="--band")
    material = load_material(file)
    with progress_bar("diagonalising") as progress:
        bs = compute_band_structure(material, n_k=120, cutoff_eV=cutoff_eV, progress=progress)
    if point is None and band is None:
        entries = edge_masses(bs, temperature_K)
        locations = [describe_position(bs.path, bs.edges.conduction_min_index) + " (refined)",
                     describe_position(bs.path, bs.edges.valence_max_index) + " (refined)"]
    else:
        label, k_frac, _ = resolve_points(material, [point or "Γ"])[0]
        n_el = material.valence_electrons
        b = band - 1 if band is not None else (n_el // 2 if n_el else 0)
        entry = band_masses(bs.model, k_frac @ bs.model.reciprocal_invA, b,
                            point_group_rotations(material), temperature_K,
                            f"band {b + 1} at {label}")
        entries, locations = [entry], [label]
    kp_params = kp_text = None
    if material.dimension == 3 and material.valence_electrons:
        try:
            extracted = extract_kp_parameters(material, bs.model)
        except InputError:
            extracted = None
        if extracted is not None:
            kp_params = {**extracted.parameters.as_dict(),
                         "conduction_band": extracted.conduction_band + 1,
                         "conduction_mass_m0": extracted.conduction_mass_m0}
            kp_text = kp_material_text(material, extracted)
    if kp_file is not None and kp_text is None:
        raise InputError("this model has no threefold valence top at Γ with an s-like "
                         "conduction state, so it implies no Kane parameters", str(file),
                         "--write-kp")
    settings = {"cutoff_eV": bs.model.basis.cutoff_eV, "basis_size": bs.model.size,
                "temperature_K": temperature_K, "point": point, "band": band}
    doc = document("masses", material, settings,
                   masses_results(entries, bs.energy_zero_eV, locations, kp_params))
    json_path = json_path or out_dir / f"{file.stem}-masses.json"
    write_json(json_path, doc)
    written = [json_path]
    if kp_file is not None:
        with atomic_path(kp_file) as tmp:
            tmp.write_text(kp_text, encoding="utf-8")
        written.append(kp_file)
    for entry, location in zip(entries, locations, strict=True):
        _masses_table(entry, location, bs.energy_zero_eV)
    if kp_params is not None:
        out.print("k·p parameters implied at Γ (Δso = 0): "
                  + ", ".join(f"{k} = {v:.4g}" for k, v in extracted.parameters.as_dict().items()
                              if k != "Delta_so_eV"))
    out.print("wrote " + ", ".join(str(w) for w in written))


def _masses_table(m, location: str, zero_eV: float) -> None:
    table = Table(title=f"{m.label}: {location}", show_header=False, title_justify="left")
    table.add_column(style="bold")
    table.add_column()
    table.add_row("k (fractional)", _vec(m.k_frac))
    table.add_row("energy", f"{m.energy_eV - zero_eV:.4f} eV from the zero; band(s) "
                  + ", ".join(str(b + 1) for b in m.degenerate_bands))
    if m.tensor is not None:
        t = m.tensor
        kinds = ["electron-like" if s > 0 else "hole-like" for s in t.curvature_sign]
        for i in range(len(t.principal_masses)):
            table.add_row(f"principal mass {i + 1}", f"{t.principal_masses[i]:.4f} m0 "
                          f"({kinds[i]}) along {_vec(t.principal_axes[:, i])}")
        table.add_row("finite-difference check", f"relative difference {m.relative_difference:.1e}")
        conv = ", ".join(f"{n}: {np.max(row):.4f}" for n, row in
                         zip(m.convergence_counts, m.convergence_masses, strict=True))
        table.add_row("largest mass vs states kept", conv)
        if m.valleys is not None:
            table.add_row("valleys", str(m.valleys))
        if m.dos_mass is not None:
            table.add_row("density-of-states mass", f"{m.dos_mass:.4f} m0")
            table.add_row("conductivity mass", f"{m.conductivity_mass:.4f} m0")
            table.add_row(f"effective DOS at {m.temperature_K:g} K", f"{m.effective_dos_cm3:.3e} "
                          "cm⁻³")
    if m.edge is not None:
        e = m.edge
        if e.dkk_LMN is not None:
            big_l, big_m, big_n = e.dkk_LMN
            table.add_row("DKK L, M, N (ħ²/2m0)", f"{big_l:.3f}, {big_m:.3f}, {big_n:.3f}")
            g1, g2, g3 = e.luttinger
            table.add_row("Luttinger γ1, γ2, γ3", f"{g1:.3f}, {g2:.3f}, {g3:.3f} (spinless "
                          "triplet; Γ8 hole formulas need spin–orbit)")
        for name, curv in e.direction_curvatures.items():
            masses = ", ".join(f"{1 / abs(c):.4f}" for c in curv)
            table.add_row(f"masses along {name}", f"{masses} m0 (bands of the set)")
        if m.dos_mass is not None:
            table.add_row("density-of-states mass", f"{m.dos_mass:.4f} m0 (all bands of the set)")
            table.add_row(f"effective DOS at {m.temperature_K:g} K",
                          f"{m.effective_dos_cm3:.3e} cm⁻³")
    out.print(table)


@app.command()
def kp(
    file: Annotated[Path, typer.Argument(help="k·p parameter file (TOML).", show_default=False)],
    model_name: Annotated[str | None, typer.Option("--model", help="two-band, six-band or "
                                                   "eight-band (default: every model the file "
                                                   "supports).", show_default=False)] = None,
    compare: Annotated[Path | None, typer.Option("--compare", help="A plane-wave material file "
                                                 "whose exact bands are drawn beside the k·p "
                                                 "ones.", show_default=False)] = None,
    k_max: Annotated[float, typer.Option("--k-max", help="Extent of the lines from Γ, in units "
                                         "of 2π/a.")] = 0.1,
    out_dir: OutDir = Path("plots"),
    image_format: FormatOption = ImageFormat.png,
    json_path: Annotated[Path | None, json_option("kp")] = None,
) -> None:
    """k·p models at Γ from a parameter file: band-edge masses along [001], [110] and [111],
    nonparabolicity, and bands near Γ (beside a plane-wave model's exact bands with --compare).
    """
    from ..input.kp_file import load_kp_material
    from ..io import write_json
    from ..kp.models import MODEL_NAMES, bands_along, masses_at_gamma, nonparabolicity, unit_vector
    from ..output.plotting import kp_figure
    from ..output.report import document
    from ..physics.bands import exact_energies

    if not 0.0 < k_max <= 0.5:
        raise InputError(f"expected 0 < --k-max ≤ 0.5 (a fraction of 2π/a), got {k_max}",
                         key="--k-max")
    if model_name is not None and model_name not in MODEL_NAMES:
        raise InputError(f"'{model_name}' is not one of {', '.join(MODEL_NAMES)}", key="--model")
    kpm = load_kp_material(file)
    names = [model_name] if model_name else list(kpm.models)
    directions = {"[001]": "001", "[110]": "110", "[111]": "111"}
    results: dict = {"models": {}, "reference_masses_m0": kpm.reference_masses_m0,
                     "parameters": kpm.parameters.as_dict(),
                     "energy_zero": "valence-band top at Γ"}
    plotted: dict = {}
    for name in names:
        model = kpm.model(name)
        masses = {label: masses_at_gamma(model, d).as_dict() for label, d in directions.items()}
        entry = {"masses_m0": masses, "energies_at_gamma_eV": model.gamma_energies_eV}
        if name in ("two-band", "eight-band"):
            npb = nonparabolicity(model, "001")
            entry["nonparabolicity"] = {"direction": "[001]", "alpha_per_eV": npb.alpha_per_eV,
                                        "edge_mass_m0": npb.edge_mass_m0}
        results["models"][name] = entry
        plotted[name] = {label: bands_along(model, d, k_max_frac=k_max, n_k=121)
                         for label, d in directions.items()}
    exact = None
    if compare is not None:
        material = load_material(compare)
        bs = compute_band_structure(material, n_k=20)
        if bs.edges is None:
            raise InputError("--compare needs a semiconductor (a gap and electrons.valence)",
                             str(compare), "electrons")
        exact = {}
        t = np.linspace(0.0, k_max, 61)
        for label, d in directions.items():
            k = t[:, None] * unit_vector(d) * 2 * np.pi / material.a_A
            e = exact_energies(bs.model, k, bs.n_bands) - bs.edges.valence_max_eV
            exact[label] = (t, e)
        results["compared_with"] = {"file": str(compare), "name": material.name}
    settings = {"models": names, "k_max_frac": k_max}
    doc = document("kp", kpm, settings, results)
    fig = kp_figure(kpm.name, kpm.source, plotted, exact,
                    "" if compare is None else f"{Path(compare).stem} (plane-wave, exact)")
    image = out_dir / f"{file.stem}-kp.{image_format.value}"
    json_path = json_path or out_dir / f"{file.stem}-kp.json"
    save_figure(fig, image, image_format)
    write_json(json_path, doc)
    table = Table(title=f"{kpm.name}: masses at Γ (m0)", title_justify="left")
    table.add_column("model")
    table.add_column("band")
    for label in directions:
        table.add_column(label, justify="right")
    for name, entry in results["models"].items():
        for band_name in entry["masses_m0"]["[001]"]:
            table.add_row(name, band_name, *(f"{entry['masses_m0'][d][band_name]:.4f}"
                                             for d in directions))
    out.print(table)
    if kpm.parameters.Delta_so_eV == 0:
        out.print("Delta_so_eV = 0: Γ8 and Γ7 coincide, so the heavy/light/split-off names only "
                  "label the sorted curvatures of the threefold (spinless) valence top")
    for name, entry in results["models"].items():
        if "nonparabolicity" in entry:
            npb = entry["nonparabolicity"]
            out.print(f"{name}: conduction nonparabolicity α = {npb['alpha_per_eV']:.3f} /eV "
                      f"along [001] (edge mass {npb['edge_mass_m0']:.4f} m0)")
    out.print(f"wrote {image}, {json_path}")


@app.command()
def fullzone(
    file: MaterialFile,
    basis: Annotated[str, typer.Option("--basis", help="Numbers of Γ eigenstates to try, "
                                       "comma-separated (the whole plane-wave basis is added).")]
    = "15,30,60,120",
    k_points: Annotated[int, typer.Option("--k-points", help="Number of k-points along the path.")]
    = 120,
    n_bands: Annotated[int | None, typer.Option("--bands", help="Bands compared (default: the "
                                                "file's basis.bands, else occupied + 4).",
                                                show_default=False)] = None,
    out_dir: OutDir = Path("plots"),
    image_format: FormatOption = ImageFormat.png,
    json_path: Annotated[Path | None, json_option("fullzone")] = None,
) -> None:
    """Full-zone k·p: bands along the whole path from the Γ eigenstates, against exact bands,
    and their convergence with the number of states kept (Cardona & Pollak 1966)."""
    from ..io import write_json
    from ..output.plotting import fullzone_figure
    from ..output.report import document
    from ..physics.fullzone import kp_convergence

    try:
        sizes = tuple(int(x) for x in basis.replace(" ", "").split(",") if x)
    except ValueError:
        raise InputError(f"'{basis}' is not a comma-separated list of integers",
                         key="--basis") from None
    if not sizes or min(sizes) < 1:
        raise InputError("expected positive numbers of states", key="--basis")
    _check_count(k_points, "--k-points", 2)
    material = load_material(file)
    bs = compute_band_structure(material, n_k=k_points, n_bands=n_bands)
    conv = kp_convergence(bs.model, np.zeros(material.dimension), bs.path.k_cart_invA,
                          bs.n_bands, sizes, exact_eV=bs.energies_eV)
    fig = fullzone_figure(bs, conv)
    image = out_dir / f"{file.stem}-fullzone.{image_format.value}"
    json_path = json_path or out_dir / f"{file.stem}-fullzone.json"
    results = {"basis_sizes": conv.basis_sizes, "max_error_eV": conv.max_error_eV,
               "rms_error_eV": conv.rms_error_eV, "k_frac": bs.path.k_frac,
               "exact_energies_eV": bs.energies_eV, "kp_energies_eV": conv.energies_eV,
               "energy_zero_eV": bs.energy_zero_eV}
    settings = {"k_points": len(bs.path.k_frac), "bands": bs.n_bands,
                "cutoff_eV": bs.model.basis.cutoff_eV, "basis_size": bs.model.size,
                "expansion_point": "Γ"}
    save_figure(fig, image, image_format)
    write_json(json_path, document("fullzone", material, settings, results))
    table = Table(title=f"{material.name}: full-zone k·p from Γ", title_justify="left")
    table.add_column("Γ states", justify="right")
    table.add_column("largest error (meV)", justify="right")
    table.add_column("rms error (meV)", justify="right")
    for n, e_max, e_rms in zip(conv.basis_sizes, conv.max_error_eV, conv.rms_error_eV,
                               strict=True):
        table.add_row(str(n), f"{1e3 * e_max:.3g}", f"{1e3 * e_rms:.3g}")
    out.print(table)
    out.print(f"wrote {image}, {json_path}")


class EngineKind(StrEnum):
    local = "local"
    serial = "serial"


EngineOption = Annotated[EngineKind, typer.Option(
    "--engine", help="local: a Dask cluster of worker processes on this machine, started and "
    "stopped by the command; serial: this process only, no Dask.")]
WorkersOption = Annotated[int | None, typer.Option(
    "--workers", help="Worker processes of the local cluster (default: one per core).",
    show_default=False)]
SchedulerOption = Annotated[str | None, typer.Option(
    "--scheduler", metavar="ADDRESS", help="Run on an existing Dask scheduler instead, e.g. "
    "tcp://10.0.0.5:8786 (its workers need bandpert installed).", show_default=False)]


def _engine(kind: EngineKind, workers: int | None, scheduler: str | None):
    from ..runs.execution import Engine

    _check_count(workers, "--workers", 1)
    if scheduler:
        if kind == EngineKind.serial:
            raise InputError("--scheduler and --engine serial contradict each other; give one",
                             key="--scheduler")
        return Engine("scheduler", address=scheduler)
    return Engine(kind.value, workers=workers)


@app.command()
def sweep(
    file: MaterialFile,
    vary: Annotated[list[str], typer.Option(
        "--vary", metavar="KEY=START:STOP:COUNT", help="A key of the material file and its "
        "range, e.g. lattice.a_A=5.3:5.6:31 or potential.symmetric[0]=-0.25:-0.19:13; also "
        "strain.xx|yy|zz|xy|xz|yz|hydrostatic and alloy.x (with --alloy-end). Repeat to vary "
        "several keys (all combinations).", show_default=False)],
    quantity: Annotated[list[str] | None, typer.Option(
        "--quantity", help="What to compute at each point: edges (band-edge energies, "
        "positions, gaps), gaps (at the labelled points), masses (band-edge masses). "
        "Repeatable; default edges and gaps.", show_default=False)] = None,
    point: Annotated[list[str] | None, typer.Option(
        "--point", help="Label of the path for the gaps (G/Gamma for Γ); repeatable; default "
        "every label of the path.", show_default=False)] = None,
    between: Annotated[int | None, typer.Option(
        "--between", metavar="N", help="Gaps at the points are between bands N and N+1 "
        "(1-based; default: the highest occupied band).", show_default=False)] = None,
    form_factors: Annotated[str, typer.Option(
        "--form-factors", help="tabulated: keep the file's form factors fixed on their |G|² "
        "shells; continuous: fit a v(q) to them (Friedel-Hybertsen-Schlüter form, 1/Ω "
        "scaling) that follows the lattice (needed for strain).")] = "tabulated",
    basis: Annotated[str, typer.Option(
        "--basis", help="scaled: cutoff × (Ω_ref/Ω)^(2/d), the same plane waves under a "
        "uniform change of the lattice constant; fixed: the same cutoff in eV.")] = "scaled",
    alloy_end: Annotated[Path | None, typer.Option(
        "--alloy-end", help="Material file of the x = 1 end of an alloy.x sweep "
        "(virtual-crystal approximation).", show_default=False)] = None,
    k_points: Annotated[int, typer.Option("--k-points", help="k-points along the path at "
                                          "each parameter point.")] = 60,
    n_bands: BandsOption = None,
    cutoff_eV: CutoffOption = None,
    temperature: Annotated[float, typer.Option("--temperature", help="Temperature (K) for the "
                                               "effective densities of states.")] = 300.0,
    engine: EngineOption = EngineKind.local,
    workers: WorkersOption = None,
    scheduler: SchedulerOption = None,
    out_dir: PlotCsvJsonDir = Path("plots"),
    image_format: FormatOption = ImageFormat.png,
    json_path: Annotated[Path | None, json_option("sweep")] = None,
) -> None:
    """Sweep keys of a material file over ranges; tabulate and plot gaps, band edges and masses.

    A k·p parameter file works too: its keys are swept and the masses at Γ of each of its models
    are tabulated along [001], [110] and [111].

    Every point is validated like a file; a failed point is reported with its parameters and
    the others are kept (exit status 3 when any point failed). Runs on a local Dask cluster by
    default, on an existing scheduler with --scheduler, or in this process with --engine serial.
    """
    from ..input.material import read_toml_document
    from ..io import write_json, write_table
    from ..output.plotting import sweep_figure
    from ..output.report import document, sweep_results, sweep_table
    from ..runs.sweep import parse_axis, prepare, run_sweep

    axes = tuple(parse_axis(v) for v in vary)
    _check_count(k_points, "--k-points", 2)
    _check_count(n_bands, "--bands", 2)
    _check_count(between, "--between", 1)
    if cutoff_eV is not None and not cutoff_eV > 0:
        raise InputError(f"must be positive, got {cutoff_eV}", key="--cutoff-eV")
    if not temperature > 0:
        raise InputError(f"expected a positive temperature in K, got {temperature}",
                         key="--temperature")
    run_on = _engine(engine, workers, scheduler)
    doc = read_toml_document(file)
    end = None if alloy_end is None else read_toml_document(alloy_end)
    spec, reference, note = prepare(
        doc, str(file), axes, quantities=tuple(quantity or ("edges", "gaps")),
        points=tuple(point) if point else None, n_k=k_points, n_bands=n_bands,
        cutoff_eV=cutoff_eV, lower_band=between, form_factors=form_factors, basis=basis,
        alloy_end=end, alloy_source=str(alloy_end or ""), temperature_K=temperature)
    n_points = int(np.prod([len(a.values) for a in spec.axes]))
    err.print(f"bandpert: {n_points} points on {run_on.describe()}; {note}", highlight=False)
    with progress_bar("sweeping") as progress:
        result = run_sweep(spec, run_on, progress, note)
    settings = {"varied": [a.key for a in spec.axes], "quantities": list(spec.quantities),
                "points": list(spec.points), "between_bands": [spec.lower_band,
                                                               spec.lower_band + 1],
                "k_points": spec.n_k, "bands": spec.n_bands,
                "reference_cutoff_eV": spec.reference_cutoff_eV, "basis_rule": spec.basis,
                "form_factors": form_factors, "alloy_end": str(alloy_end or ""),
                "temperature_K": temperature, "engine": result.engine}
    image, csv_path, json_path = output_paths(file, out_dir, "sweep", image_format, json_path)
    fig = sweep_figure(result)
    save_figure(fig, image, image_format, dpi=160)
    write_table(csv_path, *sweep_table(result))
    write_json(json_path, document("sweep", reference, settings, sweep_results(result)))
    _sweep_summary(result)
    out.print(f"wrote {image}, {csv_path}, {json_path}")
    if result.failures:
        for f in result.failures[:10]:
            values = ", ".join(f"{a.key} = {v:g}" for a, v in zip(spec.axes, f.values,
                                                                   strict=True))
            err.print(f"bandpert: failed point {values}: {f.error}", highlight=False,
                      markup=False)
        if len(result.failures) > 10:
            err.print(f"bandpert: … and {len(result.failures) - 10} more failed points (all in "
                      "the JSON)", highlight=False)
        raise typer.Exit(3)


def _sweep_summary(result) -> None:
    table = Table(title=f"sweep of {', '.join(a.key for a in result.spec.axes)}",
                  title_justify="left")
    table.add_column("quantity")
    table.add_column("unit")
    table.add_column("first", justify="right")
    table.add_column("last", justify="right")
    table.add_column("min", justify="right")
    table.add_column("max", justify="right")
    from ..output.report import column_unit

    for name, v in result.columns.items():
        if name.startswith(("lower_", "upper_")) or name.endswith("_frac"):
            continue
        ok = np.isfinite(v)
        if not ok.any():
            continue
        good = v[ok]
        table.add_row(name, column_unit(name), f"{good[0]:.5g}", f"{good[-1]:.5g}",
                      f"{good.min():.5g}", f"{good.max():.5g}")
    out.print(table)
    out.print(f"{result.n_points} points, {len(result.failures)} failed; ran on {result.engine}")


@app.command()
def dos(
    file: MaterialFile,
    mesh: Annotated[int, typer.Option("--mesh", help="Points per reciprocal axis of the "
                                      "Γ-centred mesh (symmetry-reduced in 3D).")] = 16,
    method: Annotated[str, typer.Option("--method", help="tetrahedron (linear tetrahedra, "
                                        "Blöchl-Jepsen-Andersen 1994) or gaussian.")]
    = "tetrahedron",
    smearing_eV: Annotated[float, typer.Option("--smearing-eV", help="Gaussian width (with "
                                               "--method gaussian).")] = 0.05,
    step_meV: Annotated[float, typer.Option("--step-meV", help="Spacing of the energy grid.")]
    = 10.0,
    n_bands: BandsOption = None,
    cutoff_eV: CutoffOption = None,
    engine: EngineOption = EngineKind.local,
    workers: WorkersOption = None,
    scheduler: SchedulerOption = None,
    out_dir: PlotCsvJsonDir = Path("plots"),
    image_format: FormatOption = ImageFormat.png,
    json_path: Annotated[Path | None, json_option("dos")] = None,
) -> None:
    """Density of states on a dense k-mesh and the Fermi level from the electron count.

    The exact bands are computed on the irreducible points of the mesh, spread over a local
    Dask cluster (default), an existing scheduler (--scheduler) or this process (--engine
    serial); the result does not depend on which.
    """
    from ..io import write_csv, write_json
    from ..output.plotting import dos_figure
    from ..output.report import document, dos_results, dos_table
    from ..runs.mesh_dos import compute_dos

    _check_count(mesh, "--mesh", 2)
    _check_count(n_bands, "--bands", 1)
    if cutoff_eV is not None and not cutoff_eV > 0:
        raise InputError(f"must be positive, got {cutoff_eV}", key="--cutoff-eV")
    if not smearing_eV > 0:
        raise InputError(f"must be positive, got {smearing_eV}", key="--smearing-eV")
    run_on = _engine(engine, workers, scheduler)
    material = load_material(file)
    with progress_bar("diagonalising on the mesh") as progress:
        result = compute_dos(material, mesh, method=method, smearing_eV=smearing_eV,
                             n_bands=n_bands, cutoff_eV=cutoff_eV,
                             energy_step_eV=step_meV * 1e-3, engine=run_on, progress=progress)
    settings = {"mesh": mesh, "method": method,
                "smearing_eV": smearing_eV if method == "gaussian" else None,
                "step_eV": step_meV * 1e-3, "bands": int(result.energies_eV.shape[1]),
                "cutoff_eV": result.cutoff_eV, "basis_size": result.basis_size,
                "engine": result.engine}
    image, csv_path, json_path = output_paths(file, out_dir, "dos", image_format, json_path)
    fig = dos_figure(result)
    save_figure(fig, image, image_format)
    write_csv(csv_path, *dos_table(result))
    write_json(json_path, document("dos", material, settings, dos_results(result)))
    table = Table(title=f"{material.name}: density of states", show_header=False,
                  title_justify="left")
    table.add_column(style="bold")
    table.add_column()
    table.add_row("mesh", f"{mesh} per axis: {result.mesh.n_full} points, "
                  f"{len(result.mesh.k_frac)} irreducible")
    table.add_row("basis", f"{result.basis_size} plane waves, cutoff {result.cutoff_eV:.2f} eV")
    table.add_row("method", method + (f", σ = {smearing_eV:g} eV" if method == "gaussian"
                                      else ""))
    if result.fermi_level_eV is not None:
        note = " (mid-gap)" if result.gap_eV is not None else ""
        table.add_row("Fermi level", f"{result.fermi_level_eV:.4f} eV (absolute){note}")
    if result.gap_eV is not None:
        table.add_row("gap on the mesh", f"{result.gap_eV:.3f} eV")
    table.add_row("complete below", f"{result.complete_below_eV:.3f} eV (absolute)")
    table.add_row("ran on", result.engine)
    out.print(table)
    out.print(f"wrote {image}, {csv_path}, {json_path}")


def _vec(v) -> str:
    return "(" + ", ".join(f"{x:.4f}" for x in np.asarray(v, dtype=float)) + ")"


def _describe_potential(material: Material) -> str:
    p = material.potential
    if p.form == "empty":
        return "empty lattice (V = 0)"
    if p.form == "fourier":
        return f"{len(p.fourier_eV)} Fourier coefficients (±G completed), file unit {p.file_unit}"
    if p.form == "continuous":
        taper = ("" if p.taper_invA is None else
                 f", taper {p.taper_invA[0]:.4g}–{p.taper_invA[1]:.4g} Å⁻¹")
        return (f"continuous v(q) for {', '.join(p.continuous)} (Friedel–Hybertsen–Schlüter "
                f"form), Ω0 = {p.reference_volume_A:.4g}{taper}, file unit {p.file_unit}")
    return (f"{p.form} form factors on |G|² = {', '.join(f'{s:g}' for s in p.shells_g2)} "
            f"(2π/a)², file unit {p.file_unit}")


def main(argv: list[str] | None = None) -> None:
    """Entry point: run the CLI and map errors to exit statuses (2 user, 1 internal)."""
    args = list(sys.argv[1:] if argv is None else argv)
    debug = "--debug" in args
    if debug:
        args.remove("--debug")
    command = typer.main.get_command(app)
    import warnings

    from ..errors import ModelWarning

    held: list[str] = []  # model warnings, printed only if the command succeeds

    def show(message, category, filename, lineno, file=None, line=None) -> None:
        if issubclass(category, ModelWarning):
            held.append(f"bandpert: warning: {message}")
        elif debug:  # library housekeeping (e.g. deprecations in dependencies) only on request
            sys.stderr.write(warnings.formatwarning(message, category, filename, lineno, line))

    warnings.showwarning = show
    try:
        code = command.main(args=args, prog_name="bandpert", standalone_mode=False)
        if code == 130:  # click returns 130 for Ctrl-C
            print("bandpert: interrupted; no partial output was left", file=sys.stderr)
        else:
            for text in dict.fromkeys(held):
                print(text, file=sys.stderr)
    except typer.Exit as exc:
        code = exc.exit_code
    except ClickException as exc:
        exc.show()
        code = 2 if isinstance(exc, UsageError) else exc.exit_code
    except (typer.Abort, KeyboardInterrupt):
        print("bandpert: interrupted; no partial output was left", file=sys.stderr)
        code = 130
    except InputError as exc:
        if debug:
            raise
        print(f"bandpert: error: {exc.one_line()}", file=sys.stderr)
        code = 2
    except Exception as exc:
        if debug:
            raise
        print(f"bandpert: internal error ({exc.__class__.__name__}: {exc}); this is a bug, "
              "rerun with --debug for the traceback", file=sys.stderr)
        code = 1
    sys.exit(code if isinstance(code, int) else 0)
