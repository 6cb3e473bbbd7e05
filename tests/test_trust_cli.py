"""The trust mark on the command line: option ranges, and a summary that never flatters."""

from __future__ import annotations

import json

import pytest
from test_cli import CHAIN, MATERIALS, assert_user_error, run

import bandpert.cli.options as options


@pytest.fixture(autouse=True)
def wide_console(monkeypatch):
    monkeypatch.setattr(options.out, "width", 240)


@pytest.mark.parametrize(("args", "fragments"), [
    (["--order", "0"], ("--order", "1 to 6", "got 0")),
    (["--order", "7"], ("--order", "1 to 6", "got 7")),
    (["--threshold", "0.04"], ("--threshold", "0.05 to 0.45", "got 0.04")),
    (["--threshold", "0.5"], ("--threshold", "0.05 to 0.45", "got 0.5")),
    (["--threshold", "nan"], ("--threshold", "0.05 to 0.45", "got nan")),
    (["--radius-points", "-1"], ("--radius-points", "0 or more", "got -1")),
    (["--tolerance-meV", "0"], ("--tolerance-meV", "0.01 to 1000", "got 0")),
    (["--tolerance-meV", "-3"], ("--tolerance-meV", "0.01 to 1000", "got -3")),
    (["--tolerance-meV", "5000"], ("--tolerance-meV", "0.01 to 1000", "got 5000")),
])
def test_out_of_range_settings_are_refused(args, fragments, tmp_path):
    out_dir = tmp_path / "out"
    code, _, err = run(["bands", str(CHAIN), "--out", str(out_dir), *args])
    assert_user_error(code, err, *fragments)
    assert not out_dir.exists() or not any(out_dir.iterdir())


@pytest.mark.parametrize("order", [1, 4, 6])
def test_every_accepted_order_runs(order, tmp_path):
    code, out, err = run(["bands", str(CHAIN), "--out", str(tmp_path), "--k-points", "12",
                          "--order", str(order), "--radius-points", "0"])
    assert code == 0, err
    doc = json.loads((tmp_path / "cosine-chain-bands.json").read_text())
    pert = doc["results"]["perturbative"]
    assert pert["order"] == order
    assert pert["comparison"]["over_tolerance_trustworthy"] == 0


def test_summary_says_no_point_trustworthy(tmp_path):
    # First order on the 1966 silicon model is tens of meV off everywhere (exact
    # diagonalisation as reference): nothing may be trusted, and the summary must not print a
    # largest error "on trustworthy points".
    code, out, err = run(["bands", str(MATERIALS / "silicon.toml"), "--out", str(tmp_path),
                          "--k-points", "12", "--order", "1", "--radius-points", "0",
                          "--cutoff-eV", "110"])
    assert code == 0, err
    assert "no point trustworthy" in out
    assert "on trustworthy points" not in out
    doc = json.loads((tmp_path / "silicon-bands.json").read_text())
    cmp = doc["results"]["perturbative"]["comparison"]
    assert cmp["max_error_trustworthy_eV"] is None
    assert doc["results"]["perturbative"]["trustworthy_fraction"] == 0.0
