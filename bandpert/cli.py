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

from .bands import compute_band_structure, converged_cutoff, default_bands
from .errors import InputError
from .lattice import crystal_symmetry, describe_position, reciprocal_vectors, standard_path
from .material import Material, load_material
from .perturbation import DEFAULT_COUPLING_THRESHOLD
from .perturbative_bands import DEFAULT_RADIUS_POINTS, DEFAULT_TOLERANCE_EV, PerturbationSettings
from .planewave import build_model

try:  # typer >= 0.26 carries its own copy of click; its exceptions are the ones raised
    from typer._click.exceptions import ClickException, UsageError
except ImportError:  # pragma: no cover - older typer on the public click
    from click.exceptions import ClickException, UsageError

app = typer.Typer(add_completion=False, no_args_is_help=True, pretty_exceptions_enable=False,
                  help="Crystal bands by exact diagonalisation and by perturbation theory. "
                       "Add --debug anywhere on the line to see the traceback of an internal "
                       "error.")
out = Console()
err = Console(stderr=True)


class ImageFormat(StrEnum):
    png = "png"
    svg = "svg"
    pdf = "pdf"


MaterialFile = Annotated[Path, typer.Argument(help="Material description file (TOML).",
                                              show_default=False)]


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


def _check_count(value: int | None, name: str, minimum: int) -> None:
    if value is not None and value < minimum:
        raise InputError(f"must be at least {minimum}, got {value}", key=name)


@app.command()
def bands(
    file: MaterialFile,
    out_dir: Annotated[Path, typer.Option("--out", help="Folder for the plot, CSV and JSON.")]
    = Path("plots"),
    k_points: Annotated[int, typer.Option("--k-points", help="Number of k-points along the path.")]
    = 200,
    n_bands: Annotated[int | None, typer.Option("--bands", help="Number of bands (default: the "
                                                "file's basis.bands, else occupied + 4).",
                                                show_default=False)] = None,
    cutoff_eV: Annotated[float | None, typer.Option("--cutoff-eV", help="Plane-wave kinetic-energy"
                                                    " cutoff in eV (default: the file's, else a "
                                                    "converged one).", show_default=False)] = None,
    image_format: Annotated[ImageFormat, typer.Option("--format", help="Image format.")]
    = ImageFormat.png,
    json_path: Annotated[Path | None, typer.Option("--json", help="Where to write the JSON "
                                                   "results (default: OUT/<name>-bands.json).",
                                                   show_default=False)] = None,
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
    from .io import write_csv, write_json, write_with
    from .plotting import band_figure
    from .report import band_structure_results, band_structure_table, document, perturbative_table

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
    image = out_dir / f"{stem}-bands.{image_format.value}"
    csv_path = out_dir / f"{stem}-bands.csv"
    json_path = json_path or out_dir / f"{stem}-bands.json"
    written = [image, csv_path]
    write_with(image, lambda p: fig.savefig(p, format=image_format.value, dpi=200))
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
    json_path: Annotated[Path | None, typer.Option("--json", help="Where to write the JSON "
                                                   "results (default: OUT/<name>-gaps.json).",
                                                   show_default=False)] = None,
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
    cutoff_eV: Annotated[float | None, typer.Option("--cutoff-eV", help="Plane-wave kinetic-energy"
                                                    " cutoff in eV (default: the file's, else a "
                                                    "converged one).", show_default=False)] = None,
    out_dir: Annotated[Path, typer.Option("--out", help="Folder for the figure and the JSON.")]
    = Path("plots"),
    k_points: Annotated[int, typer.Option("--k-points", help="k-points of the band plot.")] = 200,
    image_format: Annotated[ImageFormat, typer.Option("--format", help="Image format.")]
    = ImageFormat.png,
) -> None:
    """Gaps at free-electron degeneracies: degenerate perturbation theory against exact levels.

    At every examined point the plane waves with equal |k+G|² are grouped; for each group the
    first-order (V block) and second-order (Löwdin) splittings are printed beside the exact
    ones, with the Fourier coefficients V(G−G′) that couple it and, when a degeneracy stays
    closed, why. Writes the band plot with the gaps marked and the JSON.
    """
    from .gaps import gap_analysis, resolve_points
    from .io import write_json, write_with
    from .plotting import gap_figure
    from .report import document, gap_results, gap_table

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
    write_with(image, lambda p: fig.savefig(p, format=image_format.value, dpi=200))
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


def _vec(v) -> str:
    return "(" + ", ".join(f"{x:.4f}" for x in np.asarray(v, dtype=float)) + ")"


def _describe_potential(material: Material) -> str:
    p = material.potential
    if p.form == "empty":
        return "empty lattice (V = 0)"
    if p.form == "fourier":
        return f"{len(p.fourier_eV)} Fourier coefficients (±G completed), file unit {p.file_unit}"
    return (f"{p.form} form factors on |G|² = {', '.join(f'{s:g}' for s in p.shells_g2)} "
            f"(2π/a)², file unit {p.file_unit}")


def main(argv: list[str] | None = None) -> None:
    """Entry point: run the CLI and map errors to exit statuses (2 user, 1 internal)."""
    args = list(sys.argv[1:] if argv is None else argv)
    debug = "--debug" in args
    if debug:
        args.remove("--debug")
    command = typer.main.get_command(app)
    try:
        code = command.main(args=args, prog_name="bandpert", standalone_mode=False)
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
