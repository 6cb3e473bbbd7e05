"""Commands whose JSON documents are pinned (tests/golden/*.json).

The redesign that split bandpert into subpackages was checked against these documents: every
number equal to 1e-12 (absolute, eV) or 1e-12 relative. ``python -m tests.golden.cases`` rewrites
them; do that only on purpose, and say in the commit which outputs changed and why.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

from bandpert.data import MATERIALS_DIR

HERE = Path(__file__).resolve().parent
MATERIALS = MATERIALS_DIR / "planewave"

# name -> command-line arguments after `bandpert`; {m} is the materials folder.
CASES: dict[str, list[str]] = {
    "bands-silicon": ["bands", "{m}/silicon.toml", "--k-points", "24"],
    "bands-aluminium": ["bands", "{m}/aluminium.toml", "--k-points", "24"],
    "bands-gaas": ["bands", "{m}/gallium-arsenide.toml", "--k-points", "16", "--exact-only"],
    "bands-germanium": ["bands", "{m}/germanium.toml", "--k-points", "16", "--exact-only"],
    "bands-chain": ["bands", "{m}/cosine-chain.toml", "--k-points", "30"],
    "bands-square": ["bands", "{m}/square-demo.toml", "--k-points", "20"],
    # spinor plane waves with spin-orbit and nonlocal terms, perturbative beside exact (a
    # small cutoff keeps it cheap; a refit of the bundled file changes it on purpose)
    "bands-silicon-fitted": ["bands", "{m}/silicon-fitted.toml", "--k-points", "12",
                             "--cutoff-eV", "60"],
    "gaps-aluminium": ["gaps", "{m}/aluminium.toml", "--k-points", "20"],
    "gaps-silicon-X": ["gaps", "{m}/silicon.toml", "--point", "X", "--k-points", "20"],
    "masses-silicon": ["masses", "{m}/silicon.toml"],
    "masses-gaas": ["masses", "{m}/gallium-arsenide.toml"],
    "kp-gaas": ["kp", "gallium-arsenide"],
    "kp-inp": ["kp", "indium-phosphide"],
    "fullzone-silicon": ["fullzone", "{m}/silicon.toml", "--k-points", "16"],
    "dos-aluminium": ["dos", "{m}/aluminium.toml", "--mesh", "6", "--engine", "serial"],
    "sweep-silicon": ["sweep", "{m}/silicon.toml", "--vary", "lattice.a_A=5.40:5.46:2",
                      "--engine", "serial", "--k-points", "20"],
}

# Keys whose values legitimately differ between runs or layouts (paths, versions).
VOLATILE = {"version", "file", "files", "outputs", "path", "json", "out"}


def run_case(name: str, out: Path) -> dict:
    """Run one case with its JSON written to ``out`` and return the document."""
    args = [a.format(m=MATERIALS) for a in CASES[name]]
    json_path = out / f"{name}.json"
    cmd = [sys.executable, "-m", "bandpert", *args, "--out", str(out), "--json", str(json_path)]
    proc = subprocess.run(cmd, capture_output=True, text=True, timeout=600)
    if proc.returncode != 0:
        raise RuntimeError(f"{name}: exit {proc.returncode}\n{proc.stderr}")
    return json.loads(json_path.read_text())


if __name__ == "__main__":
    import tempfile

    with tempfile.TemporaryDirectory() as tmp:
        for case in CASES:
            doc = run_case(case, Path(tmp))
            text = json.dumps(doc, indent=1, ensure_ascii=False)
            text = text.replace(str(HERE.parent.parent) + "/", "")  # repository-relative paths
            (HERE / f"{case}.json").write_text(text)
            print("wrote", case)
