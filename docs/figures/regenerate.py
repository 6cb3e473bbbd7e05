"""Regenerate every figure the README shows, with the commands the README prints beside them.

Run from the repository root: ``python3 docs/figures/regenerate.py`` (about 5 minutes on two
cores; add figure names to redo only those). Each entry is the figure file and the exact command
line after ``bandpert``; the files land in ``docs/figures/`` under the names the README links to
(tests/test_cli_figures.py holds the README and this table to each other).
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
OUT = "docs/figures"

#: figure file → command lines (after ``bandpert``) that write it, in order.
FIGURES: dict[str, list[list[str]]] = {
    "aluminium-bands.png": [["bands", "aluminium", "--out", OUT]],
    "silicon-bands.png": [["bands", "silicon", "--out", OUT]],
    "silicon-exact-bands.png": [["bands", "silicon", "--exact-only", "--emin", "-13", "--emax",
                                 "6", "--out", OUT]],
    "cosine-chain-bands.png": [["bands", "cosine-chain", "--out", OUT]],
    "aluminium-gaps.png": [["gaps", "aluminium", "--out", OUT]],
    "gallium-arsenide-implied-kp.png": [
        ["masses", "gallium-arsenide", "--write-kp", f"{OUT}/gallium-arsenide-implied-kp.toml",
         "--out", OUT],
        ["kp", f"{OUT}/gallium-arsenide-implied-kp.toml", "--compare", "gallium-arsenide",
         "--out", OUT]],
    "silicon-fullzone.png": [["fullzone", "silicon", "--out", OUT]],
    "silicon-sweep.png": [["sweep", "silicon", "--vary", "lattice.a_A=5.30:5.56:261",
                           "--quantity", "edges", "--quantity", "gaps", "--quantity", "masses",
                           "--point", "G", "--point", "X", "--point", "L", "--name",
                           "silicon-sweep", "--out", OUT]],
    "aluminium-dos.png": [["dos", "aluminium", "--mesh", "24", "--out", OUT]],
}


def command_text(args: list[str]) -> str:
    """The command as the README prints it."""
    return "bandpert " + " ".join(args)


def main(names: list[str]) -> int:
    """Run the commands of the named figures (default: all); return the exit status."""
    for figure in names or list(FIGURES):
        for args in FIGURES[figure]:
            print(command_text(args), flush=True)
            done = subprocess.run([sys.executable, "-m", "bandpert", *args],
                                  cwd=HERE.parent.parent, check=False)
            if done.returncode != 0:
                return done.returncode
        if not (HERE / figure).exists():
            print(f"{figure} was not written", file=sys.stderr)
            return 1
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
