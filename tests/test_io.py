"""Outputs are atomic and never carry a non-finite number."""

from __future__ import annotations

import math

import numpy as np
import pytest

from bandpert.io import atomic_path, write_csv, write_json, write_with


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
