"""The JSON documents of every command on the bundled materials are pinned.

Source of the reference: the documents written by bandpert before its redesign into subpackages
(tests/golden/*.json, regenerated only on purpose by ``python -m tests.golden.cases``). A layout
change must leave every number equal to 1e-12 (absolute in eV, or relative).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest
from golden.cases import CASES, MATERIALS, VOLATILE
from typer.testing import CliRunner

from bandpert.cli.app import app

GOLDEN = Path(__file__).resolve().parent / "golden"


def _compare(new, old, where: str, problems: list[str]) -> None:
    if len(problems) > 20:
        return
    if isinstance(old, dict):
        if not isinstance(new, dict) or set(new) != set(old):
            problems.append(f"{where}: keys {sorted(set(old) ^ set(new or {}))}")
            return
        for key in old:
            if key not in VOLATILE:
                _compare(new[key], old[key], f"{where}.{key}", problems)
    elif isinstance(old, list):
        if not isinstance(new, list) or len(new) != len(old):
            got = len(new) if isinstance(new, list) else new
            problems.append(f"{where}: length {len(old)} -> {got}")
            return
        for i, (a, b) in enumerate(zip(new, old, strict=True)):
            _compare(a, b, f"{where}[{i}]", problems)
    elif isinstance(old, float) and isinstance(new, int | float) and not isinstance(new, bool):
        if not math.isclose(new, old, rel_tol=1e-12, abs_tol=1e-12):
            problems.append(f"{where}: {old!r} -> {new!r}")
    elif new != old:
        problems.append(f"{where}: {old!r} -> {new!r}")


@pytest.mark.parametrize("case", sorted(CASES))
def test_json_output_unchanged(case: str, tmp_path: Path) -> None:
    args = [a.format(m=MATERIALS) for a in CASES[case]]
    out = tmp_path / f"{case}.json"
    result = CliRunner().invoke(app, [*args, "--out", str(tmp_path), "--json", str(out)])
    assert result.exit_code == 0, result.output
    problems: list[str] = []
    _compare(json.loads(out.read_text()), json.loads((GOLDEN / f"{case}.json").read_text()),
             case, problems)
    assert not problems, "\n".join(problems)
