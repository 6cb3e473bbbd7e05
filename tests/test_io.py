"""Outputs are atomic and never carry a non-finite number."""

from __future__ import annotations

import json
import math
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from bandpert.cli.app import main
from bandpert.data import MATERIALS_DIR
from bandpert.io import (
    COMMIT_NAME,
    TEMP_PREFIX,
    all_or_nothing,
    atomic_path,
    write_csv,
    write_json,
    write_text,
    write_with,
)


def test_interrupted_write_leaves_no_file(tmp_path):
    # A run killed while writing (KeyboardInterrupt in the middle) leaves neither the target
    # nor a temporary file behind (common practice, no source).
    target = tmp_path / "out" / "bands.json"

    def half_then_interrupt(path):
        path.write_text('{"results": [1, 2,', encoding="utf-8")
        raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        write_with(target, half_then_interrupt)
    assert not target.exists()
    assert list(target.parent.iterdir()) == []


def test_interrupted_write_keeps_the_previous_file(tmp_path):
    target = tmp_path / "bands.csv"
    target.write_text("old\n", encoding="utf-8")
    with pytest.raises(RuntimeError), atomic_path(target) as tmp:
        tmp.write_text("new but incomplete", encoding="utf-8")
        raise RuntimeError("disk full")
    assert target.read_text(encoding="utf-8") == "old\n"
    assert [p.name for p in tmp_path.iterdir()] == ["bands.csv"]


@pytest.mark.parametrize("bad", [math.nan, math.inf, -math.inf])
def test_non_finite_numbers_never_reach_a_file(tmp_path, bad):
    with pytest.raises(ValueError, match="non-finite"):
        write_json(tmp_path / "a.json", {"results": {"energies_eV": np.array([1.0, bad])}})
    with pytest.raises(ValueError, match="non-finite"):
        write_csv(tmp_path / "a.csv", ["h"], ["x"], np.array([[bad]]))
    assert list(tmp_path.iterdir()) == []


def test_written_files_have_ordinary_permissions(tmp_path):
    import os

    write_json(tmp_path / "a.json", {"x": 1})
    mode = os.stat(tmp_path / "a.json").st_mode & 0o777
    umask = os.umask(0)
    os.umask(umask)
    assert mode == 0o666 & ~umask


# ---------------------------------------------------------------------------------------------
# a command's files: all or none
# ---------------------------------------------------------------------------------------------

def _visible(folder):
    return sorted(p.name for p in folder.iterdir())


def test_a_failure_after_the_first_file_writes_nothing(tmp_path):
    # The first file is complete before the second fails: neither may appear, and the previous
    # set stays as it was (common practice, no source: all-or-nothing output).
    (tmp_path / "a.json").write_text("old a\n", encoding="utf-8")
    with pytest.raises(RuntimeError), all_or_nothing():
        write_json(tmp_path / "a.json", {"x": 1})
        write_text(tmp_path / "b.csv", "complete\n")
        raise RuntimeError("the third output failed")
    assert _visible(tmp_path) == ["a.json"]
    assert (tmp_path / "a.json").read_text(encoding="utf-8") == "old a\n"


def test_a_non_finite_number_in_the_last_output_writes_nothing(tmp_path):
    with pytest.raises(ValueError, match="non-finite"), all_or_nothing():
        write_with(tmp_path / "fig.png", lambda p: p.write_bytes(b"png"))
        write_json(tmp_path / "sub" / "r.json", {"e": [1.0, math.nan]})
    assert _visible(tmp_path) == []


def test_the_whole_set_appears_together(tmp_path):
    with all_or_nothing():
        write_json(tmp_path / "a.json", {"x": 1})
        write_text(tmp_path / "other" / "b.txt", "b\n")
        with all_or_nothing():  # an inner block joins the outer one
            write_text(tmp_path / "c.txt", "c\n")
        assert not (tmp_path / "a.json").exists() and not (tmp_path / "other" / "b.txt").exists()
    assert _visible(tmp_path) == ["a.json", "c.txt", "other"]
    assert _visible(tmp_path / "other") == ["b.txt"]
    assert json.loads((tmp_path / "a.json").read_text(encoding="utf-8")) == {"x": 1}


def test_leftovers_of_a_dead_writer_are_cleaned_and_a_begun_commit_completed(tmp_path):
    dead = _dead_pid()
    (tmp_path / f"{TEMP_PREFIX}{dead}-a.json.xyz.tmp").write_text("half", encoding="utf-8")
    half = tmp_path / f"{TEMP_PREFIX}{dead}-abc.staging"
    half.mkdir()
    (half / "0-x.json").write_text("never committed", encoding="utf-8")
    begun = tmp_path / f"{TEMP_PREFIX}{dead}-def.staging"
    begun.mkdir()
    (begun / "1-y.json").write_text("new y\n", encoding="utf-8")
    (begun / COMMIT_NAME).write_text(json.dumps([["0-x.json", "x.json"], ["1-y.json", "y.json"]]),
                                     encoding="utf-8")  # x.json was already renamed
    (tmp_path / "x.json").write_text("new x\n", encoding="utf-8")
    alive = tmp_path / f"{TEMP_PREFIX}{os.getpid()}-live.staging"
    alive.mkdir()
    write_json(tmp_path / "z.json", {"z": 1})
    assert _visible(tmp_path) == [alive.name, "x.json", "y.json", "z.json"]
    assert (tmp_path / "y.json").read_text(encoding="utf-8") == "new y\n"


def _dead_pid() -> int:
    child = subprocess.Popen([sys.executable, "-c", "pass"])
    child.wait()
    return child.pid


#: A child that runs the real command line; its figure writer finishes the image, says so and
#: then hangs, as a long write would.
SLOW_CHILD = """
import sys, time
from pathlib import Path
from matplotlib.figure import Figure
original = Figure.savefig
def slow_savefig(self, *args, **kwargs):
    original(self, *args, **kwargs)
    Path(sys.argv[1]).write_text("writing", encoding="utf-8")
    time.sleep(120)
Figure.savefig = slow_savefig
from bandpert.cli.app import main
main(["bands", sys.argv[2], "--out", sys.argv[3], "--k-points", "8", "--radius-points", "2",
      "--cutoff-eV", "200"])
"""


def test_sigkill_during_a_long_write_keeps_the_previous_set(tmp_path):
    # A real process killed with SIGKILL (no Python handler runs) while writing its outputs:
    # the folder keeps the previous complete set, and the next run leaves no temporary file.
    material = MATERIALS_DIR / "planewave" / "cosine-chain.toml"
    out = tmp_path / "out"
    args = ["bands", str(material), "--out", str(out), "--k-points", "8", "--radius-points", "2",
            "--cutoff-eV", "200"]
    with pytest.raises(SystemExit) as done:
        main(args)
    assert done.value.code == 0
    before = {p.name: p.read_bytes() for p in out.iterdir()}
    assert len(before) == 4
    signal_file = tmp_path / "writing"
    env = {**os.environ, "PYTHONPATH": str(Path(__file__).resolve().parents[1]),
           "MPLBACKEND": "Agg"}
    child = subprocess.Popen([sys.executable, "-c", SLOW_CHILD, str(signal_file), str(material),
                              str(out)], env=env, stdout=subprocess.DEVNULL,
                             stderr=subprocess.DEVNULL)
    try:
        for _ in range(1200):
            if signal_file.exists() or child.poll() is not None:
                break
            time.sleep(0.1)
        assert signal_file.exists(), "the child never reached its write"
        child.send_signal(signal.SIGKILL)
    finally:
        child.kill()
        child.wait()
    assert child.returncode == -signal.SIGKILL
    visible = {p.name: p.read_bytes() for p in out.iterdir() if not p.name.startswith(".")}
    assert visible == before  # the previous set, complete and unchanged
    with pytest.raises(SystemExit) as done:
        main(args)
    assert done.value.code == 0
    assert sorted(p.name for p in out.iterdir()) == sorted(before)  # no temporary file left
