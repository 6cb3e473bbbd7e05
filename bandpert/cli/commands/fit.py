"""``bandpert fit``: adjust named parameters of a material file to target quantities."""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Annotated

import numpy as np
import typer
from rich.table import Table

from ...data import find_material
from ...input.material import parse_material
from ...input.reader import read_toml_document
from ...input.toml_text import to_toml
from ...io import write_json, write_text
from ...output.fit_report import fit_results, uncertainty_text
from ...output.report import document
from ...physics.fit_targets import parse_targets
from ...runs.fit import MAX_EVALUATIONS, Fit, run_fit
from ..options import (
    DEFAULT_OUT,
    MaterialFile,
    OutDir,
    err,
    json_option,
    name_option,
    out,
    output_base,
    progress_bar,
    require_kind,
)

#: Exit status of a fit stopped by Ctrl-C that kept its best point: 3, the tool's status for a
#: partial result (as a sweep with failed points). 130 would make the CLI discard every staged
#: file, the kept point included.
INTERRUPTED_EXIT = 3


def fit(
    file: MaterialFile,
    targets: Annotated[Path, typer.Argument(metavar="TARGETS", help="TOML file of the "
                                            "parameters to vary and the target quantities "
                                            "(README, \"bandpert fit\").", show_default=False)],
    out_dir: OutDir = DEFAULT_OUT,
    json_path: Annotated[Path | None, json_option("fit")] = None,
    name: Annotated[str | None, name_option("<file>-fitted")] = None,
) -> None:
    """Fit parameters of a plane-wave material file to measured targets (least squares).

    Writes OUT/NAME.toml, the material with the fitted values and a source naming every
    target, and OUT/NAME.json; prints the fitted values with their uncertainties and the
    residual of every target. Ctrl-C keeps the best point so far in
    OUT/NAME-interrupted-best-so-far.toml (exit status 3, a partial result).
    """
    require_kind(file, "planewave", "fit")
    path = find_material(file, "planewave")
    doc = read_toml_document(path)
    material = parse_material(doc, str(path))
    spec = parse_targets(read_toml_document(targets, "a targets TOML file"), str(targets),
                         material)
    base = output_base(out_dir, name, f"{file.stem}-fitted")
    state = Fit(doc, str(path), spec)
    try:
        with progress_bar("fitting") as progress:
            result = run_fit(doc, str(path), spec, fit=state,
                             progress=lambda n, cost: progress(min(n, MAX_EVALUATIONS),
                                                               MAX_EVALUATIONS))
    except KeyboardInterrupt:
        if state.state.parameters is None:
            raise
        kept = base.with_name(f"{base.name}-interrupted-best-so-far.toml")
        best = state.pinned_document(state.state.parameters)
        best["source"] = (f"{doc.get('source', '')}; NOT A CONVERGED FIT: best point after "
                          f"{state.state.evaluations} evaluations of an interrupted bandpert fit")
        write_text(kept, to_toml(best))
        print(f"bandpert: interrupted; the best point so far (cost {state.state.cost:.4g}) is "
              f"in {kept}", file=sys.stderr)
        raise typer.Exit(INTERRUPTED_EXIT) from None
    toml_path = base.with_name(f"{base.name}.toml")
    json_path = json_path or base.with_name(f"{base.name}.json")
    write_text(toml_path, to_toml(result.document))
    settings = {"parameters": list(spec.parameters), "cutoff_eV": state.targets.cutoff_eV,
                "targets_file": str(targets)}
    write_json(json_path, document("fit", material, settings,
                                   fit_results(result, spec, str(toml_path))))
    table = Table(title=f"{material.name}: fitted parameters", title_justify="left")
    for col in ("parameter", "start", "fitted", "± 1σ"):
        table.add_column(col, justify="left" if col == "parameter" else "right")
    for k, s, v, u, side in zip(result.keys, result.start, result.values, result.uncertainties,
                                result.at_bound, strict=True):
        table.add_row(k, f"{s:.6g}", f"{v:.6g}", uncertainty_text(u, side))
    out.print(table)
    table = Table(title="targets", title_justify="left")
    for col in ("target", "value", "model", "residual / tolerance"):
        table.add_column(col, justify="left" if col == "target" else "right")
    for t, m, r in zip(spec.targets, result.model_values, result.residuals, strict=True):
        table.add_row(t.name, f"{t.value:.4g} {t.unit}", f"{m:.4g}",
                      f"{r:+.2f}" + ("" if abs(r) <= 1 else "  (outside)"))
    out.print(table)
    free = len(result.keys) - len(result.keys_at_bound)
    out.print(f"Jacobian rank {result.rank} of {free}"
              + (f" (the parameters not at a bound; at a bound: "
                 f"{', '.join(result.keys_at_bound)})" if result.keys_at_bound else "")
              + (f"; not determined by the targets: {', '.join(result.undetermined)}"
                 if result.undetermined else "")
              + f"; {result.evaluations} evaluations")
    outside = int(np.sum(np.abs(result.residuals) > 1))
    if outside:
        err.print(f"warning: {outside} target(s) outside their tolerance")
    for warning in result.warnings:
        err.print(f"warning: {warning}")
    out.print(f"wrote {toml_path}, {json_path}")
