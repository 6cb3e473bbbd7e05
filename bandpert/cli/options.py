"""Shared pieces of the commands: consoles, option types, progress bar, output paths.

Only the command line knows flags. Library errors name options in library terms
(``cutoff_eV``); :data:`FLAGS` maps those names to the flags shown to the user.
"""

from __future__ import annotations

import re
import sys
from collections.abc import Iterator
from contextlib import contextmanager
from enum import StrEnum
from pathlib import Path
from typing import Annotated

import typer
from rich.console import Console
from rich.progress import BarColumn, Progress, TextColumn, TimeRemainingColumn

from ..crystal.kmesh import MAX_MESH_POINTS
from ..errors import InputError
from ..input.file_kind import KIND_NAMES, file_kind
from ..output.style import PNG_DPI
from ..output.style import save_figure as write_figure
from ..runs.execution import Engine

#: Standard output and error of every command (tests swap ``out`` for a wide console).
out = Console() if sys.stdout.isatty() else Console(width=160)  # files and pipes: no wrap
err = Console(stderr=True, soft_wrap=True)  # a message is one line, however long


class ImageFormat(StrEnum):
    png = "png"
    svg = "svg"
    pdf = "pdf"


class EngineKind(StrEnum):
    local = "local"
    serial = "serial"


MaterialFile = Annotated[Path, typer.Argument(metavar="FILE|NAME", help="Material file (TOML), "
                                              "or the name of a bundled one (silicon, …).",
                                              show_default=False)]
OutDir = Annotated[Path, typer.Option("--out", help="Folder for the plot and JSON.")]
FormatOption = Annotated[ImageFormat, typer.Option("--format", help="Image format.")]
BandsOption = Annotated[int | None, typer.Option(
    "--bands", help="Bands computed (default: the file's basis.bands, else occupied + 4).",
    show_default=False)]
PlotCsvJsonDir = Annotated[Path, typer.Option("--out", help="Folder for the plot, CSV and JSON.")]
EMinOption = Annotated[float | None, typer.Option(
    "--emin", help="Lower energy limit of the plot (eV from the energy zero).",
    show_default=False)]
EMaxOption = Annotated[float | None, typer.Option(
    "--emax", help="Upper energy limit of the plot (eV from the energy zero).",
    show_default=False)]
FermiMeshOption = Annotated[int | None, typer.Option(
    "--fermi-mesh", help="Points per reciprocal axis of the uniform mesh that fixes a metal's "
    "Fermi level, the energy zero (default 24 in 3D, 60 in 2D, 600 in 1D; at most 10⁶ points "
    "in all; unused for an insulator). Fewer is faster: the mesh of a metal with little "
    "symmetry can cost more than the path.", show_default=False)]


def check_fermi_mesh(fermi_mesh: int | None, dimension: int) -> None:
    """Refuse a ``--fermi-mesh`` below 2 points per axis or above the mesh limit in all."""
    check_count(fermi_mesh, "--fermi-mesh", 2)
    if fermi_mesh is not None and float(fermi_mesh) ** dimension > MAX_MESH_POINTS:
        raise InputError(f"{fermi_mesh} points per axis make {float(fermi_mesh) ** dimension:.3g} "
                         f"points in {dimension}D; expected at most {MAX_MESH_POINTS:.0e}",
                         key="--fermi-mesh")


CutoffOption = Annotated[float | None, typer.Option(
    "--cutoff-eV", help="Plane-wave kinetic-energy cutoff in eV (default: the file's, else a "
    "converged one).", show_default=False)]
EngineOption = Annotated[EngineKind, typer.Option(
    "--engine", help="local: a Dask cluster of worker processes on this machine, started and "
    "stopped by the command; serial: this process only, no Dask.")]
WorkersOption = Annotated[int | None, typer.Option(
    "--workers", help="Worker processes of the local cluster (default: one per core).",
    show_default=False)]
SchedulerOption = Annotated[str | None, typer.Option(
    "--scheduler", metavar="ADDRESS", help="Run on an existing Dask scheduler instead, e.g. "
    "tcp://10.0.0.5:8786 (its workers need bandpert installed).", show_default=False)]

#: Default output folder of every command that writes (not a tracked folder of the project).
DEFAULT_OUT = Path("bandpert-out")


def json_option(command: str) -> object:
    """The ``--json PATH`` option of a command, its default named in the help."""
    return typer.Option("--json", metavar="PATH", help="Where to write the JSON results (default: "
                        "OUT/NAME.json).", show_default=False)


def name_option(default: str) -> object:
    """The ``--name NAME`` option: the base name of every file a command writes."""
    return typer.Option("--name", metavar="NAME", help="Base name of the files written: "
                        f"OUT/NAME.png, .csv, .json (default: {default}).", show_default=False)


def file_part(text: str) -> str:
    """``text`` made safe inside a file name: Γ → G, anything but letters, digits, ``.``,
    ``_`` and ``-`` → ``_``."""
    return re.sub(r"[^A-Za-z0-9._-]+", "_", text.replace("Γ", "G")).strip("_") or "_"


@contextmanager
def progress_bar(description: str) -> Iterator:
    """A transient rich progress bar on stderr; yields a ``progress(done, total)`` callback."""
    bar = Progress(TextColumn("{task.description}"), BarColumn(),
                   TextColumn("{task.percentage:>3.0f}%"), TimeRemainingColumn(), console=err,
                   transient=True, disable=not err.is_terminal)
    with bar:
        task = bar.add_task(description, total=None)

        def update(done: int, total: int) -> None:
            bar.update(task, completed=done, total=total)

        yield update


def output_base(out_dir: Path, name: str | None, default: str) -> Path:
    """``OUT/NAME``, the common stem of a command's files (``NAME`` from ``--name``, else the
    command's default, which differs between modes so that runs do not overwrite each other)."""
    if name is not None and (not name.strip() or Path(name).name != name):
        raise InputError(f"'{name}' is not a file name; expected a name without folders "
                         "(the folder is --out)", key="--name")
    return out_dir / (name if name is not None else file_part(default))


def output_paths(base: Path, image_format: ImageFormat,
                 json_path: Path | None) -> tuple[Path, Path, Path]:
    """The image, CSV and JSON paths of a command: ``OUT/NAME.<ext>`` (``--json`` wins)."""
    return (base.with_name(f"{base.name}.{image_format.value}"),
            base.with_name(f"{base.name}.csv"), json_path or base.with_name(f"{base.name}.json"))


def save_figure(fig, image: Path, image_format: ImageFormat, dpi: int = PNG_DPI) -> None:
    """Write a figure atomically in the chosen format."""
    write_figure(fig, image, image_format.value, dpi)


def check_count(value: int | None, name: str, minimum: int) -> None:
    """Refuse a count option below ``minimum`` (``name`` is the flag)."""
    if value is not None and value < minimum:
        raise InputError(f"must be at least {minimum}, got {value}", key=name)


def check_cutoff(cutoff_eV: float | None) -> None:
    """Refuse a non-positive ``--cutoff-eV``."""
    if cutoff_eV is not None and not cutoff_eV > 0:
        raise InputError(f"must be positive, got {cutoff_eV}", key="--cutoff-eV")


def parse_point(text: str) -> str | list[float]:
    """``--point`` syntax: fractional coordinates (``'0.5,0,0.5'`` or ``'0.5 0 0.5'``) or a label.

    Returns the coordinates as floats, or the text itself (a label for the library to check).
    """
    parts = text.replace(",", " ").split()
    try:
        coords = [float(x) for x in parts]
    except ValueError:
        return text
    return coords if parts else text


def engine_from_options(kind: EngineKind, workers: int | None, scheduler: str | None) -> Engine:
    """The engine named by ``--engine``, ``--workers`` and ``--scheduler``."""
    check_count(workers, "--workers", 1)
    if scheduler:
        if kind == EngineKind.serial:
            raise InputError("--scheduler and --engine serial contradict each other; give one",
                             key="--scheduler")
        return Engine("scheduler", address=scheduler)
    return Engine(kind.value, workers=workers)


#: Library option names (keys of :class:`~bandpert.errors.InputError`) → the flags that set them.
FLAGS = {
    "cutoff_eV": "--cutoff-eV", "n_k": "--k-points", "n_bands": "--bands", "exact": "--no-exact",
    "order": "--order", "coupling_threshold": "--threshold", "tolerance_eV": "--tolerance-meV",
    "radius_points": "--radius-points", "points": "--point", "point": "--point",
    "band": "--band", "temperature_K": "--temperature", "mesh": "--mesh", "method": "--method",
    "smearing_eV": "--smearing-eV", "energy_step_eV": "--step-meV", "engine": "--engine",
    "address": "--scheduler", "workers": "--workers", "axes": "--vary",
    "lower_band": "--between", "quantities": "--quantity", "form_factors": "--form-factors",
    "basis": "--basis", "alloy_end": "--alloy-end", "model": "--model", "k_max_frac": "--k-max",
    "interpolation_tolerance_eV": "--tolerance-meV",
    "basis_tolerance": "--basis-tolerance", "coarse_mesh": "--coarse-mesh",
    "broadening_eV": "--broadening-meV",
    "strain": "--strain", "hydrostatic": "--hydro", "substrate_a_A": "--on",
    "growth": "--growth", "spacing_nm": "--spacing-nm", "n_levels": "--levels",
    "k_max_invA": "--in-plane",
}

#: Library wording inside messages → the command line's wording.
_TEXT = {"form_factors": "--form-factors", "lower_band": "--between N",
         "alloy_end": "--alloy-end FILE", "Engine(kind='serial')": "--engine serial"}


def in_flag_terms(text: str) -> str:
    """Library wording in a message or note rendered in the command line's terms (:data:`_TEXT`)."""
    for name, flag in _TEXT.items():
        text = text.replace(name, flag)
    return text


def error_line(exc: InputError, flags: set[str] | None = None) -> str:
    """An input error in the command line's terms: option names rendered as their flags.

    With ``flags`` (the options of the command that ran) a key becomes a flag only when the
    command has that flag: a targets file's ``cutoff_eV`` or a structure file's ``growth`` is a
    key of that file, not ``--cutoff-eV`` or ``--growth``.
    """
    flag = FLAGS.get(exc.key)
    key = flag if flag is not None and (flags is None or flag in flags) else exc.key
    return InputError(in_flag_terms(exc.problem), exc.source, key).one_line()


#: The commands that read each kind of file (named when a command gets the other kind).
COMMANDS_BY_KIND = {"planewave": "bands, gaps, masses, dos, sweep, fullzone or check",
                    "kp": "kp, bands (its models along a path) or sweep"}


def require_kind(file: Path, wanted: str, command: str) -> None:
    """Refuse, in one line, a file of the other kind than ``command`` reads (exit 2)."""
    got = file_kind(file, prefer=wanted)
    if got is not None and got != wanted:
        raise InputError(f"this is a {KIND_NAMES[got]}, but `bandpert {command}` reads "
                         f"{KIND_NAMES[wanted]}s; give it to bandpert {COMMANDS_BY_KIND[got]}",
                         str(file))


def energy_window(e_min: float | None, e_max: float | None
                  ) -> tuple[float | None, float | None] | None:
    """The plot's energy window from --emin/--emax (an end left out follows the data)."""
    if e_min is None and e_max is None:
        return None
    if e_min is not None and e_max is not None and e_min >= e_max:
        raise InputError(f"--emin {e_min} must be below --emax {e_max}", key="--emin")
    return e_min, e_max
