"""The library leaves matplotlib's global state alone: no backend switch, no pyplot figures."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent

SCRIPT = """
import sys
import matplotlib
matplotlib.use("svg")                      # the user's choice, e.g. a notebook's backend
import bandpert.output.figures, bandpert.cli.app
from bandpert.input.material import load_material
from bandpert.physics.bands import compute_band_structure
from bandpert.output.figures import band_figure
m = load_material("cosine-chain")
fig = band_figure(compute_band_structure(m, n_k=8, n_bands=3))
assert matplotlib.get_backend() == "svg", matplotlib.get_backend()
assert "matplotlib.pyplot" not in sys.modules, "the library imported pyplot"
print("ok")
"""


def test_library_keeps_the_users_backend_and_registers_no_figures():
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    env.pop("MPLBACKEND", None)
    run = subprocess.run([sys.executable, "-c", SCRIPT], capture_output=True, text=True,
                         env=env, cwd=ROOT, timeout=120)
    assert run.returncode == 0, run.stderr
    assert run.stdout.strip() == "ok"


def test_no_backend_selection_in_the_library():
    for path in (ROOT / "bandpert").rglob("*.py"):
        text = path.read_text(encoding="utf-8")
        assert "matplotlib.use(" not in text, path
        assert "import matplotlib.pyplot" not in text, path
